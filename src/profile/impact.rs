//! `[impact]`: how the peak impact force is estimated, and the ground
//! surfaces it may be estimated for.

use super::ProfileError;
use super::read::{Bound, Table, clip};

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

impl ImpactSettings {
    /// The names of the surface presets, in profile order.
    pub fn surface_names(&self) -> Vec<&str> {
        self.surfaces.iter().map(|s| s.name.as_str()).collect()
    }
}

const KEYS: &[&str] = &[
    "default_surface",
    "surface",
    "restitution",
    "contact_duration_s",
    "detect_threshold_g",
];
const SURFACE_KEYS: &[&str] = &["name", "stiffness_n_per_m"];

// Plausibility bounds (ours).
/// Stiffest contact, N/m (steel on steel is far below).
const MAX_STIFFNESS_N_PER_M: f64 = 1.0e12;
/// Longest contact, s.
const MAX_CONTACT_S: f64 = 10.0;
/// Largest acceleration threshold, g.
const MAX_THRESHOLD_G: f64 = 1000.0;

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

pub(super) fn read(root: &Table) -> Result<ImpactSettings, ProfileError> {
    let t = root.table("impact", KEYS)?;
    let listed = t.tables("surface", SURFACE_KEYS)?;
    let surfaces = if listed.is_empty() {
        default_surfaces()
    } else {
        let mut out: Vec<Surface> = Vec::new();
        for s in &listed {
            let name = s
                .text("name")?
                .ok_or_else(|| s.missing("name", "a surface name such as \"grass\""))?;
            let name = name.get_ref().trim().to_string();
            if name.is_empty() || out.iter().any(|o| o.name == name) {
                return Err(s.doc().invalid_key(
                    &s.path("name"),
                    "a non-empty name used once",
                    format!("{:?}", clip(&name)),
                ));
            }
            out.push(Surface {
                name,
                stiffness_n_per_m: s.number_req(
                    "stiffness_n_per_m",
                    Bound::positive(MAX_STIFFNESS_N_PER_M, "N/m"),
                )?,
            });
        }
        out
    };
    let default_surface = match t.text("default_surface")? {
        None => surfaces.first().map(|s| s.name.clone()).unwrap_or_default(),
        Some(d) => {
            if !surfaces.iter().any(|s| &s.name == d.get_ref()) {
                let names: Vec<&str> = surfaces.iter().map(|s| s.name.as_str()).collect();
                return Err(t.doc().invalid(
                    &d.span(),
                    &t.path("default_surface"),
                    format!("one of {}", names.join(", ")),
                    format!("{:?}", clip(d.get_ref())),
                ));
            }
            d.into_inner()
        }
    };
    Ok(ImpactSettings {
        default_surface,
        surfaces,
        restitution: t.number_or("restitution", Bound::within(0.0, 1.0, ""), 0.3)?,
        contact_duration_s: t.number("contact_duration_s", Bound::positive(MAX_CONTACT_S, "s"))?,
        detect_threshold_g: t.number_or(
            "detect_threshold_g",
            Bound::positive(MAX_THRESHOLD_G, "g"),
            4.0,
        )?,
    })
}
