//! The validated vehicle: a profile, the cage built from it, and every
//! check that needs both. Every command and the screens load a vehicle
//! through [`load`] (or [`demo`]); nothing else builds a cage from a file.
//!
//! The profile checks each key on its own and against its section
//! (`crate::profile`); the checks here need the built cage (the hull's face
//! numbering, member lengths, the self-stress). Each refusal is located at
//! the key it is about through [`Profile::invalid`].
//!
//! To add a check that needs the cage: write a [`CageCheck`] function below
//! and list it in [`CAGE_CHECKS`]; point its refusal at a key path from
//! `crate::profile` (`takeoff_face_path`, `member_path`, `cage_key`, ...).
//! The prestress check runs last, on the cage's statics, which the loaded
//! vehicle keeps ([`Loaded::statics`]) so no command works them out again.

use crate::cage::{Cage, CageError};
use crate::impact::CageStatics;
use crate::profile::{
    CageShape, DEMO_PROFILE_NAME, DEMO_PROFILE_TOML, Profile, ProfileError, TakeoffFaces, cage_key,
    member_path, pretension_path, takeoff_face_path, vehicle_key,
};
use crate::statics::StaticsError;

/// A profile that passed every check, and its cage.
#[derive(Debug, Clone)]
pub struct Loaded {
    /// The profile.
    pub profile: Profile,
    /// Its cage.
    pub cage: Cage,
    /// The cage's statics (structure, rank, self-stress, prestress), worked
    /// out once by the prestress check and shared by every analysis.
    pub statics: CageStatics,
}

/// Why a vehicle could not be loaded.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum LoadError {
    /// The profile is refused, at a key (bad input).
    #[error(transparent)]
    Profile(#[from] ProfileError),
    /// A computation the checks need did not finish (not the file's fault).
    #[error("{file}: checking the prestress: {source}")]
    Statics {
        /// File name as given by the caller.
        file: String,
        /// What failed.
        source: StaticsError,
    },
}

/// A check that needs the built cage.
pub type CageCheck = fn(&Profile, &Cage) -> Result<(), LoadError>;

/// The checks that need the built cage, in the order they run (then the
/// prestress check, which needs the cage's statics too).
pub const CAGE_CHECKS: &[CageCheck] = &[
    takeoff_faces_exist,
    takeoff_faces_hold_the_vehicle,
    rods_do_not_cross,
];

/// Load a vehicle from a profile file's bytes; `file` names it in messages.
pub fn load(bytes: &[u8], file: &str) -> Result<Loaded, LoadError> {
    Loaded::new(Profile::parse_bytes(bytes, file)?)
}

/// The bundled demo vehicle (invented data).
pub fn demo() -> Result<Loaded, LoadError> {
    load(DEMO_PROFILE_TOML.as_bytes(), DEMO_PROFILE_NAME)
}

impl Loaded {
    /// Build the cage of a parsed profile and run every check on both.
    pub fn new(profile: Profile) -> Result<Loaded, LoadError> {
        let built = Built::new(profile)?;
        let statics = built.statics()?;
        Ok(built.finish(statics))
    }
}

/// A profile whose cage is built and has passed the checks that need only
/// the cage ([`CAGE_CHECKS`]): [`Loaded::new`] up to the statics, for a
/// caller with other work to do on the cage while they are worked out.
#[derive(Debug, Clone)]
pub struct Built {
    /// The profile.
    pub profile: Profile,
    /// Its cage.
    pub cage: Cage,
}

impl Built {
    /// Build the cage and run the checks that need only the cage.
    pub fn new(profile: Profile) -> Result<Built, LoadError> {
        let cage = Cage::from_profile(&profile).map_err(|e| cage_refusal(&profile, e))?;
        for check in CAGE_CHECKS {
            check(&profile, &cage)?;
        }
        Ok(Built { profile, cage })
    }

    /// The cage's statics, once the prestress check has passed on them.
    pub fn statics(&self) -> Result<CageStatics, LoadError> {
        let statics =
            CageStatics::new(&self.cage, &self.profile).map_err(|source| LoadError::Statics {
                file: self.profile.source.clone(),
                source,
            })?;
        prestress_within_capacity(&self.profile, &statics)?;
        Ok(statics)
    }

    /// The loaded vehicle, with the statics [`Built::statics`] gave.
    pub fn finish(self, statics: CageStatics) -> Loaded {
        Loaded {
            profile: self.profile,
            cage: self.cage,
            statics,
        }
    }
}

/// A cage that cannot be built, located at the key that decides it.
fn cage_refusal(p: &Profile, e: CageError) -> LoadError {
    let err = match e {
        CageError::Hull(h) => p.invalid(
            &cage_key("node"),
            "nodes that span a volume (a convex cage)",
            h.to_string(),
        ),
        CageError::RodsTooHeavy { rods_kg, mass_kg } => p.invalid(
            &vehicle_key("mass_kg"),
            format!("a mass above the rods' own {rods_kg:.3} kg (by their section and density)"),
            format!("{mass_kg} kg"),
        ),
        CageError::PayloadCannotCarryCom { com_m, nodes } => p.invalid(
            &vehicle_key("com_m"),
            "a centre of mass the payload nodes can carry without a negative share of the payload (name payload nodes around it, or none to use them all)",
            format!("{com_m:?} with payload nodes {nodes:?}"),
        ),
        CageError::UnknownFace(id, count) => p.invalid(
            &takeoff_face_path(0).parent().unwrap_or_default(),
            format!("a face of this cage (it has F1..F{count})"),
            id,
        ),
    };
    LoadError::Profile(err)
}

/// Every listed take-off face is a face of the cage (the hull numbers them).
fn takeoff_faces_exist(p: &Profile, c: &Cage) -> Result<(), LoadError> {
    let TakeoffFaces::List(ids) = &p.righting.takeoff_faces else {
        return Ok(());
    };
    for (i, id) in ids.iter().enumerate() {
        if c.face_index(id).is_none() {
            return Err(p
                .invalid(
                    &takeoff_face_path(i),
                    format!("a face of this cage (it has F1..F{})", c.faces.len()),
                    format!("{id}, which is not a face of this cage"),
                )
                .into());
        }
    }
    Ok(())
}

/// Every listed take-off face is one the vehicle can rest on (its centre
/// of mass projects inside the face): a plan can never end on any other,
/// so the profile is refused at that face rather than every plan failing.
fn takeoff_faces_hold_the_vehicle(p: &Profile, c: &Cage) -> Result<(), LoadError> {
    let TakeoffFaces::List(ids) = &p.righting.takeoff_faces else {
        return Ok(());
    };
    for (i, id) in ids.iter().enumerate() {
        let Some(f) = c.face_index(id).and_then(|k| c.faces.get(k)) else {
            continue;
        };
        if !f.stable {
            let resting: Vec<&str> = c
                .faces
                .iter()
                .filter(|f| f.stable)
                .map(|f| f.id.as_str())
                .collect();
            return Err(p
                .invalid(
                    &takeoff_face_path(i),
                    format!(
                        "a face the vehicle can rest on (its centre of mass over the face): {}",
                        resting.join(", ")
                    ),
                    format!("{id}, over which the centre of mass does not lie, so the vehicle tips off it"),
                )
                .into());
        }
    }
    Ok(())
}

/// Shortest distance between the segments a0-a1 and b0-b1 (clamped
/// closest points; Ericson, Real-Time Collision Detection, 2005, 5.1.9).
fn segment_distance_m(a0: [f64; 3], a1: [f64; 3], b0: [f64; 3], b1: [f64; 3]) -> f64 {
    use nalgebra::Vector3;
    let (p1, q1, p2, q2) = (
        Vector3::from(a0),
        Vector3::from(a1),
        Vector3::from(b0),
        Vector3::from(b1),
    );
    let (d1, d2, r) = (q1 - p1, q2 - p2, p1 - p2);
    let (a, e, f) = (d1.dot(&d1), d2.dot(&d2), d2.dot(&r));
    let c = d1.dot(&r);
    let b = d1.dot(&d2);
    let denom = a * e - b * b;
    let mut s = if denom > 1e-18 * (a * e).max(1e-300) {
        ((b * f - c * e) / denom).clamp(0.0, 1.0)
    } else {
        0.0
    };
    let mut t = if e > 0.0 { (b * s + f) / e } else { 0.0 };
    if t < 0.0 {
        t = 0.0;
        s = if a > 0.0 {
            (-c / a).clamp(0.0, 1.0)
        } else {
            0.0
        };
    } else if t > 1.0 {
        t = 1.0;
        s = if a > 0.0 {
            ((b - c) / a).clamp(0.0, 1.0)
        } else {
            0.0
        };
    }
    ((p1 + d1 * s) - (p2 + d2 * t)).norm()
}

/// No two rods of an explicit cage pass through each other: rods that
/// share no node must stay at least one rod diameter apart (centre lines
/// closer than that mean the tubes intersect).
fn rods_do_not_cross(p: &Profile, _c: &Cage) -> Result<(), LoadError> {
    let CageShape::Explicit { nodes, rods, .. } = &p.cage else {
        return Ok(());
    };
    let clearance_m = p.rod.outer_diameter_mm * 1e-3;
    let pos = |i: usize| nodes.get(i).map(|n| n.pos_m);
    for (i, a) in rods.iter().enumerate() {
        for (j, b) in rods.iter().enumerate().skip(i + 1) {
            if a.nodes.iter().any(|n| b.nodes.contains(n)) {
                continue;
            }
            let (Some(a0), Some(a1), Some(b0), Some(b1)) = (
                pos(a.nodes[0]),
                pos(a.nodes[1]),
                pos(b.nodes[0]),
                pos(b.nodes[1]),
            ) else {
                continue;
            };
            let d = segment_distance_m(a0, a1, b0, b1);
            if d < clearance_m {
                let name = |k: usize| nodes.get(k).map_or("?", |n| n.id.as_str());
                return Err(p
                    .invalid(
                        &member_path(true, j),
                        format!(
                            "rods that do not pass through each other (centre lines at least the rod diameter, {:.1} mm, apart)",
                            p.rod.outer_diameter_mm
                        ),
                        format!(
                            "rod {}-{} crossing rod {} ({}-{}) at {:.1} mm",
                            name(b.nodes[0]),
                            name(b.nodes[1]),
                            i + 1,
                            name(a.nodes[0]),
                            name(a.nodes[1]),
                            d * 1e3
                        ),
                    )
                    .into());
            }
        }
    }
    Ok(())
}

/// The pretension alone must leave every member within its capacity: a
/// rod that buckles under the prestress has no reserve for any impact.
/// A cage with no self-stress carries no prestress (the impact analysis
/// refuses it on its own).
fn prestress_within_capacity(p: &Profile, statics: &CageStatics) -> Result<(), LoadError> {
    let (s, ss) = (&statics.structure, &statics.self_stress);
    // A utilisation that is not a number counts as beyond capacity (fail safe).
    let mut worst: Option<(usize, f64, f64, f64)> = None;
    for (j, (bar, &t)) in s.bars.iter().zip(&ss.prestress_n).enumerate() {
        let u = bar.utilisation(t);
        let u = if u.is_nan() { f64::INFINITY } else { u };
        if worst.is_none_or(|w| u > w.1) {
            worst = Some((j, u, t, bar.capacity_n));
        }
    }
    let Some((j, u, force_n, capacity_n)) = worst else {
        return Ok(());
    };
    if u < 1.0 {
        return Ok(());
    }
    let limit_n = if u.is_finite() && u > 0.0 {
        p.string.pretension_n / u
    } else {
        0.0
    };
    Err(p
        .invalid(
            &pretension_path(),
            format!(
                "a pretension that leaves every member within its capacity (below {limit_n:.1} N for this cage)"
            ),
            format!(
                "{} N, which loads {} to {:.1} N against a capacity of {:.1} N before any impact",
                p.string.pretension_n,
                s.member_id(j),
                force_n.abs(),
                capacity_n
            ),
        )
        .into())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_demo_vehicle_loads() {
        let l = demo().expect("demo vehicle");
        assert_eq!(l.cage.faces.len(), 20);
    }

    #[test]
    fn a_pretension_that_buckles_the_rods_is_refused_at_its_key() {
        // The demo's rods: CFRP tube 8/6 mm, E 90 GPa, L 0.40 m. Pinned-end
        // Euler load pi^2 E I / L^2 with I = pi (D^4 - d^4) / 64 = 137.4 mm^4
        // (Roark's Formulas for Stress and Strain, Table 15.1) gives 763 N.
        // In the six-strut cage at equilibrium spacing every rod carries
        // sqrt(6) times the string tension (Tibert & Pellegrino 2003, the
        // expanded octahedron's self-stress; docs/references.md), so 400 N of pretension puts
        // about 980 N on each rod: beyond buckling. The string's own
        // capacity (700 N x 0.6 = 420 N) is not reached.
        let text = DEMO_PROFILE_TOML.replace("pretension_n = 20.0", "pretension_n = 400.0");
        let e = load(text.as_bytes(), "p.toml").unwrap_err();
        let line = text
            .lines()
            .position(|l| l.starts_with("pretension_n"))
            .unwrap()
            + 1;
        let msg = e.to_string();
        assert!(msg.starts_with(&format!("p.toml:{line}:16: cage.string_section.pretension_n: expected a pretension that leaves every member within its capacity")), "{msg}");
        assert!(msg.contains("against a capacity of 763.0 N"), "{msg}");
    }
}
