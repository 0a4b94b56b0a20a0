//! Vehicle profiles: one TOML file per vehicle, SI units with the unit in
//! the key name. Parsing is two-staged: serde reads the raw file (keeping
//! the source span of every value we later validate), then [`Profile::from_raw`]
//! checks meaning and turns it into plain typed values. Every refusal names
//! the file, line, column, key, what was expected and what was found.

use serde::Deserialize;
use std::ops::Range;
use toml::Spanned;

mod raw;

pub use raw::RawProfile;

/// The profile bundled with the program: an invented demo vehicle.
pub const DEMO_PROFILE_TOML: &str = include_str!("../profiles/demo.toml");
/// The name the bundled demo profile is reported under.
pub const DEMO_PROFILE_NAME: &str = "<built-in demo profile>";

/// Where in a profile file something went wrong, and what.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum ProfileError {
    /// The file is not valid TOML, or a value has the wrong type or name.
    #[error("{file}:{line}:{column}: {key}: {message}")]
    Syntax {
        /// File name as given by the caller.
        file: String,
        /// 1-based line.
        line: usize,
        /// 1-based column.
        column: usize,
        /// Key the error is about ("-" when none could be found).
        key: String,
        /// The parser's message, which says what was expected and found.
        message: String,
    },
    /// The file parses but a value makes no physical or logical sense.
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
}

impl ProfileError {
    /// The 1-based line the error points at.
    pub fn line(&self) -> usize {
        match self {
            ProfileError::Syntax { line, .. } | ProfileError::Invalid { line, .. } => *line,
        }
    }
    /// The key the error is about.
    pub fn key(&self) -> &str {
        match self {
            ProfileError::Syntax { key, .. } | ProfileError::Invalid { key, .. } => key,
        }
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
}

/// Identity and mass properties of the vehicle.
#[derive(Debug, Clone, PartialEq)]
pub struct Vehicle {
    /// Stable id; the logbook is keyed by it.
    pub id: String,
    /// Human name.
    pub name: String,
    /// Total mass with cage and payload.
    pub mass_kg: f64,
    /// Centre of mass in the cage frame.
    pub com_m: [f64; 3],
}

/// The cage geometry as the profile gives it.
#[derive(Debug, Clone, PartialEq)]
pub enum CageShape {
    /// Six-strut icosahedral tensegrity ("expanded octahedron").
    Icosa6 {
        /// Rod length.
        rod_length_m: f64,
        /// Spacing of a parallel rod pair (equilibrium: half the rod length).
        rod_spacing_m: f64,
    },
    /// Nodes and members listed one by one.
    Explicit {
        /// Nodes in file order.
        nodes: Vec<NodeSpec>,
        /// Rods in file order.
        rods: Vec<MemberSpec>,
        /// Strings in file order.
        strings: Vec<MemberSpec>,
    },
}

/// One node of an explicit cage.
#[derive(Debug, Clone, PartialEq)]
pub struct NodeSpec {
    /// Node id (the log refers to it).
    pub id: String,
    /// Position, cage frame.
    pub pos_m: [f64; 3],
}

/// One member of an explicit cage, by node index into the node list.
#[derive(Debug, Clone, PartialEq)]
pub struct MemberSpec {
    /// Indices of the two end nodes in the profile's node list.
    pub nodes: [usize; 2],
    /// Optional physical tag (a colour band, a serial).
    pub tag: Option<String>,
}

/// Rod cross-section and material.
#[derive(Debug, Clone, PartialEq)]
pub struct RodSection {
    /// Tube outer diameter.
    pub outer_diameter_mm: f64,
    /// Tube inner diameter (0 for a solid rod).
    pub inner_diameter_mm: f64,
    /// Axial Young's modulus.
    pub modulus_gpa: f64,
    /// Compressive (crushing) strength of the material.
    pub crush_strength_mpa: f64,
    /// Material density, for the lumped nodal masses.
    pub density_kg_m3: f64,
}

/// String cross-section, material and pretension.
#[derive(Debug, Clone, PartialEq)]
pub struct StringSection {
    /// Line diameter.
    pub diameter_mm: f64,
    /// Effective axial modulus of the line.
    pub modulus_gpa: f64,
    /// Breaking load of the line itself.
    pub breaking_load_n: f64,
    /// Fraction of the breaking load the terminations keep (knots, crimps).
    pub termination_efficiency: f64,
    /// Tension in the strings of the unloaded cage (the largest, when the
    /// self-stress state gives unequal string forces).
    pub pretension_n: f64,
}

/// One rotor, body frame.
#[derive(Debug, Clone, PartialEq)]
pub struct Rotor {
    /// Hub position, body frame.
    pub position_m: [f64; 3],
    /// Unit thrust direction, body frame (default body -z, "up").
    pub axis: [f64; 3],
    /// Largest forward thrust.
    pub max_thrust_n: f64,
    /// Largest reverse thrust (0 when the motor cannot spin backwards).
    pub reverse_thrust_n: f64,
}

/// Which faces the vehicle can take off from.
#[derive(Debug, Clone, PartialEq)]
pub enum TakeoffFaces {
    /// Every stable face whose tilt when upright is at most this.
    Auto {
        /// Largest tilt from level, degrees.
        max_tilt_deg: f64,
    },
    /// Listed face ids.
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

/// Resting-face identification and link health settings.
#[derive(Debug, Clone, PartialEq)]
pub struct WatchSettings {
    /// A face is "resting" only within this angle of gravity.
    pub rest_tolerance_deg: f64,
    /// Attitude must be steady this long before "resting".
    pub dwell_s: f64,
    /// Margin a new face needs over the current one before switching.
    pub hysteresis_deg: f64,
    /// Data older than this is stale.
    pub stale_after_s: f64,
}

/// A named ground surface for impact estimates.
#[derive(Debug, Clone, PartialEq)]
pub struct Surface {
    /// Preset name, e.g. `concrete`.
    pub name: String,
    /// Contact stiffness of the surface.
    pub stiffness_n_per_m: f64,
}

/// How the peak impact force is estimated when no IMU peak is available.
#[derive(Debug, Clone, PartialEq)]
pub struct ImpactSettings {
    /// Surface used when none is named.
    pub default_surface: String,
    /// Surface presets.
    pub surfaces: Vec<Surface>,
    /// Coefficient of restitution, for the impulse (contact duration) form.
    pub restitution: f64,
    /// Contact duration for the half-sine estimate, when stated.
    pub contact_duration_s: Option<f64>,
    /// Live acceleration peak that proposes an impact, in g.
    pub detect_threshold_g: f64,
}

/// Damage thresholds and count rules.
#[derive(Debug, Clone, PartialEq)]
pub struct Inspection {
    /// Utilisation at or above which a member must be replaced now.
    pub overload_utilisation: f64,
    /// Utilisation below which a load does no fatigue damage.
    pub endurance_utilisation: f64,
    /// Miner sum at which a member should be inspected.
    pub inspect_damage: f64,
    /// Miner sum at which a member is due for replacement.
    pub due_damage: f64,
    /// Basquin exponent for rods: cycles to failure N = u^-k.
    pub sn_exponent_rod: f64,
    /// Basquin exponent for strings.
    pub sn_exponent_string: f64,
    /// A string is due after this many impacts above `string_count_utilisation`.
    pub string_count_limit: u32,
    /// Utilisation that counts towards the string count rule.
    pub string_count_utilisation: f64,
    /// Capacity factors for members with an open finding (remaining margin).
    pub derate: Derate,
}

/// Capacity factors, each in (0, 1], for a member with an open finding of
/// that kind (`[inspection.derate]`): the remaining margin counts the member
/// at its capacity times the factor. The defaults are conservative planning
/// values (from memory, no published source): a fray halves a line's
/// strength; slack or a loose end costs a fifth.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Derate {
    /// Frayed fibres.
    pub fray: f64,
    /// A string gone slack.
    pub slack: f64,
    /// A termination coming undone.
    pub loose_end: f64,
}

impl Default for Derate {
    fn default() -> Self {
        Derate {
            fray: 0.5,
            slack: 0.8,
            loose_end: 0.8,
        }
    }
}

/// One checklist item.
#[derive(Debug, Clone, PartialEq)]
pub struct PreflightItem {
    /// What the crew checks.
    pub text: String,
    /// Automatic check bound to live data or the log, if any.
    pub check: Option<AutoCheck>,
}

/// Automatic checks a pre-flight item may be bound to.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum AutoCheck {
    /// No cage member is due or must be replaced.
    NoMemberDue,
    /// The vehicle rests on a take-off face.
    OnTakeoffFace,
    /// The link delivers fresh data.
    LinkFresh,
    /// Battery voltage at or above the profile minimum.
    Battery,
}

/// The pre-flight checklist.
#[derive(Debug, Clone, PartialEq)]
pub struct Preflight {
    /// Lowest battery voltage to fly on.
    pub min_battery_v: f64,
    /// Items in order.
    pub items: Vec<PreflightItem>,
}

impl Profile {
    /// The bundled demo profile. It is validated by the tests, so a failure
    /// here is a build defect, reported as an error rather than a panic.
    pub fn demo() -> Result<Profile, ProfileError> {
        Profile::parse(DEMO_PROFILE_TOML, DEMO_PROFILE_NAME)
    }

    /// Parse and validate profile text; `file` names it in messages.
    pub fn parse(text: &str, file: &str) -> Result<Profile, ProfileError> {
        let raw: RawProfile = toml::from_str(text).map_err(|e| {
            let span = e.span().unwrap_or(0..0);
            let (line, column) = line_col(text, span.start);
            ProfileError::Syntax {
                file: file.to_string(),
                line,
                column,
                key: error_key(text, &span, e.message()),
                message: e.message().trim().to_string(),
            }
        })?;
        Profile::from_raw(raw, text, file)
    }

    fn from_raw(raw: RawProfile, text: &str, file: &str) -> Result<Profile, ProfileError> {
        let v = Validator { text, file };
        raw::validate(raw, &v)
    }

    /// Total mass of the rods, from their section and density.
    pub fn rod_mass_kg(&self, total_rod_length_m: f64) -> f64 {
        self.rod.area_m2() * total_rod_length_m * self.rod.density_kg_m3
    }
}

impl RodSection {
    /// Cross-section area of the tube.
    pub fn area_m2(&self) -> f64 {
        let d_o = self.outer_diameter_mm * 1e-3;
        let d_i = self.inner_diameter_mm * 1e-3;
        std::f64::consts::PI / 4.0 * (d_o * d_o - d_i * d_i)
    }
    /// Second moment of area, I = pi (D^4 - d^4) / 64.
    pub fn second_moment_m4(&self) -> f64 {
        let d_o = self.outer_diameter_mm * 1e-3;
        let d_i = self.inner_diameter_mm * 1e-3;
        std::f64::consts::PI / 64.0 * (d_o.powi(4) - d_i.powi(4))
    }
    /// Axial stiffness E A.
    pub fn ea_n(&self) -> f64 {
        self.modulus_gpa * 1e9 * self.area_m2()
    }
    /// Pinned-end Euler buckling load P = pi^2 E I / L^2.
    pub fn euler_buckling_n(&self, length_m: f64) -> f64 {
        std::f64::consts::PI.powi(2) * self.modulus_gpa * 1e9 * self.second_moment_m4()
            / (length_m * length_m)
    }
    /// Crushing load: compressive strength times area.
    pub fn crushing_n(&self) -> f64 {
        self.crush_strength_mpa * 1e6 * self.area_m2()
    }
    /// Compressive capacity: the smaller of buckling and crushing.
    pub fn capacity_n(&self, length_m: f64) -> f64 {
        self.euler_buckling_n(length_m).min(self.crushing_n())
    }
}

impl StringSection {
    /// Cross-section area of the line.
    pub fn area_m2(&self) -> f64 {
        let d = self.diameter_mm * 1e-3;
        std::f64::consts::PI / 4.0 * d * d
    }
    /// Axial stiffness E A.
    pub fn ea_n(&self) -> f64 {
        self.modulus_gpa * 1e9 * self.area_m2()
    }
    /// Tensile capacity: breaking load times termination efficiency.
    pub fn capacity_n(&self) -> f64 {
        self.breaking_load_n * self.termination_efficiency
    }
}

/// Helper that turns spans into located errors.
pub(crate) struct Validator<'a> {
    text: &'a str,
    file: &'a str,
}

impl Validator<'_> {
    fn invalid(
        &self,
        span: Range<usize>,
        key: &str,
        expected: &str,
        found: impl Into<String>,
    ) -> ProfileError {
        let (line, column) = line_col(self.text, span.start);
        ProfileError::Invalid {
            file: self.file.to_string(),
            line,
            column,
            key: key.to_string(),
            expected: expected.to_string(),
            found: found.into(),
        }
    }

    /// A strictly positive, finite number.
    fn positive(&self, v: &Spanned<f64>, key: &str) -> Result<f64, ProfileError> {
        let x = *v.get_ref();
        if x.is_finite() && x > 0.0 {
            Ok(x)
        } else {
            Err(self.invalid(v.span(), key, "a positive number", fmt_num(x)))
        }
    }

    /// A finite number at or above zero.
    fn non_negative(&self, v: &Spanned<f64>, key: &str) -> Result<f64, ProfileError> {
        let x = *v.get_ref();
        if x.is_finite() && x >= 0.0 {
            Ok(x)
        } else {
            Err(self.invalid(v.span(), key, "a number >= 0", fmt_num(x)))
        }
    }

    /// A finite number within [lo, hi].
    fn within(&self, v: &Spanned<f64>, key: &str, lo: f64, hi: f64) -> Result<f64, ProfileError> {
        let x = *v.get_ref();
        if x.is_finite() && x >= lo && x <= hi {
            Ok(x)
        } else {
            Err(self.invalid(
                v.span(),
                key,
                &format!("a number from {} to {}", fmt_num(lo), fmt_num(hi)),
                fmt_num(x),
            ))
        }
    }

    /// Three finite numbers.
    fn vec3(&self, v: &Spanned<Vec<f64>>, key: &str) -> Result<[f64; 3], ProfileError> {
        let xs = v.get_ref();
        if xs.len() == 3 && xs.iter().all(|x| x.is_finite()) {
            Ok([xs[0], xs[1], xs[2]])
        } else {
            Err(self.invalid(
                v.span(),
                key,
                "three finite numbers [x, y, z]",
                format!("{xs:?}"),
            ))
        }
    }
}

fn fmt_num(x: f64) -> String {
    format!("{x}")
}

/// 1-based line and column of a byte offset.
pub fn line_col(text: &str, offset: usize) -> (usize, usize) {
    let offset = offset.min(text.len());
    let before = &text.as_bytes()[..offset];
    let line = before.iter().filter(|&&b| b == b'\n').count() + 1;
    let line_start = before
        .iter()
        .rposition(|&b| b == b'\n')
        .map_or(0, |p| p + 1);
    let column = text
        .get(line_start..offset)
        .map_or(offset - line_start, |s| s.chars().count())
        + 1;
    (line, column)
}

/// 1-based line and column of `key` inside `[table]`, for errors found
/// after validation (take-off face ids need the hull's face numbering).
pub fn locate_key(text: &str, table: &str, key: &str) -> Option<(usize, usize)> {
    let mut in_table = false;
    for (i, line) in text.lines().enumerate() {
        let t = line.trim_start();
        if t.starts_with('[') {
            in_table = t.trim_end().trim_matches(|c| c == '[' || c == ']').trim() == table;
            continue;
        }
        if in_table
            && let Some((k, _)) = t.split_once('=')
            && k.trim() == key
        {
            return Some((i + 1, line.len() - t.len() + 1));
        }
    }
    None
}

/// The key a parse error is about: for a missing field, the field under
/// the table the error points at; otherwise the key at the error's span.
fn error_key(text: &str, span: &Range<usize>, message: &str) -> String {
    let missing = message
        .strip_prefix("missing field `")
        .and_then(|rest| rest.split('`').next());
    match missing {
        Some(name) => {
            let at = key_at(text, span);
            let line = line_col(text, span.start).0;
            let is_header = text
                .lines()
                .nth(line.saturating_sub(1))
                .is_some_and(|l| l.trim_start().starts_with('['));
            match at {
                Some(table) if is_header => format!("{table}.{name}"),
                _ => name.to_string(),
            }
        }
        None => key_at(text, span).unwrap_or_else(|| "-".to_string()),
    }
}

/// The dotted key of a span: the enclosing table header (if any) joined
/// with the key written before `=` on the span's line.
fn key_at(text: &str, span: &Range<usize>) -> Option<String> {
    let start = span.start.min(text.len());
    let line_start = text[..start].rfind('\n').map_or(0, |p| p + 1);
    let line_end = text[start..].find('\n').map_or(text.len(), |p| start + p);
    let line = text.get(line_start..line_end)?.trim();
    let header = |l: &str| {
        let l = l.split('#').next().unwrap_or("").trim();
        (l.starts_with('[') && l.ends_with(']'))
            .then(|| l.trim_matches(|c| c == '[' || c == ']').trim().to_string())
    };
    if let Some(h) = header(line) {
        return (!h.is_empty()).then_some(h);
    }
    let (key, _) = line.split_once('=')?;
    let key = key.trim();
    if key.is_empty() || key.starts_with('#') {
        return None;
    }
    let table = text[..line_start].lines().rev().find_map(header);
    Some(match table {
        Some(t) if !t.is_empty() => format!("{t}.{key}"),
        _ => key.to_string(),
    })
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
        // I = 137.445 mm^4, P = 1507.2 N (REFERENCES.md).
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

    #[test]
    fn line_col_counts_from_one() {
        assert_eq!(line_col("a\nbc\n", 3), (2, 2));
        assert_eq!(line_col("abc", 0), (1, 1));
    }

    #[test]
    fn missing_fields_are_named_with_their_table() {
        let e = Profile::parse("", "empty.toml").unwrap_err();
        assert_eq!(e.key(), "vehicle", "{e}");
        let e = Profile::parse("[vehicle]\nid = \"a\"\ncom_m = [0, 0, 0]\n", "x.toml").unwrap_err();
        assert_eq!(e.key(), "vehicle.mass_kg", "{e}");
    }

    #[test]
    fn key_at_finds_assignment() {
        let t = "[x]\nmass_kg = \"a\"\n";
        assert_eq!(key_at(t, &(14..15)).as_deref(), Some("x.mass_kg"));
    }
}
