//! Cage geometry: nodes, members and hull faces, with stable ids.
//!
//! Id rules (the logbook refers to them, so they are a contract):
//! - Nodes `N1..`: for an explicit cage, the profile's own ids, in file
//!   order. For the parametric six-strut cage, ordered by height in the
//!   upright body frame (highest first, i.e. smallest body z), then by
//!   azimuth of the node measured from body forward (x) towards right (y),
//!   in [0, 360) degrees.
//! - Rods `R1..` and strings `S1..`: each kind sorted by the positions of
//!   its end nodes in the node order (lower index first, then higher).
//! - Faces `F1..`: sorted by tilt when the vehicle sits upright (the face
//!   most level first), then by azimuth of the outward normal in the body
//!   frame, from forward towards right, in [0, 360).
//!
//! Ties are broken at 1e-6 of the cage size (positions) or 1e-6 degrees.

use crate::attitude::{angle_between_deg, rotation_from_rpy_deg};
use crate::hull::{Hull, HullError};
pub use crate::profile::icosa6_positions;
use crate::profile::{CageShape, Profile, TakeoffFaces};
use nalgebra::{DMatrix, DVector, Rotation3, Vector3};
use serde::Serialize;

/// Why a cage could not be built from a valid profile.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum CageError {
    /// The nodes do not enclose a volume.
    #[error("cage nodes: {0}")]
    Hull(#[from] HullError),
    /// The rods alone weigh more than the vehicle.
    #[error(
        "the rods weigh {rods_kg:.3} kg by their section and density, more than the vehicle's mass_kg {mass_kg:.3} kg"
    )]
    RodsTooHeavy {
        /// Mass of the rods.
        rods_kg: f64,
        /// Vehicle mass.
        mass_kg: f64,
    },
    /// The payload nodes cannot carry the payload with the lumped centre at
    /// the vehicle's centre of mass without a negative nodal mass.
    #[error(
        "vehicle.com_m {com_m:?} cannot be the centre of the lumped masses: the payload nodes {nodes:?} would need a negative (or impossible) share of the payload; name payload nodes around the centre of mass, or none to use them all"
    )]
    PayloadCannotCarryCom {
        /// The profile's centre of mass (cage frame).
        com_m: [f64; 3],
        /// Ids of the payload nodes.
        nodes: Vec<String>,
    },
    /// A take-off face id the cage does not have.
    #[error("righting.takeoff_faces: {0} is not a face of this cage (it has F1..F{1})")]
    UnknownFace(String, usize),
}

/// Rod (compression) or string (tension only).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum MemberKind {
    /// Compression member.
    Rod,
    /// Tension-only member.
    String,
}

/// A node of the cage.
#[derive(Debug, Clone, PartialEq)]
pub struct Node {
    /// Stable id.
    pub id: String,
    /// Position, cage frame.
    pub pos_cage: Vector3<f64>,
    /// Position, body frame (after the mount rotation).
    pub pos_body: Vector3<f64>,
    /// Physical tag from the profile (explicit cages), shown beside the id.
    pub tag: Option<String>,
}

impl Node {
    /// The id with its tag, e.g. `N3 (red band)`, or the id alone.
    pub fn label(&self) -> String {
        match &self.tag {
            Some(t) => format!("{} ({t})", self.id),
            None => self.id.clone(),
        }
    }
}

/// A rod or string.
#[derive(Debug, Clone, PartialEq)]
pub struct Member {
    /// Stable id (`R1..` or `S1..`).
    pub id: String,
    /// Rod or string.
    pub kind: MemberKind,
    /// End node indices (lower first).
    pub nodes: [usize; 2],
    /// Physical tag from the profile, shown beside the id.
    pub tag: Option<String>,
    /// Length between node centres.
    pub length_m: f64,
}

/// One edge of a hull face.
#[derive(Debug, Clone, PartialEq)]
pub struct FaceEdge {
    /// End nodes, in the face's counter-clockwise order.
    pub nodes: [usize; 2],
    /// The member along this edge, if any (none: a gap between rod ends).
    pub member: Option<usize>,
}

/// A face of the cage hull, the thing the vehicle rests on.
#[derive(Debug, Clone, PartialEq)]
pub struct Face {
    /// Stable id.
    pub id: String,
    /// Node indices, counter-clockwise seen from outside.
    pub nodes: Vec<usize>,
    /// Edges in order.
    pub edges: Vec<FaceEdge>,
    /// Unit outward normal, body frame.
    pub normal_body: Vector3<f64>,
    /// Centroid of the vertices, body frame.
    pub centroid_body: Vector3<f64>,
    /// Number of edges that are strings.
    pub string_edges: usize,
    /// Whether the centre of mass projects inside the face.
    pub stable: bool,
    /// Smallest distance from the projected centre of mass to an edge
    /// (negative when it projects outside): the static stability margin.
    pub margin_m: f64,
    /// Angle of the normal from straight down when the vehicle sits upright.
    pub tilt_deg: f64,
}

/// The cage with everything derived from its geometry.
#[derive(Debug, Clone, PartialEq)]
pub struct Cage {
    /// Nodes in id order.
    pub nodes: Vec<Node>,
    /// Rods then strings, each in id order.
    pub members: Vec<Member>,
    /// Faces in id order.
    pub faces: Vec<Face>,
    /// Cage -> body rotation.
    pub mount: Rotation3<f64>,
    /// Centre of mass, body frame.
    pub com_body: Vector3<f64>,
    /// Vehicle mass.
    pub mass_kg: f64,
    /// Lumped mass at each node (rod mass at its ends plus payload share).
    pub node_mass_kg: Vec<f64>,
    /// The faces' outward normals side by side (a copy of each face's
    /// `normal_body`): the live path searches them for every attitude
    /// sample, and packed they stay in the cache while the samples stream
    /// through it.
    face_normals_body: Vec<Vector3<f64>>,
    /// Per face, the square of tan(half the smallest angle between its
    /// normal and another face's), kept a little short of it (see
    /// [`Cage::face_capture_tan2`]); empty for cages of many faces.
    face_capture_tan2: Vec<f64>,
}

/// Short hull edges of the six-strut cage that carry no member: between the
/// same ends of two parallel rods (index pairs into [`icosa6_positions`]).
const ICOSA6_GAPS: [[usize; 2]; 6] = [[0, 2], [1, 3], [4, 6], [5, 7], [8, 10], [9, 11]];

fn azimuth_deg(v: &Vector3<f64>) -> f64 {
    if v.x.hypot(v.y) < 1e-9 * v.norm().max(1e-300) {
        return 0.0;
    }
    v.y.atan2(v.x).to_degrees().rem_euclid(360.0)
}

/// Round to a grid so near-ties sort the same way on every machine.
fn quantise(x: f64, step: f64) -> i64 {
    (x / step).round() as i64
}

/// Node positions (cage frame) in id order, ids, and member end pairs.
struct Layout {
    /// Index of each node in the profile's order (the profile's hull
    /// counts nodes that way).
    profile_index: Vec<usize>,
    pos: Vec<Vector3<f64>>,
    ids: Vec<String>,
    rods: Vec<[usize; 2]>,
    strings: Vec<[usize; 2]>,
    tags: Vec<Option<String>>,
}

fn layout(profile: &Profile, mount: &Rotation3<f64>) -> Result<Layout, CageError> {
    let profile_index: Vec<usize>;
    let mut pos: Vec<Vector3<f64>>;
    let ids: Vec<String>;
    let mut rods: Vec<[usize; 2]>;
    let mut strings: Vec<[usize; 2]>;
    let tags: Vec<Option<String>>;
    match &profile.cage {
        CageShape::Icosa6 {
            rod_length_m,
            rod_spacing_m,
        } => {
            pos = icosa6_positions(*rod_length_m, *rod_spacing_m)
                .iter()
                .map(|q| Vector3::from(*q))
                .collect();
            rods = (0..6).map(|k| [2 * k, 2 * k + 1]).collect();
            // The profile's hull is of these same points, in this order.
            strings = Vec::new();
            for f in &profile.hull.faces {
                for i in 0..f.vertices.len() {
                    let (a, b) = (f.vertices[i], f.vertices[(i + 1) % f.vertices.len()]);
                    let e = [a.min(b), a.max(b)];
                    if a < b && !ICOSA6_GAPS.contains(&e) && !rods.contains(&e) {
                        strings.push(e);
                    }
                }
            }
            tags = vec![None; rods.len() + strings.len()];
            // Renumber nodes by the documented rule.
            let size = rod_length_m.max(1e-9);
            let mut order: Vec<usize> = (0..pos.len()).collect();
            order.sort_by_cached_key(|&i| {
                let b = *mount * pos[i];
                (quantise(b.z, 1e-6 * size), quantise(azimuth_deg(&b), 1e-6))
            });
            let mut new_index = vec![0; pos.len()];
            for (new, &old) in order.iter().enumerate() {
                new_index[old] = new;
            }
            pos = order.iter().map(|&i| pos[i]).collect();
            profile_index = order;
            ids = (1..=pos.len()).map(|i| format!("N{i}")).collect();
            for m in rods.iter_mut().chain(strings.iter_mut()) {
                *m = [new_index[m[0]], new_index[m[1]]];
            }
        }
        CageShape::Explicit {
            nodes,
            rods: r,
            strings: s,
        } => {
            pos = nodes.iter().map(|n| Vector3::from(n.pos_m)).collect();
            profile_index = (0..nodes.len()).collect();
            ids = nodes.iter().map(|n| n.id.clone()).collect();
            rods = r.iter().map(|m| m.nodes).collect();
            strings = s.iter().map(|m| m.nodes).collect();
            tags = r.iter().chain(s.iter()).map(|m| m.tag.clone()).collect();
        }
    }
    Ok(Layout {
        profile_index,
        pos,
        ids,
        rods,
        strings,
        tags,
    })
}

/// The hull in the body frame from the profile's hull (cage frame,
/// profile order): the hull of rotated points is the rotated hull, so the
/// faces keep their vertices (renumbered to the cage's order) and
/// offsets, and the normals turn with the mount. `None` when the hull does
/// not fit the nodes (then the caller builds it afresh).
fn body_hull(hull: &Hull, profile_index: &[usize], mount: &Rotation3<f64>) -> Option<Hull> {
    let n = profile_index.len();
    let mut new_index = vec![usize::MAX; n];
    for (new, &old) in profile_index.iter().enumerate() {
        *new_index.get_mut(old)? = new;
    }
    let faces = hull
        .faces
        .iter()
        .map(|f| {
            let vertices = f
                .vertices
                .iter()
                .map(|&v| new_index.get(v).copied().filter(|&i| i != usize::MAX))
                .collect::<Option<Vec<usize>>>()?;
            Some(crate::hull::HullFace {
                vertices,
                normal: mount * f.normal,
                offset: f.offset,
            })
        })
        .collect::<Option<Vec<_>>>()?;
    Some(Hull {
        faces,
        tolerance: hull.tolerance,
    })
}

impl Cage {
    /// The faces' outward normals in face order, packed (the same values
    /// as each face's `normal_body`).
    pub fn face_normals_body(&self) -> &[Vector3<f64>] {
        &self.face_normals_body
    }

    /// Per face b, a bound c_b such that a direction g with b's normal
    /// n_b . g > 0 and |g|^2 - (n_b . g)^2 < c_b (n_b . g)^2 is closer to
    /// n_b than to every other face's normal by a clear margin: within half
    /// the smallest angle from n_b to another normal, no other normal can
    /// be nearer (the bisector plane lies at half that angle), and c_b is
    /// tan^2 of that half-angle, shrunk by 1e-4 and capped at 10 so the gap
    /// between the dot products is far above their rounding. Zero (never
    /// true) for a face whose normal is almost another's. Empty for cages
    /// of more than [`CAPTURE_MAX_FACES`] faces (the bound costs a pass over
    /// every pair of faces).
    pub fn face_capture_tan2(&self) -> &[f64] {
        &self.face_capture_tan2
    }

    /// Build the cage of a validated profile.
    pub fn from_profile(profile: &Profile) -> Result<Cage, CageError> {
        let [r, p, y] = profile.mount_rpy_deg;
        let mount = rotation_from_rpy_deg(r, p, y);
        // Positions (cage frame), ids, and member pairs as indices.
        let Layout {
            profile_index,
            pos,
            ids,
            rods,
            strings,
            tags,
        } = layout(profile, &mount)?;
        let (rod_tags, string_tags) = tags.split_at(rods.len());
        let mut members = Vec::new();
        for (kind, list, tags, prefix) in [
            (MemberKind::Rod, &rods, rod_tags, "R"),
            (MemberKind::String, &strings, string_tags, "S"),
        ] {
            let mut sorted: Vec<([usize; 2], Option<String>)> = list
                .iter()
                .zip(tags)
                .map(|(m, t)| ([m[0].min(m[1]), m[0].max(m[1])], t.clone()))
                .collect();
            sorted.sort_by_key(|(m, _)| *m);
            for (k, (m, tag)) in sorted.into_iter().enumerate() {
                members.push(Member {
                    id: format!("{prefix}{}", k + 1),
                    kind,
                    nodes: m,
                    tag,
                    length_m: (pos[m[0]] - pos[m[1]]).norm(),
                });
            }
        }

        let nodes: Vec<Node> = pos
            .iter()
            .zip(&ids)
            .enumerate()
            .map(|(i, (p, id))| Node {
                id: id.clone(),
                pos_cage: *p,
                pos_body: mount * p,
                tag: match &profile.cage {
                    crate::profile::CageShape::Explicit { nodes, .. } => nodes
                        .get(profile_index[i])
                        .filter(|n| &n.id == id)
                        .and_then(|n| n.tag.clone()),
                    _ => None,
                },
            })
            .collect();
        let com_body = mount * Vector3::from(profile.vehicle.com_m);

        let pts: Vec<[f64; 3]> = nodes
            .iter()
            .map(|n| [n.pos_body.x, n.pos_body.y, n.pos_body.z])
            .collect();
        let hull = match body_hull(&profile.hull, &profile_index, &mount) {
            Some(h) => h,
            None => Hull::new(&pts)?,
        };
        let size = pts
            .iter()
            .flat_map(|p| p.iter().map(|x| x.abs()))
            .fold(0.0_f64, f64::max);
        // The first member on each node pair, found by hashing rather than
        // a scan of every member for every face edge.
        let mut by_nodes: foldhash::HashMap<[usize; 2], usize> =
            foldhash::HashMapExt::with_capacity(members.len());
        for (j, m) in members.iter().enumerate() {
            by_nodes.entry(m.nodes).or_insert(j);
        }
        let member_on = |a: usize, b: usize| by_nodes.get(&[a.min(b), a.max(b)]).copied();
        let mut faces: Vec<Face> = hull
            .faces
            .iter()
            .map(|hf| {
                let k = hf.vertices.len();
                let edges: Vec<FaceEdge> = (0..k)
                    .map(|i| {
                        let (a, b) = (hf.vertices[i], hf.vertices[(i + 1) % k]);
                        FaceEdge {
                            nodes: [a, b],
                            member: member_on(a, b),
                        }
                    })
                    .collect();
                let string_edges = edges
                    .iter()
                    .filter(|e| {
                        e.member
                            .is_some_and(|m| members[m].kind == MemberKind::String)
                    })
                    .count();
                let margin_m = edges
                    .iter()
                    .map(|e| {
                        let (a, b) = (nodes[e.nodes[0]].pos_body, nodes[e.nodes[1]].pos_body);
                        let along = b - a;
                        along.cross(&(com_body - a)).dot(&hf.normal) / along.norm()
                    })
                    .fold(f64::INFINITY, f64::min);
                let centroid_body = hf
                    .vertices
                    .iter()
                    .map(|&v| nodes[v].pos_body)
                    .sum::<Vector3<f64>>()
                    / k as f64;
                Face {
                    id: String::new(),
                    nodes: hf.vertices.clone(),
                    edges,
                    normal_body: hf.normal,
                    centroid_body,
                    string_edges,
                    stable: margin_m > 1e-9 * size.max(1e-9),
                    margin_m,
                    tilt_deg: angle_between_deg(&hf.normal, &Vector3::z()),
                }
            })
            .collect();
        // The key has an arc tangent: worked out once per face, not per
        // comparison (a stable sort either way).
        faces.sort_by_cached_key(|f| {
            (
                quantise(f.tilt_deg, 1e-6),
                quantise(azimuth_deg(&f.normal_body), 1e-6),
                f.nodes.iter().min().copied().unwrap_or(0),
            )
        });
        for (i, f) in faces.iter_mut().enumerate() {
            f.id = format!("F{}", i + 1);
            // Start each polygon at its lowest node index, keeping orientation,
            // so the listing is a function of the geometry alone.
            if let Some(start) = (0..f.nodes.len()).min_by_key(|&i| f.nodes[i]) {
                f.nodes.rotate_left(start);
                f.edges.rotate_left(start);
            }
        }

        let mut cage = Cage {
            nodes,
            members,
            faces,
            mount,
            com_body,
            mass_kg: profile.vehicle.mass_kg,
            node_mass_kg: Vec::new(),
            face_normals_body: Vec::new(),
            face_capture_tan2: Vec::new(),
        };
        cage.face_normals_body = cage.faces.iter().map(|f| f.normal_body).collect();
        cage.face_capture_tan2 = capture_tan2(&cage.face_normals_body);
        cage.node_mass_kg = cage.lumped_masses(profile)?;
        Ok(cage)
    }

    /// Rod mass split to the rod ends; the rest of the vehicle mass on the
    /// payload nodes (all nodes when none are named), placed so the lumped
    /// masses add up to the vehicle mass with their centre at the profile's
    /// centre of mass: the even spread, corrected by the least-norm change
    /// that meets sum w = M_payload and sum w x_i = M_payload c_payload.
    /// The d'Alembert rotation in an impact is taken about this centre, so
    /// it must be the vehicle's.
    fn lumped_masses(&self, profile: &Profile) -> Result<Vec<f64>, CageError> {
        let mut m = vec![0.0; self.nodes.len()];
        let mut rods_kg = 0.0;
        for mem in self.members.iter().filter(|m| m.kind == MemberKind::Rod) {
            let mass = profile.rod_mass_kg(mem.length_m);
            rods_kg += mass;
            m[mem.nodes[0]] += mass / 2.0;
            m[mem.nodes[1]] += mass / 2.0;
        }
        let rest = profile.vehicle.mass_kg - rods_kg;
        if rest < 0.0 {
            return Err(CageError::RodsTooHeavy {
                rods_kg,
                mass_kg: profile.vehicle.mass_kg,
            });
        }
        let carriers: Vec<usize> = if profile.payload_nodes.is_empty() {
            (0..self.nodes.len()).collect()
        } else {
            profile
                .payload_nodes
                .iter()
                .filter_map(|id| self.node_index(id))
                .collect()
        };
        let refuse = || CageError::PayloadCannotCarryCom {
            com_m: profile.vehicle.com_m,
            nodes: carriers.iter().map(|&i| self.nodes[i].id.clone()).collect(),
        };
        if carriers.is_empty() {
            return Err(refuse());
        }
        // Target first moment of the payload: the vehicle's less the rods'.
        let rods_moment: Vector3<f64> = m
            .iter()
            .zip(&self.nodes)
            .map(|(mi, n)| n.pos_body * *mi)
            .sum();
        let payload_moment = self.com_body * profile.vehicle.mass_kg - rods_moment;
        let b = DVector::from_column_slice(&[
            rest,
            payload_moment.x,
            payload_moment.y,
            payload_moment.z,
        ]);
        let size = self.size_m().max(1e-9);
        let tol = 1e-9 * profile.vehicle.mass_kg;
        // Least-norm correction of the even spread; a node it would give a
        // negative mass is set to zero and the rest solved again (at most
        // once per node). Refused when no carriers are left or the centre
        // cannot be met (e.g. the carriers lie in a plane it is off).
        let mut free = carriers.clone();
        for _ in 0..=carriers.len() {
            let k = free.len();
            if k == 0 {
                break;
            }
            let a = DMatrix::from_fn(4, k, |r, c| match r {
                0 => 1.0,
                _ => self.nodes[free[c]].pos_body[r - 1],
            });
            let even = DVector::from_element(k, rest / k as f64);
            let Ok(dw) = a
                .clone()
                .svd(true, true)
                .solve(&(&b - &a * &even), 1e-12 * size)
            else {
                break;
            };
            let w = even + dw;
            if (&a * &w - &b).norm() > tol * size {
                break;
            }
            if w.iter().all(|&wi| wi >= -tol) {
                for (&i, wi) in free.iter().zip(w.iter()) {
                    m[i] += wi.max(0.0);
                }
                return Ok(m);
            }
            free = free
                .iter()
                .zip(w.iter())
                .filter(|&(_, &wi)| wi >= -tol)
                .map(|(&i, _)| i)
                .collect();
        }
        Err(refuse())
    }

    /// Index of a node id.
    pub fn node_index(&self, id: &str) -> Option<usize> {
        self.nodes.iter().position(|n| n.id == id)
    }

    /// Index of a member id.
    pub fn member_index(&self, id: &str) -> Option<usize> {
        self.members.iter().position(|m| m.id == id)
    }

    /// Index of a face id.
    pub fn face_index(&self, id: &str) -> Option<usize> {
        self.faces.iter().position(|f| f.id == id)
    }

    /// A face as an operator types it: its id exactly, else in capitals
    /// (`f7` is F7; ids are written in capitals).
    pub fn face_named(&self, text: &str) -> Option<usize> {
        let text = text.trim();
        self.face_index(text)
            .or_else(|| self.face_index(&text.to_ascii_uppercase()))
    }

    /// A node as an operator types it (see [`Cage::face_named`]).
    pub fn node_named(&self, text: &str) -> Option<usize> {
        let text = text.trim();
        self.node_index(text)
            .or_else(|| self.node_index(&text.to_ascii_uppercase()))
    }

    /// Number of rods.
    pub fn rod_count(&self) -> usize {
        self.members
            .iter()
            .filter(|m| m.kind == MemberKind::Rod)
            .count()
    }

    /// Faces the vehicle may take off from, by index.
    pub fn takeoff_faces(&self, rule: &TakeoffFaces) -> Result<Vec<usize>, CageError> {
        match rule {
            TakeoffFaces::Auto { max_tilt_deg } => Ok(self
                .faces
                .iter()
                .enumerate()
                .filter(|(_, f)| f.stable && f.tilt_deg <= max_tilt_deg + 1e-9)
                .map(|(i, _)| i)
                .collect()),
            TakeoffFaces::List(ids) => ids
                .iter()
                .map(|id| {
                    self.face_index(id)
                        .ok_or_else(|| CageError::UnknownFace(id.clone(), self.faces.len()))
                })
                .collect(),
        }
    }

    /// A length scale for tolerances: the largest node distance from the origin.
    pub fn size_m(&self) -> f64 {
        self.nodes
            .iter()
            .map(|n| n.pos_body.norm())
            .fold(0.0, f64::max)
    }
}

/// The demo profile and its cage, for tests across the crate.
#[cfg(test)]
pub(crate) fn demo_cage() -> (Profile, Cage) {
    let p = Profile::demo().expect("demo profile");
    let c = Cage::from_profile(&p).expect("demo cage");
    (p, c)
}

/// Cages with more faces than this get no capture bounds
/// ([`Cage::face_capture_tan2`]): every pair of faces would be compared.
pub const CAPTURE_MAX_FACES: usize = 512;

fn capture_tan2(normals: &[Vector3<f64>]) -> Vec<f64> {
    if normals.len() > CAPTURE_MAX_FACES {
        return Vec::new();
    }
    normals
        .iter()
        .enumerate()
        .map(|(b, nb)| {
            // The nearest other normal: the largest cosine.
            let c = normals
                .iter()
                .enumerate()
                .filter(|&(j, _)| j != b)
                .map(|(_, nj)| nb.dot(nj).clamp(-1.0, 1.0))
                .fold(f64::NEG_INFINITY, f64::max);
            if !c.is_finite() {
                // A single face: nothing else can be nearer.
                return 10.0;
            }
            if 1.0 - c < 1e-6 {
                return 0.0;
            }
            // tan^2(theta / 2) = (1 - cos theta) / (1 + cos theta).
            ((1.0 - c) / (1.0 + c)).min(10.0) * (1.0 - 1e-4)
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    fn demo() -> Cage {
        Cage::from_profile(&Profile::demo().unwrap()).unwrap()
    }

    /// Ids typed in lower case or with spaces name the same face or node;
    /// what is no id stays unknown.
    #[test]
    fn faces_and_nodes_are_found_as_operators_type_them() {
        let c = demo();
        assert_eq!(c.face_named("f7"), c.face_index("F7"));
        assert_eq!(c.face_named(" F7 "), c.face_index("F7"));
        assert_eq!(c.node_named("n3"), c.node_index("N3"));
        assert!(c.face_named("F7").is_some());
        assert_eq!(c.face_named("f999"), None);
        assert_eq!(c.node_named("x"), None);
    }

    /// The body-frame hull taken from the profile's hull (turned by the
    /// mount, nodes renumbered) is the hull built afresh from the
    /// body-frame points: the same faces with the same vertex cycles and
    /// offsets, normals to round-off (a rotation maps the hull of points
    /// onto the hull of the turned points; common practice, no published
    /// source). The demo is renumbered and mounted at an angle; the prism
    /// is an explicit cage.
    #[test]
    fn the_profile_hull_turned_into_the_body_frame_is_the_body_hull() {
        let prism = Profile::parse(
            include_str!("../profiles/prism-explicit.toml"),
            "prism-explicit.toml",
        )
        .unwrap();
        for p in [Profile::demo().unwrap(), prism] {
            let [r, pi, y] = p.mount_rpy_deg;
            let mount = rotation_from_rpy_deg(r, pi, y);
            let lay = layout(&p, &mount).unwrap();
            let pts: Vec<[f64; 3]> = lay
                .pos
                .iter()
                .map(|q| {
                    let b = mount * q;
                    [b.x, b.y, b.z]
                })
                .collect();
            let fresh = Hull::new(&pts).unwrap();
            let turned = body_hull(&p.hull, &lay.profile_index, &mount).expect("the hull fits");
            assert_eq!(turned.faces.len(), fresh.faces.len());
            for f in &fresh.faces {
                let same_cycle = |g: &[usize]| {
                    g.len() == f.vertices.len()
                        && g.iter()
                            .position(|v| *v == f.vertices[0])
                            .is_some_and(|at| {
                                (0..g.len()).all(|i| g[(at + i) % g.len()] == f.vertices[i])
                            })
                };
                let g = turned
                    .faces
                    .iter()
                    .find(|g| same_cycle(&g.vertices))
                    .expect("the same face");
                assert!((g.normal - f.normal).norm() < 1e-12, "{:?}", f.vertices);
                assert_relative_eq!(g.offset, f.offset, epsilon = 1e-12);
            }
        }
    }

    #[test]
    fn icosa6_counts_match_references() {
        let c = demo();
        assert_eq!(c.nodes.len(), 12);
        assert_eq!(c.rod_count(), 6);
        assert_eq!(c.members.len(), 30);
        assert_eq!(c.faces.len(), 20);
        // docs/references.md (Pellegrino & Calladine 1986; Tibert & Pellegrino 2003):
        // 8 faces bounded by three strings, 12 by two strings and a rod gap.
        let three = c.faces.iter().filter(|f| f.string_edges == 3).count();
        let two = c.faces.iter().filter(|f| f.string_edges == 2).count();
        assert_eq!((three, two), (8, 12));
    }

    #[test]
    fn icosa6_string_length_is_sqrt6_over_4() {
        // docs/references.md: at s = L/2, string length sqrt(6)/4 L (Tibert &
        // Pellegrino 2003; Burkhardt 2008, 2.3).
        let p = Profile::demo().unwrap();
        let CageShape::Icosa6 { rod_length_m, .. } = p.cage else {
            panic!("demo is parametric")
        };
        let c = demo();
        for m in c.members.iter().filter(|m| m.kind == MemberKind::String) {
            assert_relative_eq!(
                m.length_m,
                6f64.sqrt() / 4.0 * rod_length_m,
                epsilon = 1e-12
            );
        }
    }

    #[test]
    fn ids_follow_the_documented_rule() {
        let c = demo();
        for w in c.faces.windows(2) {
            assert!(w[0].tilt_deg <= w[1].tilt_deg + 1e-6);
        }
        for w in c.nodes.windows(2) {
            assert!(w[0].pos_body.z <= w[1].pos_body.z + 1e-6);
        }
        assert_eq!(c.faces[0].id, "F1");
        assert!(c.faces[0].tilt_deg < 1e-6, "demo mount puts a face level");
    }

    #[test]
    fn lumped_masses_carry_the_vehicle_mass_at_its_centre() {
        // Definition of the centre of mass (common practice, no published
        // source): sum m_i = M and sum m_i x_i = M c, c the profile's com_m
        // turned into the body frame by the mount.
        let prism = Profile::parse(
            include_str!("../profiles/prism-explicit.toml"),
            "prism-explicit.toml",
        )
        .unwrap();
        assert!(!prism.payload_nodes.is_empty());
        for p in [Profile::demo().unwrap(), prism] {
            let c = Cage::from_profile(&p).unwrap();
            let total: f64 = c.node_mass_kg.iter().sum();
            assert_relative_eq!(total, p.vehicle.mass_kg, epsilon = 1e-12);
            let moment: Vector3<f64> = c
                .nodes
                .iter()
                .zip(&c.node_mass_kg)
                .map(|(n, m)| n.pos_body * *m)
                .sum();
            let com = c.mount * Vector3::from(p.vehicle.com_m);
            assert_relative_eq!(moment / total, com, epsilon = 1e-12);
            assert!(c.node_mass_kg.iter().all(|&m| m >= 0.0));
        }
    }

    #[test]
    fn payload_nodes_that_cannot_hold_the_centre_are_refused() {
        // The prism's bottom ring lies in a plane 9 cm below the centre of
        // mass: no positive masses on it put the centre there.
        let text = include_str!("../profiles/prism-explicit.toml").replace(
            r#"payload_nodes = ["N1", "N2", "N3", "N4", "N5", "N6"]"#,
            r#"payload_nodes = ["N1", "N2", "N3"]"#,
        );
        let p = Profile::parse(&text, "prism").unwrap();
        assert_eq!(p.payload_nodes.len(), 3);
        let e = Cage::from_profile(&p).unwrap_err();
        assert!(matches!(e, CageError::PayloadCannotCarryCom { .. }), "{e}");
        let msg = e.to_string();
        assert!(msg.contains("com_m") && msg.contains("N1"), "{msg}");
    }
}
