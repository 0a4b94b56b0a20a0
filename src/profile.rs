//! Vehicle profiles: one TOML file per vehicle, SI units with the unit in
//! the key name.
//!
//! The file is parsed into a tree that keeps the span of every key and
//! value, then each section reads its own keys from it (one file per
//! section below; [`read`] is the one place key paths are written, values
//! are typed and bounds are checked). Every refusal names the file, line,
//! column, key, what was expected and what was found, in our words.
//!
//! Checks that need the built cage (take-off face ids, the prestress
//! against member capacities, the lumped masses) are in `crate::vehicle`,
//! which locates its refusals through [`Profile::locations`].
//!
//! To add a key: add it to its section's `KEYS`, read it in that section's
//! `read` function (with its bound and default), add the typed field, and
//! list it in README's profile table. Nothing else changes.

mod impact;
mod inspection;
mod preflight;
pub mod read;
mod righting;
mod rotor;
mod shape;
mod vehicle;
mod watch;

pub use impact::{ImpactSettings, Surface, default_surfaces};
pub use inspection::{Derate, Inspection};
pub use preflight::{AutoCheck, Preflight, PreflightItem};
pub use read::{KeyPath, line_col};
pub use righting::{Righting, TakeoffFaces, takeoff_face_path};
pub use rotor::Rotor;
pub use shape::{
    CageShape, MemberSpec, NodeSpec, RodSection, StringSection, cage_key, icosa6_positions,
    member_path, pretension_path,
};
pub use vehicle::{Vehicle, is_valid_vehicle_id, vehicle_id_rule, vehicle_key};

use read::Doc;

/// The profile bundled with the program: an invented demo vehicle.
pub const DEMO_PROFILE_TOML: &str = include_str!("../profiles/demo.toml");
/// The name the bundled demo profile is reported under.
pub const DEMO_PROFILE_NAME: &str = "<built-in demo profile>";

/// Where in a profile file something went wrong, and what.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum ProfileError {
    /// The file is not valid TOML (the parser's own account of the syntax,
    /// and the text it stopped at).
    #[error("{file}:{line}:{column}: {key}: expected TOML syntax ({message}), found {found}")]
    Syntax {
        /// File name as given by the caller.
        file: String,
        /// 1-based line.
        line: usize,
        /// 1-based column.
        column: usize,
        /// Always "-": a syntax error is about the text, not a key.
        key: String,
        /// What the TOML parser expected there.
        message: String,
        /// The text the parser stopped at.
        found: String,
    },
    /// A value has the wrong type, is missing, unknown, out of range or
    /// makes no physical or logical sense.
    #[error("{file}:{line}:{column}: {key}: expected {expected}, found {found}")]
    Invalid {
        /// File name as given by the caller.
        file: String,
        /// 1-based line.
        line: usize,
        /// 1-based column.
        column: usize,
        /// Dotted key, e.g. `rotor[2].max_thrust_n`.
        key: String,
        /// What a valid value looks like.
        expected: String,
        /// What the file holds.
        found: String,
    },
    /// The file is not UTF-8 text.
    #[error(
        "{file}:{line}:{column}: -: expected UTF-8 text, found the byte 0x{byte:02x} that starts no UTF-8 character"
    )]
    NotText {
        /// File name as given by the caller.
        file: String,
        /// 1-based line of the first bad byte.
        line: usize,
        /// 1-based column (in characters) of the first bad byte.
        column: usize,
        /// The first bad byte.
        byte: u8,
    },
}

impl ProfileError {
    /// The 1-based line the error points at.
    pub fn line(&self) -> usize {
        match self {
            ProfileError::Syntax { line, .. }
            | ProfileError::Invalid { line, .. }
            | ProfileError::NotText { line, .. } => *line,
        }
    }
    /// The key the error is about ("-" when it is about the text).
    pub fn key(&self) -> &str {
        match self {
            ProfileError::Syntax { key, .. } | ProfileError::Invalid { key, .. } => key,
            ProfileError::NotText { .. } => "-",
        }
    }
}

/// A 1-based line and column in the profile file.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Location {
    /// 1-based line.
    pub line: usize,
    /// 1-based column, in characters.
    pub column: usize,
}

/// Where each key the file wrote sits (tables at their header, list items
/// as `key[i]`), so checks made after validation still point at the key.
///
/// Kept in the order read (a large cage has tens of thousands of keys, and
/// they are looked up only to place a refusal); a key read twice is where
/// it was read last.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Locations(Vec<(KeyPath, Location)>);

impl Locations {
    fn insert(&mut self, key: KeyPath, at: Location) {
        self.0.push((key, at));
    }
    /// Where `key` is written; a key the file left out is located at the
    /// nearest enclosing table it does write, else at the top of the file.
    pub fn of(&self, key: &KeyPath) -> Location {
        let mut k = Some(key.clone());
        while let Some(p) = k {
            if let Some((_, at)) = self.0.iter().rev().find(|(q, _)| *q == p) {
                return *at;
            }
            k = p.parent();
        }
        Location { line: 1, column: 1 }
    }
}

/// A validated vehicle profile. All lengths in metres, forces in newtons,
/// angles in degrees (as named).
#[derive(Debug, Clone, PartialEq)]
pub struct Profile {
    /// File name the profile came from (for messages).
    pub source: String,
    /// Identity and mass properties.
    pub vehicle: Vehicle,
    /// The cage's shape, before the hull is computed.
    pub cage: CageShape,
    /// Rod cross-section and material.
    pub rod: RodSection,
    /// String cross-section, material and pretension.
    pub string: StringSection,
    /// Node ids the payload hangs from (empty: spread over all nodes).
    pub payload_nodes: Vec<String>,
    /// Convex hull of the nodes in the cage frame, node indices in the
    /// profile's order: built once when the profile is read (the centre
    /// of mass is checked against it) and reused by the cage.
    pub hull: crate::hull::Hull,
    /// Cage-to-body rotation, Z-Y-X Euler angles in degrees.
    pub mount_rpy_deg: [f64; 3],
    /// Rotors, body frame.
    pub rotors: Vec<Rotor>,
    /// Righting settings.
    pub righting: Righting,
    /// Resting-face and link-health settings.
    pub watch: WatchSettings,
    /// How impact forces are estimated.
    pub impact: ImpactSettings,
    /// Damage thresholds.
    pub inspection: Inspection,
    /// Pre-flight checklist.
    pub preflight: Preflight,
    /// Where every key the file wrote sits.
    pub locations: Locations,
}

pub use watch::WatchSettings;

/// The sections a profile may hold, each read by its own module.
const SECTIONS: &[&str] = &[
    "vehicle",
    "cage",
    "mount",
    "rotor",
    "righting",
    "watch",
    "impact",
    "inspection",
    "preflight",
];

impl Profile {
    /// The bundled demo profile. It is validated by the tests, so a failure
    /// here is a build defect, reported as an error rather than a panic.
    pub fn demo() -> Result<Profile, ProfileError> {
        Profile::parse(DEMO_PROFILE_TOML, DEMO_PROFILE_NAME)
    }

    /// Parse and validate a profile file's bytes; a byte that is not UTF-8
    /// is refused at its line and column.
    pub fn parse_bytes(bytes: &[u8], file: &str) -> Result<Profile, ProfileError> {
        match std::str::from_utf8(bytes) {
            Ok(text) => Profile::parse(text, file),
            Err(e) => {
                let good = e.valid_up_to();
                // The prefix up to the bad byte is valid UTF-8 by definition.
                let before = std::str::from_utf8(&bytes[..good]).unwrap_or("");
                let (line, column) = line_col(before, good);
                Err(ProfileError::NotText {
                    file: file.to_string(),
                    line,
                    column,
                    byte: bytes.get(good).copied().unwrap_or(0),
                })
            }
        }
    }

    /// Parse and validate profile text; `file` names it in messages.
    pub fn parse(text: &str, file: &str) -> Result<Profile, ProfileError> {
        let top = toml::de::DeTable::parse(text).map_err(|e| {
            let at = e.span().map_or(0, |s| s.start).min(text.len());
            let (line, column) = line_col(text, at);
            ProfileError::Syntax {
                file: file.to_string(),
                line,
                column,
                key: "-".to_string(),
                found: text_at(text, at),
                message: e
                    .message()
                    .lines()
                    .map(str::trim)
                    .filter(|l| !l.is_empty())
                    .collect::<Vec<_>>()
                    .join("; "),
            }
        })?;
        let doc = Doc::new(text, file);
        let root = doc.root(&top, SECTIONS)?;
        let vehicle = vehicle::read(&root)?;
        let shape::Shape {
            cage,
            rod,
            string,
            payload_nodes,
            hull,
        } = shape::read(&root, &vehicle)?;
        let (mount_rpy_deg, rotors) = rotor::read(&root)?;
        let righting = righting::read(&root)?;
        let watch = watch::read(&root)?;
        let impact = impact::read(&root)?;
        let inspection = inspection::read(&root)?;
        let preflight = preflight::read(&root)?;
        Ok(Profile {
            source: doc.file().to_string(),
            vehicle,
            cage,
            rod,
            string,
            payload_nodes,
            hull,
            mount_rpy_deg,
            rotors,
            righting,
            watch,
            impact,
            inspection,
            preflight,
            locations: doc.into_locations(),
        })
    }

    /// A refusal at `key`, for checks made after the profile is typed
    /// (the key's own line and column when the file writes it).
    pub fn invalid(
        &self,
        key: &KeyPath,
        expected: impl Into<String>,
        found: impl Into<String>,
    ) -> ProfileError {
        let at = self.locations.of(key);
        ProfileError::Invalid {
            file: self.source.clone(),
            line: at.line,
            column: at.column,
            key: key.to_string(),
            expected: expected.into(),
            found: found.into(),
        }
    }

    /// Total mass of the rods, from their section and density.
    pub fn rod_mass_kg(&self, total_rod_length_m: f64) -> f64 {
        self.rod.area_m2() * total_rod_length_m * self.rod.density_kg_m3
    }
}

/// The text from `offset` to the end of its line (clipped), for "found".
fn text_at(text: &str, offset: usize) -> String {
    let rest = text.get(offset..).unwrap_or("");
    let line = rest.lines().next().unwrap_or("").trim_end();
    if line.is_empty() {
        if rest.trim().is_empty() {
            "the end of the file".to_string()
        } else {
            "the end of the line".to_string()
        }
    } else {
        format!("{:?}", read::clip(line))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn demo_profile_is_valid() {
        let p = Profile::demo().expect("demo profile must validate");
        assert!(p.rotors.len() >= 4);
        assert!(!p.preflight.items.is_empty());
    }

    #[test]
    fn euler_buckling_matches_roark_example() {
        // Roark's Formulas for Stress and Strain (Young & Budynas), Table 15.1,
        // pinned ends: D 8 mm, d 6 mm, L 300 mm, E 100 GPa ->
        // I = 137.445 mm^4, P = 1507.2 N.
        let rod = RodSection {
            outer_diameter_mm: 8.0,
            inner_diameter_mm: 6.0,
            modulus_gpa: 100.0,
            crush_strength_mpa: 1e6,
            density_kg_m3: 1500.0,
        };
        assert_relative_eq!(rod.second_moment_m4() * 1e12, 137.445, epsilon = 1e-3);
        assert_relative_eq!(rod.euler_buckling_n(0.3), 1507.2, epsilon = 0.1);
        assert_relative_eq!(rod.capacity_n(0.3), 1507.2, epsilon = 0.1);
    }

    /// Two nodes closer than a nanometre are one node twice: refused at the
    /// second one's `pos_m`, naming the first, whichever side of a grid
    /// cell of the search they fall (here 0.1 nm either side of a cell
    /// edge at 1 um); nodes a micrometre apart are two nodes (the rule of
    /// this loader; common practice, no published source).
    #[test]
    fn a_node_at_another_nodes_position_is_refused() {
        let text = include_str!("../profiles/prism-explicit.toml");
        let moved = |n1: &str, n2: &str| {
            text.replace("pos_m = [0.16, 0.0, 0.11]", n1)
                .replace("pos_m = [-0.08, 0.13856, 0.11]", n2)
        };
        let e = Profile::parse(
            &moved(
                "pos_m = [0.0000009999, 0.0, 0.11]",
                "pos_m = [0.0000010001, 0.0, 0.11]",
            ),
            "prism.toml",
        )
        .unwrap_err();
        assert_eq!(e.key(), "cage.node[2].pos_m", "{e}");
        assert!(e.to_string().contains("the position of N1"), "{e}");
        // A micrometre apart: not the same node (the profile may still be
        // refused for other reasons, but not for this one).
        let far = Profile::parse(
            &moved(
                "pos_m = [0.000001, 0.0, 0.11]",
                "pos_m = [0.000002, 0.0, 0.11]",
            ),
            "prism.toml",
        );
        match far {
            Ok(p) => assert_eq!(p.cage.points_m().len(), 6),
            Err(e) => assert!(!e.to_string().contains("the position of"), "{e}"),
        }
    }

    #[test]
    fn missing_fields_are_named_with_their_table() {
        let e = Profile::parse("", "empty.toml").unwrap_err();
        assert_eq!(e.key(), "vehicle.id", "{e}");
        assert!(e.to_string().contains("no [vehicle] table"), "{e}");
        let e = Profile::parse("[vehicle]\nid = \"a\"\ncom_m = [0, 0, 0]\n", "x.toml").unwrap_err();
        assert_eq!(e.key(), "vehicle.mass_kg", "{e}");
        assert!(
            e.to_string().contains("found no `mass_kg` in [vehicle]"),
            "{e}"
        );
    }

    #[test]
    fn a_comment_after_a_header_does_not_move_locations() {
        let text = DEMO_PROFILE_TOML.replace("[righting]\n", "[righting]   # how to roll back\n");
        let p = Profile::parse(&text, "c.toml").unwrap();
        let at = p
            .locations
            .of(&KeyPath::section("righting").key("takeoff_faces"));
        let line = text
            .lines()
            .position(|l| l.starts_with("takeoff_faces"))
            .unwrap()
            + 1;
        assert_eq!(at.line, line);
    }

    #[test]
    fn bytes_that_are_not_utf8_are_located() {
        let mut bytes = b"[vehicle]\nid = \"ab".to_vec();
        bytes.push(0xff);
        let e = Profile::parse_bytes(&bytes, "b.toml").unwrap_err();
        assert_eq!(
            e,
            ProfileError::NotText {
                file: "b.toml".into(),
                line: 2,
                column: 9,
                byte: 0xff
            }
        );
    }
}
