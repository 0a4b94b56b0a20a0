//! `[cage]`: the cage's shape (parametric or node by node), the rod and
//! string sections, and the payload nodes, with the checks that need only
//! the geometry (ids, member ends, rods the longest members, the centre of
//! mass inside the hull). Checks that need the built cage are in
//! `crate::vehicle`.

use super::read::{Bound, KeyPath, Table, clip, num};
use super::vehicle::{MAX_COORD_M, vehicle_key};
use super::{ProfileError, Vehicle};
use foldhash::{HashMap, HashMapExt};

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
    /// Optional physical tag (a colour band, a letter on a tube end),
    /// shown beside the id so a crew can find the node.
    pub tag: Option<String>,
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

/// Node positions of the six-strut icosahedral tensegrity:
/// (+-s/2, 0, +-L/2), (+-L/2, +-s/2, 0), (0, +-L/2, +-s/2). Rods join the
/// pairs (2k, 2k+1).
pub fn icosa6_positions(rod_length_m: f64, spacing_m: f64) -> [[f64; 3]; 12] {
    let (h, s) = (rod_length_m / 2.0, spacing_m / 2.0);
    [
        [s, 0.0, h],
        [s, 0.0, -h],
        [-s, 0.0, h],
        [-s, 0.0, -h],
        [h, s, 0.0],
        [-h, s, 0.0],
        [h, -s, 0.0],
        [-h, -s, 0.0],
        [0.0, h, s],
        [0.0, -h, s],
        [0.0, h, -s],
        [0.0, -h, -s],
    ]
}

impl CageShape {
    /// Node positions in the profile's order, cage frame.
    pub fn points_m(&self) -> Vec<[f64; 3]> {
        match self {
            CageShape::Icosa6 {
                rod_length_m,
                rod_spacing_m,
            } => icosa6_positions(*rod_length_m, *rod_spacing_m).to_vec(),
            CageShape::Explicit { nodes, .. } => nodes.iter().map(|n| n.pos_m).collect(),
        }
    }

    /// Node ids in the profile's order (the parametric cage's are `N1..N12`).
    pub fn node_ids(&self) -> Vec<String> {
        match self {
            CageShape::Icosa6 { .. } => (1..=12).map(|i| format!("N{i}")).collect(),
            CageShape::Explicit { nodes, .. } => nodes.iter().map(|n| n.id.clone()).collect(),
        }
    }
}

const KEYS: &[&str] = &[
    "kind",
    "rod_length_m",
    "rod_spacing_m",
    "node",
    "rod",
    "string",
    "rod_section",
    "string_section",
    "payload_nodes",
];
const NODE_KEYS: &[&str] = &["id", "pos_m", "tag"];
const MEMBER_KEYS: &[&str] = &["nodes", "tag"];
const ROD_KEYS: &[&str] = &[
    "outer_diameter_mm",
    "inner_diameter_mm",
    "modulus_gpa",
    "crush_strength_mpa",
    "density_kg_m3",
];
const STRING_KEYS: &[&str] = &[
    "diameter_mm",
    "modulus_gpa",
    "breaking_load_n",
    "termination_efficiency",
    "pretension_n",
];

// Plausibility bounds (ours): beyond them a figure is a unit or typing
// mistake for any caged vehicle, not a design.
/// Thickest rod or tube, mm.
const MAX_DIAMETER_MM: f64 = 1000.0;
/// Stiffest material, GPa (diamond is about 1100).
const MAX_MODULUS_GPA: f64 = 1500.0;
/// Strongest material in compression, MPa.
const MAX_STRENGTH_MPA: f64 = 20_000.0;
/// Densest material, kg/m^3 (osmium is about 22 600).
const MAX_DENSITY_KG_M3: f64 = 25_000.0;
/// Largest string breaking load or pretension, N.
const MAX_STRING_LOAD_N: f64 = 1.0e7;

/// A key of `[cage]`, for checks made on the built cage.
pub fn cage_key(name: &str) -> KeyPath {
    KeyPath::section("cage").key(name)
}

/// The key of the pretension, for checks made on the built cage.
pub fn pretension_path() -> KeyPath {
    cage_key("string_section").key("pretension_n")
}

/// The key of member `index` (0-based, in file order) of an explicit cage:
/// `cage.rod[i].nodes` or `cage.string[i].nodes`.
pub fn member_path(rod: bool, index: usize) -> KeyPath {
    cage_key(if rod { "rod" } else { "string" })
        .index(index)
        .key("nodes")
}

/// What the `[cage]` section gives: the shape, the sections, the payload
/// nodes and the hull of the nodes (cage frame, profile order).
pub(super) struct Shape {
    pub(super) cage: CageShape,
    pub(super) rod: RodSection,
    pub(super) string: StringSection,
    pub(super) payload_nodes: Vec<String>,
    pub(super) hull: crate::hull::Hull,
}

pub(super) fn read(root: &Table, vehicle: &Vehicle) -> Result<Shape, ProfileError> {
    let t = root.table("cage", KEYS)?;
    let rod = rod_section(&t.table("rod_section", ROD_KEYS)?)?;
    let string = string_section(&t.table("string_section", STRING_KEYS)?)?;
    let shape = cage_shape(&t)?;
    let payload_nodes = payload_nodes(&t, &shape)?;
    let hull = check_com_inside(&t, &shape, vehicle.com_m)?;
    Ok(Shape {
        cage: shape,
        rod,
        string,
        payload_nodes,
        hull,
    })
}

fn rod_section(t: &Table) -> Result<RodSection, ProfileError> {
    let mm = Bound::positive(MAX_DIAMETER_MM, "mm");
    let rod = RodSection {
        outer_diameter_mm: t.number_req("outer_diameter_mm", mm)?,
        inner_diameter_mm: t.number_or(
            "inner_diameter_mm",
            Bound::non_negative(MAX_DIAMETER_MM, "mm"),
            0.0,
        )?,
        modulus_gpa: t.number_req("modulus_gpa", Bound::positive(MAX_MODULUS_GPA, "GPa"))?,
        crush_strength_mpa: t.number_req(
            "crush_strength_mpa",
            Bound::positive(MAX_STRENGTH_MPA, "MPa"),
        )?,
        density_kg_m3: t.number_req(
            "density_kg_m3",
            Bound::positive(MAX_DENSITY_KG_M3, "kg/m^3"),
        )?,
    };
    if rod.inner_diameter_mm >= rod.outer_diameter_mm {
        return Err(t.doc().invalid_key(
            &t.path("inner_diameter_mm"),
            format!(
                "an inner diameter smaller than the outer diameter ({} mm)",
                num(rod.outer_diameter_mm)
            ),
            format!("{} mm", num(rod.inner_diameter_mm)),
        ));
    }
    Ok(rod)
}

fn string_section(t: &Table) -> Result<StringSection, ProfileError> {
    let load = Bound::positive(MAX_STRING_LOAD_N, "N");
    let string = StringSection {
        diameter_mm: t.number_req("diameter_mm", Bound::positive(MAX_DIAMETER_MM, "mm"))?,
        modulus_gpa: t.number_req("modulus_gpa", Bound::positive(MAX_MODULUS_GPA, "GPa"))?,
        breaking_load_n: t.number_req("breaking_load_n", load)?,
        termination_efficiency: t.number_or(
            "termination_efficiency",
            Bound::within(1e-6, 1.0, ""),
            1.0,
        )?,
        pretension_n: t.number_req(
            "pretension_n",
            Bound::within(f64::MIN, MAX_STRING_LOAD_N, "N"),
        )?,
    };
    let path = t.path("pretension_n");
    if string.pretension_n <= 0.0 {
        // Without prestress the tensegrity's mechanism has no stiffness
        // and no impact on it can be solved.
        return Err(t.doc().invalid_key(
            &path,
            "a positive pretension (with none the cage's mechanism is unstiffened and impacts cannot be solved)",
            num(string.pretension_n),
        ));
    }
    if string.pretension_n >= string.capacity_n() {
        return Err(t.doc().invalid_key(
            &path,
            format!(
                "a pretension below the strings' capacity of {:.1} N (breaking load times termination efficiency)",
                string.capacity_n()
            ),
            format!("{} N, which already breaks the most tensioned string", num(string.pretension_n)),
        ));
    }
    Ok(string)
}

fn cage_shape(t: &Table) -> Result<CageShape, ProfileError> {
    let explicit = t.has("node") || t.has("rod") || t.has("string");
    let kind = match t.text("kind")? {
        Some(k) => match k.get_ref().as_str() {
            "icosa6" => "icosa6",
            "explicit" => "explicit",
            other => {
                return Err(t.doc().invalid(
                    &k.span(),
                    &t.path("kind"),
                    "\"icosa6\" or \"explicit\"",
                    format!("{:?}", clip(other)),
                ));
            }
        },
        None if explicit => "explicit",
        None => {
            return Err(t.missing(
                "kind",
                "kind = \"icosa6\" with rod_length_m, or [[cage.node]], [[cage.rod]] and [[cage.string]] tables",
            ));
        }
    };
    let length = Bound::positive(MAX_COORD_M, "m");
    if kind == "icosa6" {
        if t.has("node") {
            let nodes = t.tables("node", NODE_KEYS)?;
            return Err(t.doc().invalid(
                &nodes.first().map_or(t.span(), |n| n.span()),
                &t.path("node"),
                "no explicit nodes for kind = \"icosa6\"",
                "a [[cage.node]] table",
            ));
        }
        let rod_length_m = t.number_req("rod_length_m", length)?;
        let rod_spacing_m = match t.number("rod_spacing_m", length)? {
            Some(s_m) if s_m >= rod_length_m => {
                return Err(t.doc().invalid_key(
                    &t.path("rod_spacing_m"),
                    format!(
                        "a spacing shorter than the rod length ({} m)",
                        num(rod_length_m)
                    ),
                    format!("{} m", num(s_m)),
                ));
            }
            Some(s_m) => s_m,
            None => rod_length_m / 2.0,
        };
        return Ok(CageShape::Icosa6 {
            rod_length_m,
            rod_spacing_m,
        });
    }
    for key in ["rod_length_m", "rod_spacing_m"] {
        if t.has(key) {
            t.number(key, Bound::within(f64::MIN, f64::MAX, ""))?;
            return Err(t.doc().invalid_key(
                &t.path(key),
                "no parametric keys in an explicit cage",
                key,
            ));
        }
    }
    let mut nodes: Vec<NodeSpec> = Vec::new();
    let mut index: HashMap<String, usize> = HashMap::new();
    let mut near = Coincident::default();
    for n in t.tables("node", NODE_KEYS)? {
        let id = n
            .text("id")?
            .ok_or_else(|| n.missing("id", "a node id such as \"N1\""))?;
        let id_path = n.path("id");
        let id = id.get_ref().trim().to_string();
        if id.is_empty() || id.contains(char::is_whitespace) {
            return Err(t.doc().invalid_key(
                &id_path,
                "a node id without spaces, such as \"N1\"",
                format!("{:?}", clip(&id)),
            ));
        }
        if index.contains_key(&id) {
            return Err(t.doc().invalid_key(
                &id_path,
                "a node id used once",
                format!("{:?} again", clip(&id)),
            ));
        }
        let pos_m = n
            .vec3("pos_m", Bound::within(-MAX_COORD_M, MAX_COORD_M, "m"))?
            .ok_or_else(|| n.missing("pos_m", "three numbers [x, y, z] in metres, cage frame"))?;
        if let Some(other) = near.first_within(&nodes, pos_m) {
            return Err(t.doc().invalid_key(
                &n.path("pos_m"),
                "a position no other node has",
                format!("the position of {}", other.id),
            ));
        }
        index.insert(id.clone(), nodes.len());
        near.add(pos_m, nodes.len());
        let tag = n.text("tag")?.map(|s| s.into_inner());
        nodes.push(NodeSpec { id, pos_m, tag });
    }
    if nodes.len() < 4 {
        return Err(t.doc().invalid(
            &t.span(),
            &t.path("node"),
            "at least 4 nodes that span a volume",
            format!("{} nodes", nodes.len()),
        ));
    }
    let rods = members(t, "rod", &index)?;
    let strings = members(t, "string", &index)?;
    // One member per node pair: two members on one pair cannot be told apart.
    let mut seen: HashMap<[usize; 2], ()> = HashMap::new();
    for (list, rod) in [(&rods, true), (&strings, false)] {
        for (i, m) in list.iter().enumerate() {
            let key = [m.nodes[0].min(m.nodes[1]), m.nodes[0].max(m.nodes[1])];
            if seen.insert(key, ()).is_some() {
                return Err(t.doc().invalid_key(
                    &member_path(rod, i),
                    "one member per pair of nodes",
                    format!("{} - {} joined twice", nodes[key[0]].id, nodes[key[1]].id),
                ));
            }
        }
    }
    if !rods.is_empty() {
        // Rods are the compression members and must be the longest members.
        let shortest_rod = rods
            .iter()
            .map(|m| dist(nodes[m.nodes[0]].pos_m, nodes[m.nodes[1]].pos_m))
            .fold(f64::INFINITY, f64::min);
        for (i, m) in strings.iter().enumerate() {
            let l = dist(nodes[m.nodes[0]].pos_m, nodes[m.nodes[1]].pos_m);
            if l > shortest_rod + 1e-9 {
                return Err(t.doc().invalid_key(
                    &member_path(false, i),
                    format!("strings no longer than the shortest rod ({shortest_rod:.4} m); rods must be the longest members"),
                    format!("a string of {l:.4} m"),
                ));
            }
        }
    }
    if rods.is_empty() && strings.is_empty() {
        return Err(t.doc().invalid(
            &t.span(),
            &t.path("rod"),
            "at least one [[cage.rod]] or [[cage.string]]",
            "no members",
        ));
    }
    Ok(CageShape::Explicit {
        nodes,
        rods,
        strings,
    })
}

/// `[[cage.rod]]` or `[[cage.string]]`: two distinct known nodes each.
fn members(
    t: &Table,
    what: &str,
    index: &HashMap<String, usize>,
) -> Result<Vec<MemberSpec>, ProfileError> {
    let mut out: Vec<MemberSpec> = Vec::new();
    for m in t.tables(what, MEMBER_KEYS)? {
        let expected = "two node ids, such as [\"N1\", \"N2\"]";
        let path = m.path("nodes");
        let ids = m
            .texts("nodes")?
            .ok_or_else(|| m.missing("nodes", expected))?;
        let ids: Vec<&String> = ids.get_ref().iter().map(|s| s.get_ref()).collect();
        if ids.len() != 2 {
            return Err(t.doc().invalid_key(&path, expected, format!("{ids:?}")));
        }
        let mut ends = [0usize; 2];
        for (k, id) in ids.iter().enumerate() {
            ends[k] = *index.get(*id).ok_or_else(|| {
                t.doc().invalid_key(
                    &path,
                    "ids of nodes listed under [[cage.node]]",
                    format!("unknown node {:?}", clip(id)),
                )
            })?;
        }
        if ends[0] == ends[1] {
            return Err(t.doc().invalid_key(
                &path,
                "two different nodes",
                format!("{:?} joined to itself", clip(ids[0])),
            ));
        }
        out.push(MemberSpec {
            nodes: ends,
            tag: m.text("tag")?.map(|s| s.into_inner()),
        });
    }
    Ok(out)
}

/// `payload_nodes`: ids of this cage's nodes, each once.
fn payload_nodes(t: &Table, shape: &CageShape) -> Result<Vec<String>, ProfileError> {
    let Some(list) = t.texts("payload_nodes")? else {
        return Ok(Vec::new());
    };
    let node_ids = shape.node_ids();
    let path = t.path("payload_nodes");
    let mut out: Vec<String> = Vec::new();
    for (i, p) in list.get_ref().iter().enumerate() {
        let p = p.get_ref();
        if !node_ids.contains(p) {
            return Err(t.doc().invalid_key(
                &path.index(i),
                "ids of nodes of this cage",
                format!("{:?}", clip(p)),
            ));
        }
        if out.contains(p) {
            return Err(t.doc().invalid_key(
                &path.index(i),
                "each payload node listed once",
                format!("{:?} again", clip(p)),
            ));
        }
        out.push(p.clone());
    }
    Ok(out)
}

/// Distance under which two nodes count as one, metres.
const SAME_POSITION_M: f64 = 1e-9;

/// Nodes by grid cell, to find a node at (nearly) the same position
/// without comparing every pair: two positions closer than
/// [`SAME_POSITION_M`] lie in the same or neighbouring cells, the cells
/// being larger than that distance.
#[derive(Default)]
struct Coincident {
    cells: HashMap<[i64; 3], Vec<usize>>,
}

impl Coincident {
    /// Cell edge, metres (any size above [`SAME_POSITION_M`] is right; this
    /// one keeps the cell indices small for the largest coordinates).
    const CELL_M: f64 = 1e-6;

    fn cell(p: [f64; 3]) -> [i64; 3] {
        p.map(|x| (x / Self::CELL_M).floor() as i64)
    }

    fn add(&mut self, p: [f64; 3], i: usize) {
        self.cells.entry(Self::cell(p)).or_default().push(i);
    }

    /// The first node (in file order) within [`SAME_POSITION_M`] of `p`.
    fn first_within<'a>(&self, nodes: &'a [NodeSpec], p: [f64; 3]) -> Option<&'a NodeSpec> {
        let [x, y, z] = Self::cell(p);
        let mut best: Option<usize> = None;
        for dx in -1..=1 {
            for dy in -1..=1 {
                for dz in -1..=1 {
                    let Some(list) = self.cells.get(&[x + dx, y + dy, z + dz]) else {
                        continue;
                    };
                    for &i in list {
                        if dist(nodes[i].pos_m, p) < SAME_POSITION_M && best.is_none_or(|b| i < b) {
                            best = Some(i);
                        }
                    }
                }
            }
        }
        best.map(|i| &nodes[i])
    }
}

fn dist(a: [f64; 3], b: [f64; 3]) -> f64 {
    ((a[0] - b[0]).powi(2) + (a[1] - b[1]).powi(2) + (a[2] - b[2]).powi(2)).sqrt()
}

/// The centre of mass must lie strictly inside the hull of the nodes; the
/// hull is kept (the cage reuses it rather than building it again).
fn check_com_inside(
    t: &Table,
    shape: &CageShape,
    com: [f64; 3],
) -> Result<crate::hull::Hull, ProfileError> {
    let com_path = vehicle_key("com_m");
    let hull = crate::hull::Hull::new(&shape.points_m()).map_err(|e| {
        t.doc().invalid(
            &t.span(),
            &t.path("node"),
            "nodes that span a volume (a convex cage)",
            e.to_string(),
        )
    })?;
    if !hull.contains_strictly(com) {
        return Err(t.doc().invalid_key(
            &com_path,
            "a centre of mass inside the cage",
            format!(
                "[{}, {}, {}], outside the hull of the nodes",
                num(com[0]),
                num(com[1]),
                num(com[2])
            ),
        ));
    }
    Ok(hull)
}
