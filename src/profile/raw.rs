//! The profile file as serde reads it, and its validation into [`Profile`].
//! Every value that is checked for meaning is `Spanned`, so a refusal can
//! point at its line and column.

use super::*;
use std::collections::HashMap;

mod shape;
use shape::{cage_shape, check_com_inside};

type S<T> = Spanned<T>;

/// The file as written, before any meaning is checked.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawProfile {
    vehicle: RawVehicle,
    cage: S<RawCage>,
    #[serde(default)]
    mount: RawMount,
    #[serde(default)]
    rotor: Vec<S<RawRotor>>,
    #[serde(default)]
    righting: RawRighting,
    #[serde(default)]
    watch: RawWatch,
    #[serde(default)]
    impact: RawImpact,
    #[serde(default)]
    inspection: RawInspection,
    #[serde(default)]
    preflight: RawPreflight,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawVehicle {
    id: S<String>,
    name: Option<String>,
    mass_kg: S<f64>,
    com_m: S<Vec<f64>>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawCage {
    kind: Option<S<String>>,
    rod_length_m: Option<S<f64>>,
    rod_spacing_m: Option<S<f64>>,
    #[serde(default)]
    node: Vec<S<RawNode>>,
    #[serde(default)]
    rod: Vec<S<RawMember>>,
    #[serde(default)]
    string: Vec<S<RawMember>>,
    rod_section: RawRodSection,
    string_section: RawStringSection,
    #[serde(default = "no_nodes")]
    payload_nodes: S<Vec<String>>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawNode {
    id: S<String>,
    pos_m: S<Vec<f64>>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawMember {
    nodes: S<Vec<String>>,
    tag: Option<String>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawRodSection {
    outer_diameter_mm: S<f64>,
    #[serde(default = "zero")]
    inner_diameter_mm: S<f64>,
    modulus_gpa: S<f64>,
    crush_strength_mpa: S<f64>,
    density_kg_m3: S<f64>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawStringSection {
    diameter_mm: S<f64>,
    modulus_gpa: S<f64>,
    breaking_load_n: S<f64>,
    #[serde(default = "one")]
    termination_efficiency: S<f64>,
    pretension_n: S<f64>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawMount {
    #[serde(default = "zero")]
    roll_deg: S<f64>,
    #[serde(default = "zero")]
    pitch_deg: S<f64>,
    #[serde(default = "zero")]
    yaw_deg: S<f64>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawRotor {
    position_m: S<Vec<f64>>,
    axis: Option<S<Vec<f64>>>,
    max_thrust_n: S<f64>,
    #[serde(default = "zero")]
    reverse_thrust_n: S<f64>,
}

#[derive(Debug, Deserialize)]
#[serde(untagged)]
enum RawTakeoff {
    Word(String),
    List(Vec<String>),
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawRighting {
    #[serde(default = "auto")]
    takeoff_faces: S<RawTakeoff>,
    #[serde(default = "ten")]
    max_takeoff_tilt_deg: S<f64>,
    #[serde(default)]
    vertex_pivots: bool,
    #[serde(default = "vertex_weight")]
    vertex_pivot_weight: S<f64>,
    #[serde(default = "margin")]
    torque_margin: S<f64>,
    #[serde(default = "friction")]
    friction_coefficient: S<f64>,
}

impl Default for RawRighting {
    fn default() -> Self {
        RawRighting {
            takeoff_faces: auto(),
            max_takeoff_tilt_deg: ten(),
            vertex_pivots: false,
            vertex_pivot_weight: vertex_weight(),
            torque_margin: margin(),
            friction_coefficient: friction(),
        }
    }
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawWatch {
    #[serde(default = "rest_tol")]
    rest_tolerance_deg: S<f64>,
    #[serde(default = "dwell")]
    dwell_s: S<f64>,
    #[serde(default = "hyst")]
    hysteresis_deg: S<f64>,
    #[serde(default = "stale")]
    stale_after_s: S<f64>,
}

impl Default for RawWatch {
    fn default() -> Self {
        RawWatch {
            rest_tolerance_deg: rest_tol(),
            dwell_s: dwell(),
            hysteresis_deg: hyst(),
            stale_after_s: stale(),
        }
    }
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawSurface {
    name: S<String>,
    stiffness_n_per_m: S<f64>,
}

#[derive(Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawImpact {
    default_surface: Option<S<String>>,
    #[serde(default)]
    surface: Vec<RawSurface>,
    restitution: Option<S<f64>>,
    contact_duration_s: Option<S<f64>>,
    detect_threshold_g: Option<S<f64>>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawInspection {
    #[serde(default = "one")]
    overload_utilisation: S<f64>,
    #[serde(default = "endurance")]
    endurance_utilisation: S<f64>,
    #[serde(default = "inspect")]
    inspect_damage: S<f64>,
    #[serde(default = "due")]
    due_damage: S<f64>,
    #[serde(default = "sn_rod")]
    sn_exponent_rod: S<f64>,
    #[serde(default = "sn_string")]
    sn_exponent_string: S<f64>,
    #[serde(default = "count_limit")]
    string_count_limit: S<u32>,
    #[serde(default = "count_util")]
    string_count_utilisation: S<f64>,
    #[serde(default)]
    derate: RawDerate,
}

/// `[inspection.derate]`: capacity factors per finding kind.
#[derive(Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawDerate {
    fray: Option<S<f64>>,
    slack: Option<S<f64>>,
    loose_end: Option<S<f64>>,
}

impl Default for RawInspection {
    fn default() -> Self {
        RawInspection {
            overload_utilisation: one(),
            endurance_utilisation: endurance(),
            inspect_damage: inspect(),
            due_damage: due(),
            sn_exponent_rod: sn_rod(),
            sn_exponent_string: sn_string(),
            string_count_limit: count_limit(),
            string_count_utilisation: count_util(),
            derate: RawDerate::default(),
        }
    }
}

#[derive(Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawPreflight {
    min_battery_v: Option<S<f64>>,
    #[serde(default)]
    item: Vec<RawItem>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawItem {
    text: S<String>,
    check: Option<AutoCheck>,
}

impl Default for RawMount {
    fn default() -> Self {
        RawMount {
            roll_deg: zero(),
            pitch_deg: zero(),
            yaw_deg: zero(),
        }
    }
}

fn no_nodes() -> S<Vec<String>> {
    sp(Vec::new())
}
fn sp<T>(v: T) -> S<T> {
    S::new(0..0, v)
}
fn zero() -> S<f64> {
    sp(0.0)
}
fn one() -> S<f64> {
    sp(1.0)
}
fn ten() -> S<f64> {
    sp(10.0)
}
fn auto() -> S<RawTakeoff> {
    sp(RawTakeoff::Word("auto".into()))
}
fn vertex_weight() -> S<f64> {
    sp(1.5)
}
fn margin() -> S<f64> {
    sp(1.2)
}
fn friction() -> S<f64> {
    sp(0.6)
}
fn rest_tol() -> S<f64> {
    sp(12.0)
}
fn dwell() -> S<f64> {
    sp(0.5)
}
fn hyst() -> S<f64> {
    sp(3.0)
}
fn stale() -> S<f64> {
    sp(1.5)
}
fn endurance() -> S<f64> {
    sp(0.2)
}
fn inspect() -> S<f64> {
    sp(0.3)
}
fn due() -> S<f64> {
    sp(0.7)
}
fn sn_rod() -> S<f64> {
    sp(12.0)
}
fn sn_string() -> S<f64> {
    sp(6.0)
}
fn count_limit() -> S<u32> {
    Spanned::new(0..0, 20)
}
fn count_util() -> S<f64> {
    sp(0.5)
}

/// Surface presets used when a profile lists none. Contact stiffnesses are
/// order-of-magnitude planning values (from memory), not measurements.
pub fn default_surfaces() -> Vec<Surface> {
    [
        ("concrete", 2.0e6),
        ("wood", 5.0e5),
        ("packed_soil", 1.5e5),
        ("grass", 4.0e4),
    ]
    .into_iter()
    .map(|(name, k)| Surface {
        name: name.to_string(),
        stiffness_n_per_m: k,
    })
    .collect()
}

pub(super) fn validate(raw: RawProfile, v: &Validator) -> Result<Profile, ProfileError> {
    let RawProfile {
        vehicle,
        cage,
        mount,
        rotor,
        righting,
        watch,
        impact,
        inspection,
        preflight,
    } = raw;

    let id = vehicle.id.get_ref().trim().to_string();
    if id.is_empty()
        || !id
            .chars()
            .all(|c| c.is_ascii_alphanumeric() || c == '-' || c == '_' || c == '.')
    {
        return Err(v.invalid(
            vehicle.id.span(),
            "vehicle.id",
            "a non-empty id of letters, digits, '-', '_' or '.'",
            format!("{:?}", vehicle.id.get_ref()),
        ));
    }
    let mass_kg = v.positive(&vehicle.mass_kg, "vehicle.mass_kg")?;
    let com_m = v.vec3(&vehicle.com_m, "vehicle.com_m")?;

    let cage_span = cage.span();
    let cage = cage.into_inner();
    let rod = RodSection {
        outer_diameter_mm: v.positive(
            &cage.rod_section.outer_diameter_mm,
            "cage.rod_section.outer_diameter_mm",
        )?,
        inner_diameter_mm: v.non_negative(
            &cage.rod_section.inner_diameter_mm,
            "cage.rod_section.inner_diameter_mm",
        )?,
        modulus_gpa: v.positive(
            &cage.rod_section.modulus_gpa,
            "cage.rod_section.modulus_gpa",
        )?,
        crush_strength_mpa: v.positive(
            &cage.rod_section.crush_strength_mpa,
            "cage.rod_section.crush_strength_mpa",
        )?,
        density_kg_m3: v.positive(
            &cage.rod_section.density_kg_m3,
            "cage.rod_section.density_kg_m3",
        )?,
    };
    if rod.inner_diameter_mm >= rod.outer_diameter_mm {
        return Err(v.invalid(
            cage.rod_section.inner_diameter_mm.span(),
            "cage.rod_section.inner_diameter_mm",
            &format!(
                "an inner diameter smaller than the outer diameter ({} mm)",
                rod.outer_diameter_mm
            ),
            format!("{} mm", rod.inner_diameter_mm),
        ));
    }
    let ss = &cage.string_section;
    let string = StringSection {
        diameter_mm: v.positive(&ss.diameter_mm, "cage.string_section.diameter_mm")?,
        modulus_gpa: v.positive(&ss.modulus_gpa, "cage.string_section.modulus_gpa")?,
        breaking_load_n: v.positive(&ss.breaking_load_n, "cage.string_section.breaking_load_n")?,
        termination_efficiency: v.within(
            &ss.termination_efficiency,
            "cage.string_section.termination_efficiency",
            1e-6,
            1.0,
        )?,
        pretension_n: {
            let x = *ss.pretension_n.get_ref();
            if x.is_finite() && x > 0.0 {
                x
            } else {
                // Without prestress the tensegrity's mechanism has no
                // stiffness and no impact on it can be solved.
                return Err(v.invalid(
                    ss.pretension_n.span(),
                    "cage.string_section.pretension_n",
                    "a positive pretension (with none the cage's mechanism is unstiffened and impacts cannot be solved)",
                    fmt_num(x),
                ));
            }
        },
    };

    let shape = cage_shape(&cage, cage_span.clone(), v)?;
    let node_ids: Vec<String> = match &shape {
        CageShape::Icosa6 { .. } => (1..=12).map(|i| format!("N{i}")).collect(),
        CageShape::Explicit { nodes, .. } => nodes.iter().map(|n| n.id.clone()).collect(),
    };
    for p in cage.payload_nodes.get_ref() {
        if !node_ids.contains(p) {
            return Err(v.invalid(
                cage.payload_nodes.span(),
                "cage.payload_nodes",
                "ids of nodes of this cage",
                format!("{p:?}"),
            ));
        }
    }
    check_com_inside(&shape, com_m, v, vehicle.com_m.span())?;

    let mount_rpy_deg = [
        v.within(&mount.roll_deg, "mount.roll_deg", -360.0, 360.0)?,
        v.within(&mount.pitch_deg, "mount.pitch_deg", -90.0, 90.0)?,
        v.within(&mount.yaw_deg, "mount.yaw_deg", -360.0, 360.0)?,
    ];

    let mut rotors = Vec::new();
    for (i, r) in rotor.iter().enumerate() {
        let k = |name: &str| format!("rotor[{}].{name}", i + 1);
        let r = r.get_ref();
        let axis = match &r.axis {
            None => [0.0, 0.0, -1.0],
            Some(a) => {
                let a3 = v.vec3(a, &k("axis"))?;
                let n = (a3[0] * a3[0] + a3[1] * a3[1] + a3[2] * a3[2]).sqrt();
                if n < 1e-9 {
                    return Err(v.invalid(
                        a.span(),
                        &k("axis"),
                        "a non-zero direction",
                        "[0, 0, 0]",
                    ));
                }
                [a3[0] / n, a3[1] / n, a3[2] / n]
            }
        };
        rotors.push(Rotor {
            position_m: v.vec3(&r.position_m, &k("position_m"))?,
            axis,
            max_thrust_n: v.positive(&r.max_thrust_n, &k("max_thrust_n"))?,
            reverse_thrust_n: v.non_negative(&r.reverse_thrust_n, &k("reverse_thrust_n"))?,
        });
    }

    let takeoff_faces = match righting.takeoff_faces.get_ref() {
        RawTakeoff::Word(w) if w == "auto" => TakeoffFaces::Auto {
            max_tilt_deg: v.within(
                &righting.max_takeoff_tilt_deg,
                "righting.max_takeoff_tilt_deg",
                0.0,
                90.0,
            )?,
        },
        RawTakeoff::Word(w) => {
            return Err(v.invalid(
                righting.takeoff_faces.span(),
                "righting.takeoff_faces",
                "\"auto\" or a list of face ids such as [\"F1\", \"F2\"]",
                format!("{w:?}"),
            ));
        }
        RawTakeoff::List(list) => {
            if list.is_empty() || list.iter().any(|f| !is_face_id(f)) {
                return Err(v.invalid(
                    righting.takeoff_faces.span(),
                    "righting.takeoff_faces",
                    "a non-empty list of face ids such as [\"F1\", \"F2\"]",
                    format!("{list:?}"),
                ));
            }
            TakeoffFaces::List(list.clone())
        }
    };
    let righting = Righting {
        takeoff_faces,
        vertex_pivots: righting.vertex_pivots,
        vertex_pivot_weight: v.within(
            &righting.vertex_pivot_weight,
            "righting.vertex_pivot_weight",
            1.0,
            100.0,
        )?,
        torque_margin: v.within(
            &righting.torque_margin,
            "righting.torque_margin",
            1.0,
            100.0,
        )?,
        friction_coefficient: v.within(
            &righting.friction_coefficient,
            "righting.friction_coefficient",
            0.0,
            10.0,
        )?,
    };

    let watch = WatchSettings {
        rest_tolerance_deg: v.within(
            &watch.rest_tolerance_deg,
            "watch.rest_tolerance_deg",
            0.1,
            90.0,
        )?,
        dwell_s: v.non_negative(&watch.dwell_s, "watch.dwell_s")?,
        hysteresis_deg: v.within(&watch.hysteresis_deg, "watch.hysteresis_deg", 0.0, 45.0)?,
        stale_after_s: v.positive(&watch.stale_after_s, "watch.stale_after_s")?,
    };

    let surfaces = if impact.surface.is_empty() {
        default_surfaces()
    } else {
        let mut out: Vec<Surface> = Vec::new();
        for (i, s) in impact.surface.iter().enumerate() {
            let name = s.name.get_ref().trim().to_string();
            if name.is_empty() || out.iter().any(|o| o.name == name) {
                return Err(v.invalid(
                    s.name.span(),
                    &format!("impact.surface[{}].name", i + 1),
                    "a non-empty name used once",
                    format!("{name:?}"),
                ));
            }
            out.push(Surface {
                name,
                stiffness_n_per_m: v.positive(
                    &s.stiffness_n_per_m,
                    &format!("impact.surface[{}].stiffness_n_per_m", i + 1),
                )?,
            });
        }
        out
    };
    let default_surface = match &impact.default_surface {
        None => surfaces[0].name.clone(),
        Some(d) => {
            if !surfaces.iter().any(|s| &s.name == d.get_ref()) {
                let names: Vec<&str> = surfaces.iter().map(|s| s.name.as_str()).collect();
                return Err(v.invalid(
                    d.span(),
                    "impact.default_surface",
                    &format!("one of {}", names.join(", ")),
                    format!("{:?}", d.get_ref()),
                ));
            }
            d.get_ref().clone()
        }
    };
    let impact = ImpactSettings {
        default_surface,
        surfaces,
        restitution: match &impact.restitution {
            Some(r) => v.within(r, "impact.restitution", 0.0, 1.0)?,
            None => 0.3,
        },
        contact_duration_s: match &impact.contact_duration_s {
            Some(d) => Some(v.positive(d, "impact.contact_duration_s")?),
            None => None,
        },
        detect_threshold_g: match &impact.detect_threshold_g {
            Some(g) => v.positive(g, "impact.detect_threshold_g")?,
            None => 4.0,
        },
    };

    let raw_inspect_damage = inspection.inspect_damage.clone();
    let inspection = Inspection {
        overload_utilisation: v.within(
            &inspection.overload_utilisation,
            "inspection.overload_utilisation",
            0.01,
            10.0,
        )?,
        endurance_utilisation: v.within(
            &inspection.endurance_utilisation,
            "inspection.endurance_utilisation",
            0.0,
            1.0,
        )?,
        inspect_damage: v.within(
            &inspection.inspect_damage,
            "inspection.inspect_damage",
            0.0,
            1.0,
        )?,
        due_damage: v.within(&inspection.due_damage, "inspection.due_damage", 0.0, 1.0)?,
        sn_exponent_rod: v.within(
            &inspection.sn_exponent_rod,
            "inspection.sn_exponent_rod",
            1.0,
            100.0,
        )?,
        sn_exponent_string: v.within(
            &inspection.sn_exponent_string,
            "inspection.sn_exponent_string",
            1.0,
            100.0,
        )?,
        string_count_limit: {
            let n = *inspection.string_count_limit.get_ref();
            if n == 0 {
                return Err(v.invalid(
                    inspection.string_count_limit.span(),
                    "inspection.string_count_limit",
                    "a count of at least 1",
                    "0",
                ));
            }
            n
        },
        string_count_utilisation: v.within(
            &inspection.string_count_utilisation,
            "inspection.string_count_utilisation",
            0.0,
            10.0,
        )?,
        derate: {
            let d = &inspection.derate;
            let defaults = Derate::default();
            let factor = |x: &Option<S<f64>>, key: &str, default: f64| match x {
                Some(x) if *x.get_ref() > 0.0 => v.within(x, key, 0.0, 1.0),
                Some(x) => Err(v.invalid(
                    x.span(),
                    key,
                    "a capacity factor above 0 and at most 1",
                    fmt_num(*x.get_ref()),
                )),
                None => Ok(default),
            };
            Derate {
                fray: factor(&d.fray, "inspection.derate.fray", defaults.fray)?,
                slack: factor(&d.slack, "inspection.derate.slack", defaults.slack)?,
                loose_end: factor(
                    &d.loose_end,
                    "inspection.derate.loose_end",
                    defaults.loose_end,
                )?,
            }
        },
    };
    if *raw_inspect_damage.get_ref() <= 0.0 {
        return Err(v.invalid(
            raw_inspect_damage.span(),
            "inspection.inspect_damage",
            "an inspect level above 0 (at 0 every member would be flagged)",
            fmt_num(*raw_inspect_damage.get_ref()),
        ));
    }
    if inspection.inspect_damage > inspection.due_damage {
        return Err(v.invalid(
            raw_inspect_damage.span(),
            "inspection.inspect_damage",
            "an inspect level not above the due level",
            format!(
                "inspect {} > due {}",
                inspection.inspect_damage, inspection.due_damage
            ),
        ));
    }

    let mut items = Vec::new();
    for (i, it) in preflight.item.iter().enumerate() {
        let text = it.text.get_ref().trim();
        if text.is_empty() {
            return Err(v.invalid(
                it.text.span(),
                &format!("preflight.item[{}].text", i + 1),
                "a non-empty text",
                "\"\"",
            ));
        }
        items.push(PreflightItem {
            text: text.to_string(),
            check: it.check,
        });
    }
    let preflight = Preflight {
        min_battery_v: match &preflight.min_battery_v {
            Some(b) => v.non_negative(b, "preflight.min_battery_v")?,
            None => 0.0,
        },
        items,
    };

    Ok(Profile {
        source: v.file.to_string(),
        vehicle: Vehicle {
            name: vehicle.name.unwrap_or_else(|| id.clone()),
            id,
            mass_kg,
            com_m,
        },
        cage: shape,
        rod,
        string,
        payload_nodes: cage.payload_nodes.into_inner(),
        mount_rpy_deg,
        rotors,
        righting,
        watch,
        impact,
        inspection,
        preflight,
    })
}

fn is_face_id(s: &str) -> bool {
    s.strip_prefix('F')
        .is_some_and(|n| !n.is_empty() && n.chars().all(|c| c.is_ascii_digit()))
}
