//! `[righting]`: the take-off faces and the limits the planner works to.
//! Take-off face ids are checked against the cage in `crate::vehicle`
//! (the hull numbers the faces); [`takeoff_face_path`] locates them there.

use super::ProfileError;
use super::read::{Bound, Form, KeyPath, Table, clip};

/// Which faces the vehicle can take off from.
#[derive(Debug, Clone, PartialEq)]
pub enum TakeoffFaces {
    /// Every stable face whose tilt when upright is at most this.
    Auto {
        /// Largest tilt from level, degrees.
        max_tilt_deg: f64,
    },
    /// Listed face ids, each once.
    List(Vec<String>),
}

/// Righting settings.
#[derive(Debug, Clone, PartialEq)]
pub struct Righting {
    /// Faces to right the vehicle to.
    pub takeoff_faces: TakeoffFaces,
    /// Whether pivots about a single node are planned.
    pub vertex_pivots: bool,
    /// Cost multiplier for a vertex pivot (they are riskier than edge rolls).
    pub vertex_pivot_weight: f64,
    /// Required ratio of available to needed moment over the whole roll.
    pub torque_margin: f64,
    /// Coulomb friction coefficient between cage and ground.
    pub friction_coefficient: f64,
}

const KEYS: &[&str] = &[
    "takeoff_faces",
    "max_takeoff_tilt_deg",
    "vertex_pivots",
    "vertex_pivot_weight",
    "torque_margin",
    "friction_coefficient",
];

/// The key of take-off face `index` (0-based) in a listed `takeoff_faces`;
/// a left-out list locates at the `[righting]` table.
pub fn takeoff_face_path(index: usize) -> KeyPath {
    KeyPath::section("righting")
        .key("takeoff_faces")
        .index(index)
}

const FACES: &str = "\"auto\" or a non-empty list of face ids such as [\"F1\", \"F2\"]";

pub(super) fn read(root: &Table) -> Result<Righting, ProfileError> {
    let t = root.table("righting", KEYS)?;
    let takeoff_faces = match t.form("takeoff_faces") {
        None => auto(&t)?,
        Some(Form::Text) => {
            if let Some(w) = t.text("takeoff_faces")?
                && w.get_ref() != "auto"
            {
                return Err(t.doc().invalid(
                    &w.span(),
                    &t.path("takeoff_faces"),
                    FACES,
                    format!("{:?}", clip(w.get_ref())),
                ));
            }
            auto(&t)?
        }
        Some(Form::List) => {
            let Some(list) = t.texts("takeoff_faces")? else {
                return Err(t.wrong_form("takeoff_faces", FACES));
            };
            if list.get_ref().is_empty() {
                return Err(t.doc().invalid(
                    &list.span(),
                    &t.path("takeoff_faces"),
                    FACES,
                    "an empty list",
                ));
            }
            let mut out: Vec<String> = Vec::new();
            for (i, f) in list.get_ref().iter().enumerate() {
                let f = f.get_ref();
                if !is_face_id(f) {
                    return Err(t.doc().invalid_key(
                        &takeoff_face_path(i),
                        "a face id such as \"F1\"",
                        format!("{:?}", clip(f)),
                    ));
                }
                if out.contains(f) {
                    return Err(t.doc().invalid_key(
                        &takeoff_face_path(i),
                        "each take-off face listed once",
                        format!("{f} again"),
                    ));
                }
                out.push(f.clone());
            }
            TakeoffFaces::List(out)
        }
        Some(Form::Other) => return Err(t.wrong_form("takeoff_faces", FACES)),
    };
    Ok(Righting {
        takeoff_faces,
        vertex_pivots: t.flag_or("vertex_pivots", false)?,
        vertex_pivot_weight: t.number_or(
            "vertex_pivot_weight",
            Bound::within(1.0, 100.0, ""),
            1.5,
        )?,
        torque_margin: t.number_or("torque_margin", Bound::within(1.0, 100.0, ""), 1.2)?,
        friction_coefficient: t.number_or(
            "friction_coefficient",
            Bound::within(0.0, 10.0, ""),
            0.6,
        )?,
    })
}

fn auto(t: &Table) -> Result<TakeoffFaces, ProfileError> {
    Ok(TakeoffFaces::Auto {
        max_tilt_deg: t.number_or(
            "max_takeoff_tilt_deg",
            Bound::within(0.0, 90.0, "deg"),
            10.0,
        )?,
    })
}

fn is_face_id(s: &str) -> bool {
    s.strip_prefix('F')
        .is_some_and(|n| !n.is_empty() && n.chars().all(|c| c.is_ascii_digit()))
}
