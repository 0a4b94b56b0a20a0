//! The cage shape of a profile: parametric or node by node, with the
//! checks that need the geometry (ids, member ends, rods the longest
//! members, the centre of mass inside the hull).

use super::*;

pub(super) fn cage_shape(
    cage: &RawCage,
    span: Range<usize>,
    v: &Validator,
) -> Result<CageShape, ProfileError> {
    let explicit = !cage.node.is_empty() || !cage.rod.is_empty() || !cage.string.is_empty();
    let kind = match &cage.kind {
        Some(k) => match k.get_ref().as_str() {
            "icosa6" => "icosa6",
            "explicit" => "explicit",
            other => {
                return Err(v.invalid(
                    k.span(),
                    "cage.kind",
                    "\"icosa6\" or \"explicit\"",
                    format!("{other:?}"),
                ));
            }
        },
        None if explicit => "explicit",
        None => {
            return Err(v.invalid(
                span,
                "cage.kind",
                "kind = \"icosa6\" with rod_length_m, or [[cage.node]], [[cage.rod]] and [[cage.string]] tables",
                "neither",
            ));
        }
    };
    if kind == "icosa6" {
        if let Some(n) = cage.node.first() {
            return Err(v.invalid(
                n.span(),
                "cage.node",
                "no explicit nodes for kind = \"icosa6\"",
                "a [[cage.node]] table",
            ));
        }
        let Some(len) = &cage.rod_length_m else {
            return Err(v.invalid(
                span,
                "cage.rod_length_m",
                "a rod length in metres",
                "nothing",
            ));
        };
        let rod_length_m = v.positive(len, "cage.rod_length_m")?;
        let rod_spacing_m = match &cage.rod_spacing_m {
            Some(s) => {
                let s_m = v.positive(s, "cage.rod_spacing_m")?;
                if s_m >= rod_length_m {
                    return Err(v.invalid(
                        s.span(),
                        "cage.rod_spacing_m",
                        &format!("a spacing shorter than the rod length ({rod_length_m} m)"),
                        format!("{s_m} m"),
                    ));
                }
                s_m
            }
            None => rod_length_m / 2.0,
        };
        return Ok(CageShape::Icosa6 {
            rod_length_m,
            rod_spacing_m,
        });
    }
    if let Some(l) = cage.rod_length_m.as_ref().or(cage.rod_spacing_m.as_ref()) {
        return Err(v.invalid(
            l.span(),
            "cage.rod_length_m",
            "no parametric keys in an explicit cage",
            "rod_length_m or rod_spacing_m",
        ));
    }
    let mut nodes: Vec<NodeSpec> = Vec::new();
    let mut index: HashMap<String, usize> = HashMap::new();
    for (i, n) in cage.node.iter().enumerate() {
        let n = n.get_ref();
        let id = n.id.get_ref().trim().to_string();
        let key = format!("cage.node[{}].id", i + 1);
        if id.is_empty() || id.contains(char::is_whitespace) {
            return Err(v.invalid(
                n.id.span(),
                &key,
                "a node id without spaces, such as \"N1\"",
                format!("{id:?}"),
            ));
        }
        if index.contains_key(&id) {
            return Err(v.invalid(
                n.id.span(),
                &key,
                "a node id used once",
                format!("{id:?} again"),
            ));
        }
        let pos_m = v.vec3(&n.pos_m, &format!("cage.node[{}].pos_m", i + 1))?;
        if let Some(other) = nodes.iter().find(|o| dist(o.pos_m, pos_m) < 1e-9) {
            return Err(v.invalid(
                n.pos_m.span(),
                &format!("cage.node[{}].pos_m", i + 1),
                "a position no other node has",
                format!("the position of {}", other.id),
            ));
        }
        index.insert(id.clone(), nodes.len());
        nodes.push(NodeSpec { id, pos_m });
    }
    if nodes.len() < 4 {
        return Err(v.invalid(
            span,
            "cage.node",
            "at least 4 nodes that span a volume",
            format!("{} nodes", nodes.len()),
        ));
    }
    let members = |list: &[S<RawMember>], what: &str| -> Result<Vec<MemberSpec>, ProfileError> {
        let mut out: Vec<MemberSpec> = Vec::new();
        for (i, m) in list.iter().enumerate() {
            let key = format!("cage.{what}[{}].nodes", i + 1);
            let mm = m.get_ref();
            let ids = mm.nodes.get_ref();
            if ids.len() != 2 {
                return Err(v.invalid(
                    mm.nodes.span(),
                    &key,
                    "two node ids, such as [\"N1\", \"N2\"]",
                    format!("{ids:?}"),
                ));
            }
            let mut ends = [0usize; 2];
            for (k, id) in ids.iter().enumerate() {
                ends[k] = *index.get(id).ok_or_else(|| {
                    v.invalid(
                        mm.nodes.span(),
                        &key,
                        "ids of nodes listed under [[cage.node]]",
                        format!("unknown node {id:?}"),
                    )
                })?;
            }
            if ends[0] == ends[1] {
                return Err(v.invalid(
                    mm.nodes.span(),
                    &key,
                    "two different nodes",
                    format!("{:?} joined to itself", ids[0]),
                ));
            }
            out.push(MemberSpec {
                nodes: ends,
                tag: mm.tag.clone(),
            });
        }
        Ok(out)
    };
    let rods = members(&cage.rod, "rod")?;
    let strings = members(&cage.string, "string")?;
    // One member per node pair: two members on one pair cannot be told apart.
    let mut seen: HashMap<[usize; 2], ()> = HashMap::new();
    for (list, what, raw) in [
        (&rods, "rod", &cage.rod),
        (&strings, "string", &cage.string),
    ] {
        for (i, m) in list.iter().enumerate() {
            let key = [m.nodes[0].min(m.nodes[1]), m.nodes[0].max(m.nodes[1])];
            if seen.insert(key, ()).is_some() {
                return Err(v.invalid(
                    raw[i].get_ref().nodes.span(),
                    &format!("cage.{what}[{}].nodes", i + 1),
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
                return Err(v.invalid(
                    cage.string[i].get_ref().nodes.span(),
                    &format!("cage.string[{}].nodes", i + 1),
                    &format!("strings no longer than the shortest rod ({shortest_rod:.4} m); rods must be the longest members"),
                    format!("a string of {l:.4} m"),
                ));
            }
        }
    }
    if rods.is_empty() && strings.is_empty() {
        return Err(v.invalid(
            span,
            "cage.rod",
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

fn dist(a: [f64; 3], b: [f64; 3]) -> f64 {
    ((a[0] - b[0]).powi(2) + (a[1] - b[1]).powi(2) + (a[2] - b[2]).powi(2)).sqrt()
}

/// The centre of mass must lie strictly inside the hull of the nodes.
pub(super) fn check_com_inside(
    shape: &CageShape,
    com: [f64; 3],
    v: &Validator,
    span: Range<usize>,
) -> Result<(), ProfileError> {
    let points: Vec<[f64; 3]> = match shape {
        CageShape::Icosa6 {
            rod_length_m,
            rod_spacing_m,
        } => crate::cage::icosa6_positions(*rod_length_m, *rod_spacing_m).to_vec(),
        CageShape::Explicit { nodes, .. } => nodes.iter().map(|n| n.pos_m).collect(),
    };
    let hull = crate::hull::Hull::new(&points).map_err(|e| {
        v.invalid(
            span.clone(),
            "cage.node",
            "nodes that span a volume (a convex cage)",
            e.to_string(),
        )
    })?;
    if !hull.contains_strictly(com) {
        return Err(v.invalid(
            span,
            "vehicle.com_m",
            "a centre of mass inside the cage",
            format!(
                "[{}, {}, {}], outside the hull of the nodes",
                com[0], com[1], com[2]
            ),
        ));
    }
    Ok(())
}
