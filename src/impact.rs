//! The impact load case: a contact force on the struck face (or node)
//! along the inward normal, balanced by d'Alembert inertia at the lumped
//! nodal masses, solved as a nonlinear equilibrium of the prestressed cage.
//!
//! The peak contact force comes from one of three estimates:
//! - a measured peak acceleration: F = m a;
//! - a speed: the force at which the work done along the cage's own
//!   load-deflection path, in series with the surface's contact stiffness,
//!   equals the kinetic energy 1/2 m v^2 (for linear springs this is
//!   F = v sqrt(m k), Goldsmith, Impact, 1960);
//! - a speed and a contact duration: the impulse gives the mean force
//!   F_avg = m (1 + e) v / dt and a half-sine pulse peaks at pi/2 F_avg
//!   (Goldsmith 1960; Stronge, Impact Mechanics, 2000).

use crate::cage::Cage;
use crate::profile::Profile;
use crate::statics::{
    Equilibrium, NonlinearModel, SelfStress, StaticsError, Structure, centroid_weighted,
    self_stress,
};
use nalgebra::{Matrix3, Vector3};
use serde::{Deserialize, Serialize};

pub use crate::sample::STANDARD_GRAVITY_M_S2;

/// Load steps along the load-deflection path for the energy balance.
const PATH_STEPS: usize = 24;

/// Where the cage was struck.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Strike {
    /// A hull face, by index into `cage.faces`; the force is shared
    /// equally by its nodes, along its inward normal.
    Face(usize),
    /// One node, by index into `cage.nodes`; the force points from the
    /// node towards the centre of mass.
    Node(usize),
}

/// What is known about the impact.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum ImpactInput {
    /// Approach speed; the surface preset by name (the profile's default
    /// when none is named).
    Speed {
        /// Normal approach speed.
        speed_m_per_s: f64,
        /// Surface preset name.
        surface: Option<String>,
    },
    /// Measured peak acceleration, in multiples of standard gravity.
    PeakAccel {
        /// Peak acceleration in g.
        g: f64,
    },
    /// Approach speed and contact duration (half-sine pulse).
    SpeedAndDuration {
        /// Normal approach speed.
        speed_m_per_s: f64,
        /// Duration of the contact.
        duration_s: f64,
    },
}

impl std::fmt::Display for ImpactInput {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            ImpactInput::Speed {
                speed_m_per_s,
                surface,
            } => match surface {
                Some(s) => write!(f, "{speed_m_per_s} m/s on {s}"),
                None => write!(f, "{speed_m_per_s} m/s"),
            },
            ImpactInput::PeakAccel { g } => write!(f, "peak {g} g"),
            ImpactInput::SpeedAndDuration {
                speed_m_per_s,
                duration_s,
            } => write!(f, "{speed_m_per_s} m/s over {duration_s} s"),
        }
    }
}

/// How the peak force was estimated. Its serde form (snake_case) is what
/// the cage log stores.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum ImpactMethod {
    /// F = m a from a measured peak acceleration.
    MeasuredAcceleration,
    /// Work along the load-deflection path equals the kinetic energy.
    EnergyBalance,
    /// Impulse over a stated contact duration, half-sine peak.
    HalfSinePulse,
}

impl ImpactMethod {
    /// The snake_case name, as the log stores it.
    pub fn name(self) -> &'static str {
        match self {
            ImpactMethod::MeasuredAcceleration => "measured_acceleration",
            ImpactMethod::EnergyBalance => "energy_balance",
            ImpactMethod::HalfSinePulse => "half_sine_pulse",
        }
    }
}

impl std::fmt::Display for ImpactMethod {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.name())
    }
}

/// The force in one member and how much of its capacity it uses.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct MemberLoad {
    /// Member index into `cage.members`.
    pub member: usize,
    /// Total force at the peak, tension positive (prestress included).
    pub force_n: f64,
    /// Capacity: rods buckling or crushing, strings breaking load.
    pub capacity_n: f64,
    /// Rods |compression| / capacity, strings tension / capacity.
    pub utilisation: f64,
}

/// The result of an impact analysis.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ImpactAnalysis {
    /// Peak contact force.
    pub force_n: f64,
    /// How the peak force was estimated.
    pub method: ImpactMethod,
    /// Out-of-balance force of the nonlinear equilibrium at the peak.
    pub residual_n: f64,
    /// How far the struck face (or node) moved in along the inward
    /// normal, relative to the rigid motion.
    pub face_displacement_m: f64,
    /// Strings slack at the peak (member indices).
    pub slack_strings: Vec<usize>,
    /// Every member, in the cage's order.
    pub members: Vec<MemberLoad>,
    /// Newton iterations spent in total.
    pub iterations: usize,
}

/// The contact points and the lumped masses that balance them: the load
/// an impact analysis follows, public so the remaining margin walks the
/// same load path (`crate::margin`).
pub struct ContactLoad {
    /// (node, unit share of the contact force): shares sum to the unit
    /// inward direction.
    contact: Vec<(usize, Vector3<f64>)>,
    masses_kg: Vec<f64>,
}

impl ContactLoad {
    /// The load of a strike on `cage`; an unknown face or node is an error.
    pub fn new(cage: &Cage, strike: Strike) -> Result<ContactLoad, StaticsError> {
        let contact = match strike {
            Strike::Face(i) => {
                let face = cage.faces.get(i).ok_or(StaticsError::UnknownFace {
                    index: i,
                    count: cage.faces.len(),
                })?;
                let share = -face.normal_body / face.nodes.len().max(1) as f64;
                face.nodes.iter().map(|&k| (k, share)).collect()
            }
            Strike::Node(i) => {
                let node = cage.nodes.get(i).ok_or(StaticsError::UnknownNode {
                    index: i,
                    count: cage.nodes.len(),
                })?;
                let d = cage.com_body - node.pos_body;
                // The centre of mass is strictly inside the hull (the profile
                // is refused otherwise), so d is not zero; guard all the same.
                let dir = d.try_normalize(1e-12).unwrap_or_else(Vector3::z);
                vec![(i, dir)]
            }
        };
        Ok(ContactLoad {
            contact,
            masses_kg: cage.node_mass_kg.clone(),
        })
    }

    /// Unit inward direction of the contact force.
    pub fn direction(&self) -> Vector3<f64> {
        self.contact.iter().map(|(_, s)| s).sum()
    }

    /// Contact force `force_n` plus the d'Alembert inertia that balances
    /// it at the current positions: rigid acceleration a = F/m and angular
    /// acceleration alpha = J^-1 M about the lumped centre of mass, inertial
    /// force -m_i (a + alpha x r_i). Self-equilibrated at `pos`.
    pub fn forces(&self, pos: &[Vector3<f64>], force_n: f64, out: &mut [Vector3<f64>]) {
        let m: f64 = self.masses_kg.iter().sum();
        let c = centroid_weighted(pos, &self.masses_kg);
        let mut total = Vector3::zeros();
        let mut moment = Vector3::zeros();
        out.fill(Vector3::zeros());
        for &(k, share) in &self.contact {
            let f = share * force_n;
            out[k] += f;
            total += f;
            moment += (pos[k] - c).cross(&f);
        }
        let mut j = Matrix3::zeros();
        for (p, &mi) in pos.iter().zip(&self.masses_kg) {
            let r = p - c;
            j += (Matrix3::identity() * r.norm_squared() - r * r.transpose()) * mi;
        }
        let alpha = j
            .try_inverse()
            .map(|ji| ji * moment)
            .unwrap_or_else(Vector3::zeros);
        let a = if m > 0.0 { total / m } else { Vector3::zeros() };
        for ((o, p), &mi) in out.iter_mut().zip(pos).zip(&self.masses_kg) {
            *o -= (a + alpha.cross(&(p - c))) * mi;
        }
    }

    /// Mean displacement of the contact nodes along the inward direction.
    pub fn displacement_m(&self, deformation: &[Vector3<f64>]) -> f64 {
        let dir = self.direction();
        let dir = dir / dir.norm().max(f64::MIN_POSITIVE);
        let sum: f64 = self
            .contact
            .iter()
            .map(|&(k, _)| deformation[k].dot(&dir))
            .sum();
        sum / self.contact.len().max(1) as f64
    }
}

/// Half-sine peak force from an impulse: F_avg = m (1 + e) v / dt, peak
/// pi/2 F_avg (Goldsmith 1960; Stronge 2000).
pub fn half_sine_peak_n(
    mass_kg: f64,
    speed_m_per_s: f64,
    restitution: f64,
    duration_s: f64,
) -> f64 {
    std::f64::consts::FRAC_PI_2 * mass_kg * (1.0 + restitution) * speed_m_per_s / duration_s
}

/// The force at which the work along a load-deflection path, in series
/// with a surface of stiffness `surface_n_per_m`, reaches `energy_j`.
///
/// `deflection_m(F)` is called with increasing forces up to `upper_n` and
/// returns the cage's deflection at F. The work is integrated by the
/// trapezoid rule and the last interval is solved exactly for a
/// piecewise-linear path. When `upper_n` is the surface-only estimate
/// sqrt(2 E k) the answer lies below it, since the cage only adds
/// compliance; the walk stops at the first path point past the energy.
pub fn energy_balance_force_n(
    energy_j: f64,
    surface_n_per_m: f64,
    upper_n: f64,
    steps: usize,
    mut deflection_m: impl FnMut(f64) -> Result<f64, StaticsError>,
) -> Result<f64, StaticsError> {
    let steps = steps.max(1);
    let (mut f_prev, mut d_prev, mut w_prev) = (0.0_f64, 0.0_f64, 0.0_f64);
    for k in 1..=steps {
        let f = upper_n * k as f64 / steps as f64;
        let d = deflection_m(f)?;
        // Cage compliance over this interval (never negative), plus the
        // surface's: work from F1 to F is (F^2 - F1^2) / 2 * (c + 1/ks).
        let c = ((d - d_prev) / (f - f_prev)).max(0.0);
        let per = (c + 1.0 / surface_n_per_m) / 2.0;
        let w = w_prev + (f * f - f_prev * f_prev) * per;
        if w >= energy_j || k == steps {
            return Ok((f_prev * f_prev + (energy_j - w_prev).max(0.0) / per)
                .sqrt()
                .min(f));
        }
        (f_prev, d_prev, w_prev) = (f, d, w);
    }
    Ok(upper_n)
}

/// What the statics of a cage needs that depends only on its geometry and
/// sections: the structure and its self-stress analysis (rank, states,
/// prestress). Worked out once per cage and shared by every impact on it
/// and by the report that explains a failure.
#[derive(Debug, Clone, PartialEq)]
pub struct CageStatics {
    /// Nodes and members as statics sees them.
    pub structure: Structure,
    /// Rank, self-stress states and the prestress.
    pub self_stress: SelfStress,
}

impl CageStatics {
    /// The structure and self-stress of a cage with the profile's sections
    /// and pretension.
    pub fn new(cage: &Cage, profile: &Profile) -> Result<CageStatics, StaticsError> {
        let structure = Structure::from_cage(cage, profile);
        let self_stress = self_stress(&structure, profile.string.pretension_n)?;
        Ok(CageStatics {
            structure,
            self_stress,
        })
    }
}

/// The surface preset by name (the profile's default when `None`): its
/// name and contact stiffness, or an error listing the known names.
pub fn surface_stiffness_n_per_m(
    profile: &Profile,
    name: Option<&str>,
) -> Result<(String, f64), StaticsError> {
    let name = name.unwrap_or(profile.impact.default_surface.as_str());
    profile
        .impact
        .surfaces
        .iter()
        .find(|s| s.name == name)
        .map(|s| (s.name.clone(), s.stiffness_n_per_m))
        .ok_or_else(|| StaticsError::UnknownSurface {
            name: name.to_string(),
            known: profile
                .impact
                .surfaces
                .iter()
                .map(|s| s.name.clone())
                .collect(),
        })
}

/// Analyse an impact: the peak force by the method the input allows, and
/// the member forces from the nonlinear equilibrium at that peak.
pub fn analyse_impact(
    cage: &Cage,
    profile: &Profile,
    strike: Strike,
    input: &ImpactInput,
) -> Result<ImpactAnalysis, StaticsError> {
    ContactLoad::new(cage, strike)?;
    let statics = CageStatics::new(cage, profile)?;
    analyse_impact_on(cage, profile, &statics, strike, input, &mut |_, _| {})
}

/// [`analyse_impact`] on statics already worked out for this cage;
/// `progress(done, total)` is called after each load step of the walk
/// along the load path (speed estimates only), so a caller can show
/// progress on a large cage.
pub fn analyse_impact_on(
    cage: &Cage,
    profile: &Profile,
    statics: &CageStatics,
    strike: Strike,
    input: &ImpactInput,
    progress: &mut dyn FnMut(usize, usize),
) -> Result<ImpactAnalysis, StaticsError> {
    let load = ContactLoad::new(cage, strike)?;
    let structure = &statics.structure;
    let model = NonlinearModel::new(structure, &statics.self_stress.prestress_n);
    let load_fn = |pos: &[Vector3<f64>], f: f64, out: &mut [Vector3<f64>]| load.forces(pos, f, out);
    let unloaded = model.unloaded();
    let mass = cage.mass_kg;
    let positive = |what: &'static str, x: f64| {
        if x.is_finite() && x > 0.0 {
            Ok(x)
        } else {
            Err(StaticsError::NotPositive { what, found: x })
        }
    };

    let (force_n, method, state) = match input {
        ImpactInput::PeakAccel { g } => {
            let g = positive("peak acceleration (g)", *g)?;
            let f = mass * g * STANDARD_GRAVITY_M_S2;
            let st = model.solve(&unloaded, &load_fn, f)?;
            (f, ImpactMethod::MeasuredAcceleration, st)
        }
        ImpactInput::SpeedAndDuration {
            speed_m_per_s,
            duration_s,
        } => {
            let v = positive("speed (m/s)", *speed_m_per_s)?;
            let dt = positive("contact duration (s)", *duration_s)?;
            let f = half_sine_peak_n(mass, v, profile.impact.restitution, dt);
            let st = model.solve(&unloaded, &load_fn, f)?;
            (f, ImpactMethod::HalfSinePulse, st)
        }
        ImpactInput::Speed {
            speed_m_per_s,
            surface,
        } => {
            let v = positive("speed (m/s)", *speed_m_per_s)?;
            let k_s = surface_stiffness_n_per_m(profile, surface.as_deref())?.1;
            let energy = 0.5 * mass * v * v;
            let mut upper = v * (mass * k_s).sqrt();
            let mut states: Vec<Equilibrium> = Vec::new();
            let mut f = upper;
            let mut path_iterations = 0;
            // Up to three passes: when the peak falls in the first quarter
            // of the path, walk it again with finer steps below that force.
            for _ in 0..3 {
                states.clear();
                let mut last = unloaded.clone();
                let found = energy_balance_force_n(energy, k_s, upper, PATH_STEPS, |fk| {
                    let st = model.solve(&last, &load_fn, fk)?;
                    let d = load.displacement_m(&model.deformation(&st.pos_m));
                    states.push(st.clone());
                    progress(states.len(), PATH_STEPS);
                    last = st;
                    Ok(d)
                })?;
                f = found;
                path_iterations += states.last().map_or(0, |s| s.iterations);
                let used = states.len();
                if used > PATH_STEPS / 4 {
                    break;
                }
                upper = upper * used as f64 / PATH_STEPS as f64;
            }
            // Solve at the peak from the nearest state below it.
            let from = states
                .iter()
                .rev()
                .find(|s| s.load <= f)
                .cloned()
                .unwrap_or(unloaded.clone());
            let mut st = model.solve(&from, &load_fn, f)?;
            st.iterations = path_iterations + (st.iterations - from.iterations);
            (f, ImpactMethod::EnergyBalance, st)
        }
    };

    let deformation = model.deformation(&state.pos_m);
    let members = structure
        .bars
        .iter()
        .zip(&state.force_n)
        .enumerate()
        .map(|(j, (bar, &t))| MemberLoad {
            member: j,
            force_n: t,
            capacity_n: bar.capacity_n,
            utilisation: bar.utilisation(t),
        })
        .collect();
    Ok(ImpactAnalysis {
        force_n,
        method,
        residual_n: state.residual_n,
        face_displacement_m: load.displacement_m(&deformation),
        slack_strings: state.slack.clone(),
        members,
        iterations: state.iterations,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::statics::{linear_load_case, stack};
    use approx::assert_relative_eq;

    fn demo() -> (Profile, Cage) {
        crate::cage::demo_cage()
    }

    #[test]
    fn half_sine_peak_is_pi_over_two_of_the_impulse_mean() {
        // Goldsmith, Impact, 1960; Stronge, Impact Mechanics, 2000
        // (docs/references.md): F_avg = m (1 + e) v / dt, peak pi/2 F_avg.
        // m 0.5 kg, e 0.2, v 4 m/s, dt 10 ms: F_avg = 240 N, peak 376.99 N.
        assert_relative_eq!(
            half_sine_peak_n(0.5, 4.0, 0.2, 0.01),
            240.0 * std::f64::consts::FRAC_PI_2,
            epsilon = 1e-9
        );
        assert_relative_eq!(
            half_sine_peak_n(0.5, 4.0, 0.2, 0.01),
            376.99112,
            epsilon = 1e-5
        );
    }

    #[test]
    fn energy_balance_of_two_linear_springs_in_series() {
        // Goldsmith, Impact, 1960 (docs/references.md): a mass m at speed v on a
        // linear spring k peaks at F = v sqrt(m k). Cage spring 3e4 N/m in
        // series with a surface of 1.5e5 N/m: k = 2.5e4 N/m; m 0.78 kg,
        // v 3 m/s -> F = 3 sqrt(0.78 * 2.5e4) = 418.93 N.
        let (m, v, k_cage, k_surface): (f64, f64, f64, f64) = (0.78, 3.0, 3.0e4, 1.5e5);
        let upper = v * (m * k_surface).sqrt();
        let f = energy_balance_force_n(0.5 * m * v * v, k_surface, upper, 24, |f| Ok(f / k_cage))
            .unwrap();
        let k = k_cage * k_surface / (k_cage + k_surface);
        assert_relative_eq!(f, v * (m * k).sqrt(), epsilon = 1e-9);
        assert_relative_eq!(f, 418.9272, epsilon = 1e-3);
    }

    #[test]
    fn impact_load_is_self_equilibrated() {
        let (_, c) = demo();
        for strike in [Strike::Face(3), Strike::Node(5)] {
            let load = ContactLoad::new(&c, strike).unwrap();
            let pos: Vec<Vector3<f64>> = c.nodes.iter().map(|n| n.pos_body).collect();
            let mut f = vec![Vector3::zeros(); pos.len()];
            load.forces(&pos, 300.0, &mut f);
            let total: Vector3<f64> = f.iter().sum();
            let moment: Vector3<f64> = pos.iter().zip(&f).map(|(p, f)| p.cross(f)).sum();
            assert!(total.norm() < 1e-9 && moment.norm() < 1e-9);
        }
    }

    #[test]
    fn a_face_impact_needs_the_nonlinear_solution() {
        // docs/design.md ("Why the linear answer is not enough"): the mechanism
        // leaves part of a face load unbalanced by the linear force method,
        // while the nonlinear equilibrium balances it. The design expects a
        // few hundred newtons on a face to slacken some strings and move
        // the face in by millimetres to a centimetre (no published source).
        // Demo profile (invented data), 450 N on the level face F1.
        let (p, c) = demo();
        let g = 450.0 / (c.mass_kg * STANDARD_GRAVITY_M_S2);
        let r = analyse_impact(&c, &p, Strike::Face(0), &ImpactInput::PeakAccel { g }).unwrap();
        assert_relative_eq!(r.force_n, 450.0, epsilon = 1e-9);
        assert!(r.residual_n < 1e-6 * r.force_n, "residual {}", r.residual_n);
        assert!(!r.slack_strings.is_empty(), "{r:?}");
        assert!(
            (1e-3..2e-2).contains(&r.face_displacement_m),
            "moved in {} m",
            r.face_displacement_m
        );

        let s = Structure::from_cage(&c, &p);
        let ss = self_stress(&s, p.string.pretension_n).unwrap();
        let load = ContactLoad::new(&c, Strike::Face(0)).unwrap();
        let mut f = vec![Vector3::zeros(); s.node_count()];
        load.forces(&s.pos_m, 450.0, &mut f);
        let lin = linear_load_case(&s, &ss.prestress_n, &f).unwrap();
        assert!(
            lin.residual_n > 0.01 * stack(&f).norm(),
            "linear residual {}",
            lin.residual_n
        );
    }

    #[test]
    fn slow_impact_matches_the_linear_spring_formula() {
        // Goldsmith 1960 (docs/references.md): in the linear range the peak is
        // F = v sqrt(m k), k the cage's face stiffness in series with the
        // surface's. The cage's stiffness is taken from a small static load.
        let (p, c) = demo();
        let small =
            analyse_impact(&c, &p, Strike::Face(0), &ImpactInput::PeakAccel { g: 0.05 }).unwrap();
        let k_cage = small.force_n / small.face_displacement_m;
        let k_of = |name: &str| p.impact.surfaces.iter().find(|s| s.name == name).unwrap();
        let k_surface = k_of("grass").stiffness_n_per_m;
        let k = k_cage * k_surface / (k_cage + k_surface);
        let v = 0.01;
        let input = ImpactInput::Speed {
            speed_m_per_s: v,
            surface: Some("grass".into()),
        };
        let r = analyse_impact(&c, &p, Strike::Face(0), &input).unwrap();
        let expect = v * (c.mass_kg * k).sqrt();
        assert!(
            (r.force_n / expect - 1.0).abs() < 0.01,
            "{} vs {expect}",
            r.force_n
        );
    }

    #[test]
    fn speed_estimate_lies_below_the_surface_only_bound() {
        // In series with the cage the contact is softer than the surface
        // alone, so the peak is below v sqrt(m k_surface) (Goldsmith 1960).
        let (p, c) = demo();
        let input = ImpactInput::Speed {
            speed_m_per_s: 3.0,
            surface: Some("packed_soil".into()),
        };
        let r = analyse_impact(&c, &p, Strike::Face(0), &input).unwrap();
        assert_eq!(r.method, ImpactMethod::EnergyBalance);
        let k_soil = p
            .impact
            .surfaces
            .iter()
            .find(|s| s.name == "packed_soil")
            .unwrap();
        assert!(r.force_n < 3.0 * (c.mass_kg * k_soil.stiffness_n_per_m).sqrt());
        assert!(r.residual_n < 1e-6 * r.force_n);
        let unknown = ImpactInput::Speed {
            speed_m_per_s: 3.0,
            surface: Some("ice".into()),
        };
        assert!(matches!(
            analyse_impact(&c, &p, Strike::Face(0), &unknown),
            Err(StaticsError::UnknownSurface { .. })
        ));
        assert!(matches!(
            analyse_impact(&c, &p, Strike::Face(99), &input),
            Err(StaticsError::UnknownFace { .. })
        ));
    }
}
