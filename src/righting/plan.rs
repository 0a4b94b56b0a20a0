//! Roll plans: the recovery map from every face (multi-goal Dijkstra on
//! the reversed moves) and single queries by A*, and the petgraph graph of
//! resting faces and feasible moves they agree with.
//!
//! Both searches check a move only when the queue reaches it: a move is
//! queued unchecked, and checked when it would settle a face that is still
//! open (the lazy evaluation of edges: the first queued move into a face
//! that passes is its cheapest, since every cheaper one was handed out
//! first and refused). So the costs are the whole graph's, and a map of a
//! 1280-face cage checks about one move in ten.
//!
//! Cost of a move = its rotation angle in degrees (commanded plus the
//! passive rolls until it settles), times `vertex_pivot_weight` for vertex
//! pivots. The A* heuristic is the angle between the current face's normal
//! and the nearest take-off face's normal (docs/references.md; Hart, Nilsson &
//! Raphael 1968): every roll turns the gravity direction by exactly its
//! angle along a great circle, so the sum of the angles can never be less
//! than the angle between the first and last normals, and weights >= 1
//! only raise the cost. Admissible and consistent.

use super::feasibility::Condition;
use super::{Move, MoveKind, Outlook, RightingModel, RotorCommands};
use crate::attitude::{angle_between_deg, rotate_about_world};
use crate::rest::resting_attitude;
use nalgebra::UnitQuaternion;
use petgraph::graph::{DiGraph, NodeIndex};
use petgraph::visit::EdgeRef;
use std::collections::HashMap;

/// One step of a plan: a commanded roll and where it should end.
#[derive(Debug, Clone, PartialEq)]
pub struct Step {
    /// Face the step starts on.
    pub from: usize,
    /// Face the vehicle should settle on.
    pub to: usize,
    /// Edge roll or vertex pivot.
    pub kind: MoveKind,
    /// Pivot node indices.
    pub pivot: Vec<usize>,
    /// Commanded roll angle, degrees.
    pub angle_deg: f64,
    /// Needed / available moment at the worst angle of the roll.
    pub thrust_fraction: f64,
    /// What to set the rotors to (from the feasibility LP): one setting,
    /// or a schedule by roll angle. Shared with the model's move and every
    /// other step that takes it.
    pub commands: std::sync::Arc<RotorCommands>,
    /// Attitude before the step (the previous step's target).
    pub start: UnitQuaternion<f64>,
    /// Attitude to expect after the step: the attitude before it, rotated
    /// about the world-frame pivot axis by the roll angle (and by any
    /// passive rolls that follow).
    pub target: UnitQuaternion<f64>,
    /// Index into [`RightingModel::moves`].
    pub move_index: usize,
}

/// A route from one face to a take-off face, or the reason there is none.
#[derive(Debug, Clone, PartialEq)]
pub struct Plan {
    /// Face the plan starts from.
    pub from: usize,
    /// Take-off face it ends on.
    pub goal: Option<usize>,
    /// Whether a take-off face can be reached.
    pub reachable: bool,
    /// Why not, when it cannot.
    pub reason: Option<String>,
    /// Something the operator should know first (e.g. the start face is not
    /// one the vehicle can rest on).
    pub note: Option<String>,
    /// Sum of the rotation angles, degrees.
    pub total_angle_deg: f64,
    /// Planning cost (angles with vertex pivots weighted), degrees.
    pub cost_deg: f64,
    /// The steps in order.
    pub steps: Vec<Step>,
}

/// What every plan of one map shares: the cost to go from every face
/// (as far as the search went) and the goals, worked out once per map (or
/// per single plan) and handed to the plans and their explanations.
struct Routes {
    to_go: Vec<Option<f64>>,
    goals: Vec<usize>,
}

/// What stands between a face and every take-off face: how many faces the
/// rotors can move the vehicle among from it, and the move out of them
/// that comes closest to being feasible.
#[derive(Debug, Clone, Copy)]
struct Shortfall {
    faces: usize,
    closest: Option<usize>,
}

/// The recovery map's routes before their rotor commands
/// ([`RightingModel::map_draft`]).
pub struct MapDraft {
    routes: Routes,
    /// Per face: the face it settles on and the moves from there.
    hops: Vec<(usize, Vec<usize>)>,
}

/// A recovery map whose moves all have their commands, ready to give each
/// face's plan ([`RightingModel::map_plan`]).
pub struct FinishedMap {
    draft: MapDraft,
    /// Per face without a route, its group of faces that reach the same
    /// faces; each group's shortfall is worked out by whichever plan needs
    /// it first.
    groups: Vec<Option<usize>>,
    shortfalls: Vec<std::sync::OnceLock<Shortfall>>,
}

impl MapDraft {
    /// The moves the map takes, each once, in index order.
    pub fn moves(&self) -> Vec<usize> {
        let mut ks: Vec<usize> = self
            .hops
            .iter()
            .flat_map(|(_, h)| h.iter().copied())
            .collect();
        ks.sort_unstable();
        ks.dedup();
        ks
    }
}

/// A face reached by a search through move `via` (none where the search
/// starts), at `cost_deg` from where it started; `key_deg` orders the
/// queue (the cost itself, or the cost plus the heuristic in A*). Ordered
/// so that a max-heap pops the least key first (ties: the lower move
/// index, then the lower face).
#[derive(Debug, PartialEq)]
struct Reached {
    key_deg: f64,
    cost_deg: f64,
    face: usize,
    via: Option<usize>,
}

impl Eq for Reached {}

impl Ord for Reached {
    fn cmp(&self, other: &Self) -> std::cmp::Ordering {
        other
            .key_deg
            .total_cmp(&self.key_deg)
            .then_with(|| other.via.cmp(&self.via))
            .then_with(|| other.face.cmp(&self.face))
    }
}

impl PartialOrd for Reached {
    fn partial_cmp(&self, other: &Self) -> Option<std::cmp::Ordering> {
        Some(self.cmp(other))
    }
}

/// The graph of resting faces (node weight: face index) and feasible moves
/// (edge weight: move index), one edge per ordered pair of faces, the
/// cheapest.
#[derive(Debug, Clone)]
pub struct PlanGraph {
    /// The graph.
    pub graph: DiGraph<usize, usize>,
    /// Graph node of each face (none for faces the vehicle cannot rest on).
    pub node: Vec<Option<NodeIndex>>,
}

impl RightingModel {
    /// Build the graph of feasible moves. This checks every move; the
    /// planner does not need it (its searches check moves as they reach
    /// them) and the tests hold the planner's costs to this graph's.
    pub fn graph(&self) -> PlanGraph {
        let mut graph = DiGraph::new();
        let node: Vec<Option<NodeIndex>> = self
            .cage
            .faces
            .iter()
            .enumerate()
            .map(|(i, f)| f.stable.then(|| graph.add_node(i)))
            .collect();
        let mut best: HashMap<(usize, usize), usize> = HashMap::new();
        for (k, m) in self.moves.iter().enumerate() {
            if !self.plannable(k) {
                continue;
            }
            let key = (m.roll.from, m.settles_on);
            match best.get(&key) {
                Some(&j) if self.cost_deg(&self.moves[j]) <= self.cost_deg(m) => {}
                _ => {
                    best.insert(key, k);
                }
            }
        }
        let mut edges: Vec<((usize, usize), usize)> = best.into_iter().collect();
        edges.sort();
        for ((a, b), k) in edges {
            if let (Some(na), Some(nb)) = (node[a], node[b]) {
                graph.add_edge(na, nb, k);
            }
        }
        PlanGraph { graph, node }
    }

    /// Take-off faces the vehicle can rest on: the goals of every plan.
    pub fn goals(&self) -> Vec<usize> {
        self.takeoff
            .iter()
            .copied()
            .filter(|&f| self.cage.faces.get(f).is_some_and(|x| x.stable))
            .collect()
    }

    /// The A* heuristic: angle from `face`'s normal to the nearest goal's.
    pub fn heuristic_deg(&self, face: usize) -> f64 {
        self.heuristic_to(face, &self.goals())
    }

    /// [`RightingModel::heuristic_deg`] with the goals given.
    fn heuristic_to(&self, face: usize, goals: &[usize]) -> f64 {
        let n = self.cage.faces[face].normal_body;
        goals
            .iter()
            .map(|&g| angle_between_deg(&n, &self.cage.faces[g].normal_body))
            .fold(f64::INFINITY, f64::min)
    }

    /// Cost to the nearest goal from every face (`None`: unreachable), by
    /// one Dijkstra run from a virtual source joined to every goal, on the
    /// reversed graph of [`RightingModel::graph`] (every move checked).
    pub fn cost_to_go(&self) -> Vec<Option<f64>> {
        self.cost_to_go_on(&self.graph(), &self.goals())
    }

    /// [`RightingModel::cost_to_go`] on a graph already built.
    fn cost_to_go_on(&self, pg: &PlanGraph, goals: &[usize]) -> Vec<Option<f64>> {
        let mut rev: DiGraph<(), f64> = DiGraph::new();
        let nodes: Vec<NodeIndex> = pg.graph.node_indices().map(|_| rev.add_node(())).collect();
        for e in pg.graph.edge_references() {
            let cost = self.cost_deg(&self.moves[*e.weight()]);
            rev.add_edge(nodes[e.target().index()], nodes[e.source().index()], cost);
        }
        let source = rev.add_node(());
        for &g in goals {
            if let Some(n) = pg.node[g] {
                rev.add_edge(source, nodes[n.index()], 0.0);
            }
        }
        let dist = petgraph::algo::dijkstra(&rev, source, None, |e| *e.weight());
        pg.node
            .iter()
            .map(|n| n.and_then(|n| dist.get(&nodes[n.index()]).copied()))
            .collect()
    }

    /// Cost to the nearest goal from the faces the search reaches (`None`:
    /// unreachable), by Dijkstra's search back from the goals along the
    /// moves, in reverse.
    ///
    /// A move is checked only when it is the cheapest way yet to reach the
    /// face it starts from: each move is queued, unchecked, when the face
    /// it ends on is reached, and checked when the queue hands it out
    /// while its start face is still open; only then, if it passes, is
    /// that face settled at that cost. Every move cheaper than the one
    /// that settles a face has been checked and refused, so the costs are
    /// those of the whole graph ([`RightingModel::cost_to_go`]), but most
    /// moves are never checked.
    fn search_back(&self, goals: &[usize]) -> Vec<Option<f64>> {
        let faces = self.cage.faces.len();
        let mut to_go: Vec<Option<f64>> = vec![None; faces];
        let mut queue = std::collections::BinaryHeap::new();
        for &g in goals {
            queue.push(Reached {
                key_deg: 0.0,
                cost_deg: 0.0,
                face: g,
                via: None,
            });
        }
        while let Some(Reached { cost_deg, face, .. }) =
            self.settle_next(&mut queue, |f| to_go[f].is_none())
        {
            to_go[face] = Some(cost_deg);
            for &k in self.moves_into(face) {
                let from = self.moves[k].roll.from;
                if to_go[from].is_none() {
                    let cost_deg = cost_deg + self.cost_deg(&self.moves[k]);
                    queue.push(Reached {
                        key_deg: cost_deg,
                        cost_deg,
                        face: from,
                        via: Some(k),
                    });
                }
            }
        }
        to_go
    }

    /// The next entry of a search's queue that settles a face: the first
    /// whose face is still `open` and whose move, if any, may be planned
    /// with. The one place a search checks a move (see the module comment).
    fn settle_next(
        &self,
        queue: &mut std::collections::BinaryHeap<Reached>,
        open: impl Fn(usize) -> bool,
    ) -> Option<Reached> {
        std::iter::from_fn(|| queue.pop())
            .find(|r| open(r.face) && r.via.is_none_or(|k| self.plannable(k)))
    }

    /// The recovery map: a plan from every face, each starting at the
    /// face's zero-yaw resting attitude.
    ///
    /// The rotor commands are worked out only for the moves the map takes;
    /// where one of them has none (the check passed but no setting carries
    /// some angle), that move leaves the graph and the map is worked out
    /// again, so every step shown has its commands.
    pub fn recovery_map(&self) -> Vec<Plan> {
        self.recovery_map_from(self.map_draft())
    }

    /// The routes of the recovery map before the rotor commands of its
    /// moves are worked out: a caller with threads to spare works out
    /// [`MapDraft::moves`]' commands ([`RightingModel::commands`]) in
    /// parallel, then finishes with [`RightingModel::recovery_map_from`].
    pub fn map_draft(&self) -> MapDraft {
        let routes = self.routes();
        let hops = (0..self.cage.faces.len())
            .map(|face| {
                let start = self.settle_face(face);
                (start, self.next_hops(start, &routes))
            })
            .collect();
        MapDraft { routes, hops }
    }

    /// [`RightingModel::recovery_map`] from a draft of this model's map
    /// (worked out again while a move it takes has no commands).
    pub fn recovery_map_from(&self, draft: MapDraft) -> Vec<Plan> {
        let map = self.finish_map(draft);
        (0..self.cage.faces.len())
            .map(|face| self.map_plan(&map, face))
            .collect()
    }

    /// A draft whose moves all have their commands (worked out again while
    /// one has none), with its faces without a route grouped, ready for
    /// [`RightingModel::map_plan`] (a [`FinishedMap`]).
    pub fn finish_map(&self, mut draft: MapDraft) -> FinishedMap {
        while !self.commands_found(draft.hops.iter().flat_map(|(_, h)| h)) {
            draft = self.map_draft();
        }
        // Faces without a route are explained once per group of faces that
        // reach the same faces.
        let routes = &draft.routes;
        let groups = if routes.to_go.iter().any(Option::is_none) && !routes.goals.is_empty() {
            self.stuck_groups(routes)
        } else {
            Vec::new()
        };
        let count = groups.iter().flatten().max().map_or(0, |g| g + 1);
        FinishedMap {
            draft,
            groups,
            shortfalls: (0..count).map(|_| std::sync::OnceLock::new()).collect(),
        }
    }

    /// The plan of `face` in a finished map ([`RightingModel::finish_map`]):
    /// the map's plans are independent, so a caller may assemble them on
    /// every core. Panics when `face` is not a face of this model's cage.
    pub fn map_plan(&self, map: &FinishedMap, face: usize) -> Plan {
        let (routes, (start, moves)) = (&map.draft.routes, &map.draft.hops[face]);
        let attitude = resting_attitude(&self.cage, face);
        self.assemble(face, *start, &attitude, moves, &routes.goals, || match map
            .groups
            .get(*start)
            .copied()
            .flatten()
        {
            Some(g) => {
                let s = match map.shortfalls.get(g) {
                    Some(kept) => *kept.get_or_init(|| self.shortfall(*start, routes)),
                    None => self.shortfall(*start, routes),
                };
                self.explain_shortfall(*start, &s)
            }
            None => self.explain_on(*start, routes),
        })
    }

    /// The faces of a draft from which no take-off face can be reached:
    /// their plans say why, which needs the [`RightingModel::outlook`] of
    /// every move out of them (a caller with threads to spare works them
    /// out in parallel first) and the whole check of a few.
    pub fn unreached(&self, draft: &MapDraft) -> Vec<usize> {
        (0..self.cage.faces.len())
            .filter(|&f| self.stuck(&draft.routes, f))
            .collect()
    }

    /// The moves among the faces of a draft with no route whose start does
    /// not already refuse them (call after the [`RightingModel::outlook`]
    /// of every move out of [`RightingModel::unreached`]): the moves that
    /// grouping those faces checks whole, which a caller with threads to
    /// spare checks in parallel first ([`RightingModel::check`]).
    pub fn unreached_links(&self, draft: &MapDraft) -> Vec<usize> {
        let routes = &draft.routes;
        if routes.goals.is_empty() {
            return Vec::new();
        }
        let torque_margin = self.limits.torque_margin;
        self.unreached(draft)
            .into_iter()
            .flat_map(|f| self.moves_from(f))
            .filter(|&k| {
                self.stuck(routes, self.moves[k].settles_on)
                    && !self.outlook(k).refused(torque_margin)
            })
            .collect()
    }

    /// Whether the vehicle can rest on face `f` and no take-off face can be
    /// reached from it by `routes`.
    fn stuck(&self, routes: &Routes, f: usize) -> bool {
        routes.to_go[f].is_none() && self.cage.faces[f].stable
    }

    /// The moves from `start` that follow the cost to go down to a goal.
    ///
    /// At each face the next move is the one the whole graph of
    /// [`RightingModel::graph`] would give: among the moves that could
    /// realise the cost to go, the cheapest that can be made, the face it
    /// leads to deciding ties (the higher index, as the graph lists a
    /// face's edges newest first). Only those few moves are checked.
    fn next_hops(&self, start: usize, routes: &Routes) -> Vec<usize> {
        let (to_go, goals) = (&routes.to_go, &routes.goals);
        let mut moves = Vec::new();
        let mut at = start;
        if to_go.get(start).copied().flatten().is_none() {
            return moves;
        }
        // (cost through the move, face it leads to, its own cost, index)
        let mut options: Vec<(f64, usize, f64, usize)> = Vec::new();
        while !goals.contains(&at) && moves.len() <= self.cage.faces.len() {
            let here = to_go[at].unwrap_or(f64::INFINITY);
            options.clear();
            for k in self.moves_from(at) {
                let m = &self.moves[k];
                let cost = self.cost_deg(m);
                if let Some(d) = to_go.get(m.settles_on).copied().flatten()
                    && d + cost <= here + 1e-6
                {
                    options.push((d + cost, m.settles_on, cost, k));
                }
            }
            options.sort_by(|a, b| {
                a.0.total_cmp(&b.0)
                    .then(b.1.cmp(&a.1))
                    .then(a.2.total_cmp(&b.2))
                    .then(a.3.cmp(&b.3))
            });
            match options.iter().find(|o| self.plannable(o.3)) {
                Some(&(_, to, _, k)) => {
                    moves.push(k);
                    at = to;
                }
                None => break,
            }
        }
        moves
    }

    /// Work out the commands of every move listed; whether all were found
    /// (a move without them no longer counts as feasible).
    fn commands_found<'a>(&self, moves: impl Iterator<Item = &'a usize>) -> bool {
        // Every move is asked, not only up to the first without commands,
        // so one pass removes all of them from the next search.
        moves.filter(|&&k| self.commands(k).is_none()).count() == 0
    }

    /// The cost to go from every face, and the goals.
    fn routes(&self) -> Routes {
        let goals = self.goals();
        let to_go = self.search_back(&goals);
        Routes { to_go, goals }
    }

    /// One plan by A* from `face`, the steps' target attitudes starting from
    /// `attitude` (the live attitude, or the face's resting attitude).
    pub fn plan(&self, face: usize, attitude: &UnitQuaternion<f64>) -> Plan {
        if face >= self.cage.faces.len() {
            return Plan {
                from: face,
                goal: None,
                reachable: false,
                reason: Some(format!(
                    "no face {} on this cage (it has F1..F{})",
                    face + 1,
                    self.cage.faces.len()
                )),
                note: None,
                total_angle_deg: 0.0,
                cost_deg: 0.0,
                steps: Vec::new(),
            };
        }
        let start = self.settle_face(face);
        let goals = self.goals();
        loop {
            let moves = self.search_forward(start, &goals);
            // As in the recovery map: a move without commands leaves the
            // graph and the plan is worked out again.
            if self.commands_found(moves.iter()) {
                return self.assemble(face, start, attitude, &moves, &goals, || {
                    self.explain_on(start, &self.routes())
                });
            }
        }
    }

    /// The cheapest moves from `start` to a goal by A* (empty when there is
    /// none, or `start` is a goal). As in [`RightingModel::search_back`], a
    /// move is queued unchecked and checked only when the queue hands it
    /// out while the face it leads to is still open; with a consistent
    /// heuristic the first move that passes into a face is on its cheapest
    /// route from `start`. Only the moves that could lie on a cheapest
    /// route are checked, unless no goal can be reached: then every move
    /// out of the faces the rotors can reach is.
    fn search_forward(&self, start: usize, goals: &[usize]) -> Vec<usize> {
        let faces = self.cage.faces.len();
        let stable = |i: usize| self.cage.faces.get(i).is_some_and(|x| x.stable);
        if !stable(start) {
            return Vec::new();
        }
        let mut closed = vec![false; faces];
        let mut via_move: Vec<Option<usize>> = vec![None; faces];
        let mut queue = std::collections::BinaryHeap::new();
        queue.push(Reached {
            key_deg: self.heuristic_to(start, goals),
            cost_deg: 0.0,
            face: start,
            via: None,
        });
        while let Some(Reached {
            cost_deg,
            face,
            via,
            ..
        }) = self.settle_next(&mut queue, |f| !closed[f])
        {
            closed[face] = true;
            via_move[face] = via;
            if goals.contains(&face) {
                let mut moves = Vec::new();
                let mut at = face;
                while let Some(k) = via_move[at] {
                    moves.push(k);
                    at = self.moves[k].roll.from;
                }
                moves.reverse();
                return moves;
            }
            for k in self.moves_from(face) {
                let to = self.moves[k].settles_on;
                if stable(to) && !closed[to] {
                    let cost_deg = cost_deg + self.cost_deg(&self.moves[k]);
                    queue.push(Reached {
                        key_deg: cost_deg + self.heuristic_to(to, goals),
                        cost_deg,
                        face: to,
                        via: Some(k),
                    });
                }
            }
        }
        Vec::new()
    }

    /// Turn a list of moves into a plan with target attitudes.
    fn assemble(
        &self,
        face: usize,
        start: usize,
        attitude: &UnitQuaternion<f64>,
        moves: &[usize],
        goals: &[usize],
        explain: impl FnOnce() -> String,
    ) -> Plan {
        let f = |i: usize| self.cage.faces[i].id.as_str();
        let note = (start != face).then(|| {
            format!(
                "{} is not a face the vehicle can rest on; left alone it settles on {}, and the plan starts there",
                f(face),
                f(start)
            )
        });
        let mut q = *attitude;
        // Passive rolls from the requested face to where it settles.
        for r in super::moves::settle(&self.cage, face) {
            q = rotate_about_world(&q, &(q * r.axis_body), r.angle_deg.to_radians());
        }
        let mut steps = Vec::new();
        let (mut total, mut cost) = (0.0, 0.0);
        for &k in moves {
            let m: &Move = &self.moves[k];
            let start = q;
            for r in std::iter::once(&m.roll).chain(&m.settle) {
                q = rotate_about_world(&q, &(q * r.axis_body), r.angle_deg.to_radians());
            }
            total += m.total_angle_deg();
            cost += self.cost_deg(m);
            steps.push(Step {
                from: m.roll.from,
                to: m.settles_on,
                kind: m.roll.kind,
                pivot: m.roll.pivot.clone(),
                angle_deg: m.roll.angle_deg,
                thrust_fraction: self.check(k).thrust_fraction.unwrap_or(0.0),
                commands: self.shared_commands(k).cloned().unwrap_or_default(),
                start,
                target: q,
                move_index: k,
            });
        }
        let end = steps.last().map_or(start, |s| s.to);
        let reachable = goals.contains(&end);
        Plan {
            from: face,
            goal: reachable.then_some(end),
            reachable,
            reason: (!reachable).then(explain),
            note,
            total_angle_deg: total,
            cost_deg: cost,
            steps,
        }
    }

    /// Why no take-off face can be reached from `face`: the move out of
    /// the set of faces it can reach that comes closest to being feasible.
    pub fn explain(&self, face: usize) -> String {
        self.explain_on(face, &self.routes())
    }

    /// [`RightingModel::explain`] with the map's routes already worked out
    /// (the search back from the goals went everywhere: `face` has no cost
    /// to go, so no search stopped at it).
    fn explain_on(&self, face: usize, routes: &Routes) -> String {
        if routes.goals.is_empty() {
            return "the profile's take-off faces include none this vehicle can rest on".into();
        }
        self.explain_shortfall(face, &self.shortfall(face, routes))
    }

    /// The faces the rotors can move the vehicle among from `face`, and
    /// the move out of them that comes closest to being feasible.
    fn shortfall(&self, face: usize, routes: &Routes) -> Shortfall {
        let to_go = &routes.to_go;
        // The faces the rotors can move it among, by the moves that can be
        // made (every move out of them is asked on the way; one whose start
        // proves it refused is not checked whole).
        let stable = |i: usize| self.cage.faces.get(i).is_some_and(|x| x.stable);
        let mut reach = vec![false; self.cage.faces.len()];
        // The same faces listed (most groups are a face or a few, so the
        // moves out are found without a pass over every face).
        let mut reached = Vec::new();
        if stable(face) {
            reach[face] = true;
            reached.push(face);
        }
        let mut next = 0;
        while let Some(&at) = reached.get(next) {
            next += 1;
            for k in self.moves_from(at) {
                let to = self.moves[k].settles_on;
                if stable(to) && !reach[to] && self.plannable_unless_refused(k) {
                    reach[to] = true;
                    reached.push(to);
                }
            }
        }
        reached.sort_unstable();
        // Prefer a missing move after which a route exists (one move short);
        // otherwise any move out of the faces the rotors can reach. (In
        // index order: the moves are ordered by the face they start from.)
        let out: Vec<usize> = reached
            .iter()
            .flat_map(|&f| self.moves_from(f))
            .filter(|&k| !reach[self.moves[k].settles_on] && !self.plannable_unless_refused(k))
            .collect();
        let short: Vec<usize> = out
            .iter()
            .copied()
            .filter(|&k| to_go[self.moves[k].settles_on].is_some())
            .collect();
        let pool = if short.is_empty() { out } else { short };
        Shortfall {
            faces: reached.len(),
            closest: self.closest(&pool),
        }
    }

    /// The move of `pool` that comes closest to being feasible: the least
    /// thrust fraction (blocked moves last), then the smallest roll, then
    /// the first listed.
    ///
    /// Only the moves that could be it are checked whole: in order of the
    /// least fraction the start of their roll allows, until that is more
    /// than the best fraction found (branch and bound). A move blocked at
    /// its start has no fraction and needs no check to say so.
    fn closest(&self, pool: &[usize]) -> Option<usize> {
        let mut by_floor: Vec<(f64, usize)> =
            pool.iter().map(|&k| (self.outlook(k).floor(), k)).collect();
        by_floor.sort_by(|a, b| a.0.total_cmp(&b.0));
        // The exact fraction of a move known to have one, or none.
        let exact = |k: usize| match self.outlook(k) {
            Outlook::Blocked => Some(f64::INFINITY),
            Outlook::AtLeast(_) => self.moves[k]
                .check
                .get()
                .map(|c| c.thrust_fraction.unwrap_or(f64::INFINITY)),
        };
        let mut best = f64::INFINITY;
        for &(floor, k) in &by_floor {
            // (The bound and the check's ratio may differ by round-off.)
            if floor.is_infinite() || floor * (1.0 - 1e-6) > best {
                break;
            }
            let f = self.check(k).thrust_fraction.unwrap_or(f64::INFINITY);
            best = best.min(f);
        }
        pool.iter()
            .copied()
            .filter_map(|k| exact(k).map(|f| (f, k)))
            .min_by(|&(fa, a), &(fb, b)| {
                fa.total_cmp(&fb).then(
                    self.moves[a]
                        .roll
                        .angle_deg
                        .total_cmp(&self.moves[b].roll.angle_deg),
                )
            })
            .map(|(_, k)| k)
    }

    /// The faces grouped by what the rotors can reach from them: faces
    /// that can reach each other (a strongly connected component of the
    /// moves that can be made among faces with no route; Tarjan 1972,
    /// petgraph's implementation) reach the same faces, so their
    /// explanations share one search. `None` for faces with a route.
    fn stuck_groups(&self, routes: &Routes) -> Vec<Option<usize>> {
        let faces = self.cage.faces.len();
        let stuck = |f: usize| self.stuck(routes, f);
        let mut graph: DiGraph<(), ()> = DiGraph::with_capacity(faces, 0);
        let nodes: Vec<NodeIndex> = (0..faces).map(|_| graph.add_node(())).collect();
        for f in (0..faces).filter(|&f| stuck(f)) {
            for k in self.moves_from(f) {
                let to = self.moves[k].settles_on;
                if stuck(to) && self.plannable_unless_refused(k) {
                    graph.add_edge(nodes[f], nodes[to], ());
                }
            }
        }
        let mut group = vec![None; faces];
        for (g, members) in petgraph::algo::tarjan_scc(&graph).iter().enumerate() {
            for n in members {
                if stuck(n.index()) {
                    group[n.index()] = Some(g);
                }
            }
        }
        group
    }

    /// The explanation of `face` from its shortfall.
    fn explain_shortfall(&self, face: usize, shortfall: &Shortfall) -> String {
        let f = |i: usize| self.cage.faces[i].id.as_str();
        let count = shortfall.faces;
        let within = if count > 1 {
            format!(" (the rotors can move it among {count} faces, none of them a take-off face)")
        } else {
            String::new()
        };
        let Some(k) = shortfall.closest else {
            return format!("no roll leads from {} to any other face{within}", f(face));
        };
        let (m, check) = (&self.moves[k], self.check(k));
        let pivot: Vec<&str> = m
            .roll
            .pivot
            .iter()
            .map(|&i| self.cage.nodes[i].id.as_str())
            .collect();
        let kind = match m.roll.kind {
            MoveKind::Edge => "across",
            MoveKind::Vertex => "about",
        };
        let what = format!(
            "{} -> {} {kind} {} ({:.0} deg)",
            f(m.roll.from),
            f(m.settles_on),
            pivot.join("-"),
            m.roll.angle_deg
        );
        let lack = match check.thrust_fraction {
            Some(frac) => format!(
                "needs {:.0}% of the best rotor moment at {:.0} deg into the roll ({:.3} of {:.3} N m), more than the {:.0}% the torque margin of {} allows",
                frac * 100.0,
                check.worst_angle_deg,
                check.needed_nm,
                check.available_nm,
                100.0 / self.limits.torque_margin,
                self.limits.torque_margin
            ),
            None if check.blocked_by == Some(Condition::Sideways) => format!(
                "cannot be balanced: on its single node no thrust within the rotors' limits cancels gravity's sideways moment at {:.0} deg into the pivot while lifting the cage",
                check.worst_angle_deg
            ),
            None if check.blocked_by == Some(Condition::Between) => format!(
                "cannot be made as an edge roll: at {:.0} deg into the roll no thrust within the rotors' limits keeps the ground's push between the two pivot nodes (the cage would turn about one node)",
                check.worst_angle_deg
            ),
            None => {
                let forward_only = self.limits.rotors.iter().all(|r| r.reverse_thrust_n <= 0.0);
                format!(
                    "gets no helping moment from the rotors at {:.0} deg into the roll: their thrust turns the cage the other way, presses it into the ground, or would lift or slide it{}",
                    check.worst_angle_deg,
                    if forward_only {
                        " (these motors cannot reverse; reversible motors may open this move)"
                    } else {
                        ""
                    }
                )
            }
        };
        format!(
            "no take-off face can be reached{within}; the closest missing move is {what}, which {lack}"
        )
    }
}
