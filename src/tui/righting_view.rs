//! The Righting screen: the roll plan from the face the vehicle rests on to
//! a take-off face, on the net as numbered hinges (when there is room) and
//! as a table, stepped by hand with Enter and verified against live
//! attitude. Done steps say "done", the current step is highlighted, and
//! the header always describes the plan being followed.

use crate::tui::component::Component;
use crate::tui::keys::{Binding, Key, Move};
use crate::tui::model::{Effect, LiveState, Shared, count};
use crate::tui::net_view::{NetMarks, NetView};
use crate::tui::table::{self, Column, Window, wrapped_height};
use cagehand::attitude::{rpy_deg, whole_deg};
use cagehand::cage::Cage;
use cagehand::profile::Profile;
use cagehand::rest::RestState;
use cagehand::righting::stepper::{DEFAULT_MOTION_TIMEOUT_S, Notice, Phase, Stepper};
use cagehand::righting::{MoveKind, Plan, RightingModel, Step};
use ratatui::Frame;
use ratatui::layout::{Constraint, Layout, Rect};
use ratatui::style::Modifier;
use ratatui::text::{Line, Span};
use ratatui::widgets::{Block, Borders, Paragraph, Row, Wrap};
use std::collections::VecDeque;

/// How many stepper notices the screen keeps.
const LOG_LINES: usize = 4;
/// Width of the plan panel when the net is drawn beside it.
const PANEL_W: u16 = 80;
/// Narrowest body that still gets the net beside the panel.
const NET_FROM_W: u16 = PANEL_W + 40;

/// The Righting screen's own state: the moves, the preview plan, and the
/// stepper once the operator has commanded the first step.
#[derive(Debug, Clone)]
pub struct RightingScreen {
    /// Moves and their feasibility (None when they could not be built).
    pub model: Option<RightingModel>,
    /// Plan preview from the resting face (before stepping starts).
    pub preview: Option<Plan>,
    /// The stepper, once the operator has commanded the first step.
    pub stepper: Option<Stepper>,
    /// Recent stepper notices, newest last.
    pub log: VecDeque<String>,
    /// Plans followed since stepping began (1 until a replan).
    pub plans: usize,
    /// Steps commanded since stepping began, over every plan (a step
    /// commanded again after falling back counts again).
    pub commanded: usize,
    /// Step whose detail line is shown.
    pub selected: usize,
    /// First step row shown.
    pub offset: usize,
    /// Where the view of the vehicle as it lies looks from, degrees
    /// clockwise from north (`<` `>` turn it).
    pub view_azimuth_deg: f64,
}

/// What the Righting screen's keys do.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum RightingAction {
    /// Start stepping, or command the waiting step.
    Command,
    /// Abandon stepping; the plan restarts from where the vehicle rests.
    Abandon,
    /// Move the step selection.
    Select(Move),
    /// Turn the view of the vehicle about the vertical, degrees clockwise.
    Turn(i8),
}

const KEYS: &[Binding<RightingAction>] = &[
    Binding {
        keys: &[Key::Enter],
        action: RightingAction::Command,
        help: "command the next step of the plan",
    },
    Binding {
        keys: &[Key::Char('x')],
        action: RightingAction::Abandon,
        help: "abandon stepping and plan again",
    },
    Binding {
        keys: &[Key::Down, Key::Char('j')],
        action: RightingAction::Select(Move::Down),
        help: "select the next step (its detail below)",
    },
    Binding {
        keys: &[Key::Up, Key::Char('k')],
        action: RightingAction::Select(Move::Up),
        help: "select the previous step",
    },
    Binding {
        keys: &[Key::Char('>')],
        action: RightingAction::Turn(1),
        help: "turn the view of the vehicle clockwise",
    },
    Binding {
        keys: &[Key::Char('<')],
        action: RightingAction::Turn(-1),
        help: "turn it anticlockwise",
    },
];

/// Faces along a plan, start first.
pub fn path_faces(plan: &Plan) -> Vec<usize> {
    let mut v = vec![plan.from];
    v.extend(plan.steps.iter().map(|s| s.to));
    v
}

impl RightingScreen {
    /// The vehicle as it lies, with the next step's pivot, rotor commands
    /// and tipping direction (`<` `>` turn the view).
    fn draw_vehicle(&self, shared: &Shared, frame: &mut Frame, area: Rect) {
        use crate::tui::vehicle_view::{NextStep, VehicleView};
        let Some(model) = self.model.as_ref() else {
            return;
        };
        let attitude = shared
            .live
            .rest
            .map_or_else(nalgebra::UnitQuaternion::identity, |x| x.attitude);
        let step = self
            .shown_plan()
            .and_then(|p| p.steps.get(self.current().unwrap_or(0)));
        let next = step.map(|s| NextStep {
            pivot: &s.pivot,
            thrust_n: &s.commands.thrust_n,
            tip_body: cagehand::righting::describe::tip_direction_body(
                &model.cage,
                &model.moves[s.move_index].roll,
            ),
        });
        frame.render_widget(
            VehicleView {
                cage: &model.cage,
                rotors: &model.limits.rotors,
                attitude,
                next,
                view_azimuth_deg: self.view_azimuth_deg,
                theme: &shared.theme,
                block: Some(
                    Block::default()
                        .borders(Borders::ALL)
                        .title(" As it lies: < > turn the view "),
                ),
            },
            area,
        );
    }

    /// The screen for a profile; the second value says why righting is
    /// unavailable, if it is.
    pub fn new(profile: &Profile, cage: &Cage) -> (RightingScreen, Option<String>) {
        let (model, why) = match RightingModel::new(profile, cage) {
            Ok(m) => (Some(m), None),
            Err(e) => (None, Some(format!("righting unavailable: {e}"))),
        };
        (
            RightingScreen {
                model,
                preview: None,
                stepper: None,
                log: VecDeque::new(),
                plans: 0,
                commanded: 0,
                selected: 0,
                offset: 0,
                view_azimuth_deg: 0.0,
            },
            why,
        )
    }

    /// The moves, when they could be built (tests read them).
    #[cfg(test)]
    pub fn moves(&self) -> Option<&RightingModel> {
        self.model.as_ref()
    }

    /// The plan shown: the stepper's (replaced on a replan), else the preview.
    pub fn shown_plan(&self) -> Option<&Plan> {
        self.stepper
            .as_ref()
            .map(|s| s.plan())
            .or(self.preview.as_ref())
    }

    /// The step waiting, commanded or rolling.
    fn current(&self) -> Option<usize> {
        match self.stepper.as_ref()?.phase() {
            Phase::Waiting { step } | Phase::Commanded { step, .. } | Phase::Rolling { step } => {
                Some(step)
            }
            _ => None,
        }
    }

    /// Whether step `k` of the shown plan is done.
    fn is_done(&self, k: usize) -> bool {
        match self.stepper.as_ref().map(|s| s.phase()) {
            Some(Phase::Done) => true,
            Some(_) => self.current().is_some_and(|c| k < c),
            None => false,
        }
    }

    fn push_log(&mut self, text: String) {
        self.log.push_back(text);
        while self.log.len() > LOG_LINES {
            self.log.pop_front();
        }
    }

    fn command(&mut self, shared: &mut Shared) -> bool {
        let t_s = shared.live.rest.map(|r| r.t_s);
        let Some(model) = self.model.clone() else {
            shared.notice = Some("righting is unavailable for this profile".to_string());
            return true;
        };
        let Some(t_s) = t_s else {
            shared.notice = Some("no live attitude: cannot command a step".to_string());
            return true;
        };
        if self.stepper.is_none() {
            let Some(plan) = self.preview.clone() else {
                shared.notice = Some("no plan: wait until the vehicle rests on a face".to_string());
                return true;
            };
            self.stepper = Some(Stepper::new(model.clone(), plan, DEFAULT_MOTION_TIMEOUT_S));
            self.plans = 1;
            self.commanded = 0;
            self.log.clear();
        }
        let Some(stepper) = self.stepper.as_mut() else {
            return false;
        };
        let roll_to = stepper
            .current_step()
            .and_then(|s| model.moves.get(s.move_index))
            .map(|m| m.roll.to);
        match stepper.command(t_s) {
            Some(n) => {
                let text = describe(shared, stepper, n);
                self.commanded += 1;
                self.push_log(text);
                if let Some(to) = roll_to {
                    shared
                        .outbox
                        .push(Effect::SimRoll(shared.face_id(to).to_string()));
                }
                if let Some(c) = self.current() {
                    self.selected = c;
                }
            }
            None => {
                let why = match stepper.phase() {
                    Phase::Done => REFUSED[0],
                    Phase::NoRoute => REFUSED[1],
                    _ => REFUSED[2],
                };
                shared.notice = Some(why.to_string());
            }
        }
        true
    }

    /// Rows the step table shows for a terminal size.
    fn visible_rows(&self, shared: &Shared) -> usize {
        // Body minus the panel border, caution, header, detail, stepping
        // lines, and the table's own title and header rows.
        let body_h = shared.size.1.saturating_sub(3);
        let foot_h = 2 + self.log.len() as u16;
        let panel_w = if shared.size.0 >= NET_FROM_W {
            PANEL_W
        } else {
            shared.size.0
        };
        let detail_h = self.detail_height(shared, panel_w.saturating_sub(2));
        usize::from(body_h.saturating_sub(2 + 3 + 2 + detail_h + foot_h + 2)).max(1)
    }

    /// Rows of the selected step's detail at an inner width: all of it,
    /// between 3 and 8 rows (the rotor commands of a cage with many rotors
    /// take more than one row; the step table keeps at least 3).
    fn detail_height(&self, shared: &Shared, width: u16) -> u16 {
        // Word wrapping loses at most a word's length a row; the words here
        // (ids, figures, `(100%)`) are under 12 characters.
        let row = usize::from(width.saturating_sub(12).max(1));
        let rows: usize = self
            .detail_lines(shared)
            .iter()
            .map(|l| l.width().div_ceil(row).max(1))
            .sum();
        u16::try_from(rows).unwrap_or(u16::MAX).clamp(3, 8)
    }
}

/// What Enter says when there is no step to command: done, no route, or a
/// step under way (dropped from the message line when the stepper moves on).
const REFUSED: [&str; 3] = [
    "righting is complete",
    "there is no route to command",
    "a step is already under way",
];

/// The pivot's node ids joined, e.g. `N9-N6`.
fn pivot_names(shared: &Shared, s: &Step) -> String {
    s.pivot
        .iter()
        .map(|&i| shared.cage.nodes.get(i).map_or("?", |n| n.id.as_str()))
        .collect::<Vec<_>>()
        .join("-")
}

/// A stepper notice in words for the log.
fn describe(shared: &Shared, stepper: &Stepper, n: Notice) -> String {
    match n {
        Notice::Commanded { step } => format!("step {} commanded; watching for motion", step + 1),
        Notice::Rolling { step } => format!("step {}: rolling", step + 1),
        Notice::Arrived { step, next } => format!(
            "step {} arrived as planned; step {} is next",
            step + 1,
            next + 1
        ),
        Notice::FellBack { step } => format!("step {}: fell back; command it again", step + 1),
        Notice::NoMotion { step } => format!("step {}: no motion seen; command it again", step + 1),
        Notice::Replanned { face } => format!(
            "settled on {} instead: new plan of {}",
            shared.face_id(face),
            count(stepper.plan().steps.len(), "step")
        ),
        Notice::Done { face } => format!(
            "on take-off face {}: righting complete",
            shared.face_id(face)
        ),
        Notice::NoRoute { face } => {
            format!("no route from {}: see the reason", shared.face_id(face))
        }
    }
}

impl Component for RightingScreen {
    type Action = RightingAction;

    fn keys(&self) -> &'static [Binding<RightingAction>] {
        KEYS
    }

    fn min_size(&self) -> (u16, u16) {
        (72, 19)
    }

    fn act(&mut self, action: RightingAction, shared: &mut Shared) -> bool {
        match action {
            RightingAction::Command => self.command(shared),
            RightingAction::Abandon => {
                self.stepper = None;
                self.preview = None;
                self.plans = 0;
                self.commanded = 0;
                self.log.clear();
                self.selected = 0;
                self.offset = 0;
                shared.notice = Some(
                    "stepping abandoned; the plan restarts from where the vehicle rests"
                        .to_string(),
                );
                // Plan again at once if the vehicle rests on a face now.
                self.follow_live(shared);
                true
            }
            RightingAction::Turn(dir) => {
                let turn = crate::tui::vehicle_view::TURN_STEP_DEG * f64::from(dir);
                self.view_azimuth_deg = (self.view_azimuth_deg + turn).rem_euclid(360.0);
                if shared.size.0 < NET_FROM_W {
                    // The key would seem to do nothing: say where the view is.
                    shared.notice = Some(format!(
                        "the vehicle view is drawn from {NET_FROM_W} columns (this terminal: {}); turned to {:.0} deg",
                        shared.size.0, self.view_azimuth_deg
                    ));
                }
                true
            }
            RightingAction::Select(m) => {
                let len = self.shown_plan().map_or(0, |p| p.steps.len());
                let page = self.visible_rows(shared);
                self.selected = m.apply(self.selected, len, page);
                self.offset = Window::new(self.selected, self.offset, page, len).offset;
                true
            }
        }
    }

    /// Feed the live rest answer to the stepper, or refresh the preview
    /// plan: a plan only from a face the vehicle rests on.
    fn follow_live(&mut self, shared: &mut Shared) -> bool {
        let Some(model) = self.model.as_ref() else {
            return false;
        };
        let rs = shared.live.rest;
        if let Some(stepper) = self.stepper.as_mut() {
            let Some(rs) = rs else {
                return false;
            };
            let Some(n) = stepper.observe(rs.t_s, &rs.attitude, &rs.status) else {
                return false;
            };
            if matches!(n, Notice::Replanned { .. }) {
                self.plans += 1;
                self.offset = 0;
            }
            let text = describe(shared, stepper, n);
            self.push_log(text);
            if let Some(c) = self.current() {
                self.selected = c;
            }
            // A refusal of Enter said before the stepper moved on is stale.
            if shared
                .notice
                .as_deref()
                .is_some_and(|t| REFUSED.contains(&t))
            {
                shared.notice = None;
            }
            return true;
        }
        // The tracker's word, not only the rest detector's: a steady hover
        // looks like resting on the bottom face but is airborne.
        let resting = shared.live.state == LiveState::Resting;
        match rs {
            Some(rs) if resting && rs.status.state == RestState::Resting => {
                if self
                    .preview
                    .as_ref()
                    .is_some_and(|p| p.from == rs.status.face)
                {
                    return false;
                }
                self.preview = Some(model.plan(rs.status.face, &rs.attitude));
                self.selected = 0;
                self.offset = 0;
                true
            }
            // Not resting: a plan from the old face would no longer be true.
            _ => self.preview.take().is_some(),
        }
    }

    fn draw(&self, shared: &Shared, frame: &mut Frame, area: Rect) {
        let t = &shared.theme;
        let plan = self.shown_plan();
        let panel = if area.width >= NET_FROM_W {
            let [net_area, side] =
                Layout::horizontal([Constraint::Min(30), Constraint::Length(PANEL_W)]).areas(area);
            let mut marks = NetMarks::live(shared);
            if let Some(p) = plan {
                marks.path = path_faces(p);
            }
            let [net_area, lies] =
                Layout::vertical([Constraint::Percentage(50), Constraint::Percentage(50)])
                    .areas(net_area);
            self.draw_vehicle(shared, frame, lies);
            frame.render_widget(
                NetView::framed(
                    shared,
                    &marks,
                    " Net: numbered hinges are the planned rolls ",
                ),
                net_area,
            );
            side
        } else {
            area
        };
        let block = Block::default().borders(Borders::ALL).title(" Recovery ");
        let inner = block.inner(panel);
        frame.render_widget(block, panel);
        let caution_h = cagehand::caution::CAUTION_LINES
            .iter()
            .map(|l| (l.len() as u16).div_ceil(inner.width.max(1)))
            .sum::<u16>();
        let foot_h = 2 + self.log.len() as u16;
        let head_lines = self.head_lines(shared);
        let head_h = wrapped_height(&head_lines, inner.width).clamp(1, 4);
        let detail_h = self.detail_height(shared, inner.width);
        let [caution, head, steps, detail, foot] = Layout::vertical([
            Constraint::Length(caution_h),
            Constraint::Length(head_h),
            Constraint::Min(3),
            Constraint::Length(detail_h),
            Constraint::Length(foot_h),
        ])
        .areas(inner);
        frame.render_widget(
            Paragraph::new(
                cagehand::caution::CAUTION_LINES
                    .iter()
                    .enumerate()
                    .map(|(i, l)| Line::styled(*l, if i == 0 { t.alarm } else { t.warn }))
                    .collect::<Vec<_>>(),
            )
            .wrap(Wrap { trim: true }),
            caution,
        );
        frame.render_widget(Paragraph::new(head_lines).wrap(Wrap { trim: true }), head);
        self.draw_steps(shared, frame, steps);
        frame.render_widget(
            Paragraph::new(self.detail_lines(shared)).wrap(Wrap { trim: true }),
            detail,
        );
        frame.render_widget(
            Paragraph::new(self.foot_lines(shared))
                .wrap(Wrap { trim: true })
                .block(Block::default().borders(Borders::TOP).title(" Stepping ")),
            foot,
        );
    }
}

impl RightingScreen {
    /// The header: what plan is followed, or why there is none.
    fn head_lines(&self, shared: &Shared) -> Vec<Line<'static>> {
        let t = &shared.theme;
        let live = &shared.live;
        let phase = self.stepper.as_ref().map(|s| s.phase());
        if self.model.is_none() {
            return vec![Line::styled(
                "Righting is unavailable for this profile.",
                t.alarm,
            )];
        }
        let Some(p) = self.shown_plan() else {
            let why = match (live.state, live.face) {
                (LiveState::Propped, Some(f)) => format!(
                    "No plan: propped near {}{}, not on a face. A plan starts from a face it rests on.",
                    shared.face_id(f),
                    live.error_deg
                        .map_or(String::new(), |e| format!(" ({e:.0} deg off)"))
                ),
                (LiveState::Airborne, _) => "No plan while airborne.".to_string(),
                (LiveState::Stale, _) => format!(
                    "No plan: {}.",
                    live.reason.as_deref().unwrap_or("no fresh data")
                ),
                _ => "No plan yet: waiting for the vehicle to settle on a face.".to_string(),
            };
            return vec![Line::styled(why, t.dim)];
        };
        let replanned = if self.plans > 1 {
            format!(" (plan {}, after a replan)", self.plans)
        } else {
            String::new()
        };
        match phase {
            Some(Phase::Done) => vec![Line::styled(
                format!(
                    "Righting complete: on take-off face {} after {} commanded{replanned}.",
                    p.goal.map_or("?", |g| shared.face_id(g)),
                    count(self.commanded, "step")
                ),
                t.good,
            )],
            _ if !p.reachable => vec![
                Line::from(vec![
                    Span::styled(format!("From {}: ", shared.face_id(p.from)), t.text),
                    Span::styled("NO ROUTE", t.alarm),
                ]),
                Line::styled(p.reason.clone().unwrap_or_default(), t.warn),
            ],
            _ if p.steps.is_empty() => vec![Line::styled(
                format!(
                    "On take-off face {}: no roll needed.",
                    shared.face_id(p.from)
                ),
                t.good,
            )],
            _ => vec![
                Line::styled(
                    format!(
                        "From {} to {}: {}, {:.0} deg{replanned}",
                        shared.face_id(p.from),
                        p.goal.map_or("?", |g| shared.face_id(g)),
                        count(p.steps.len(), "step"),
                        p.total_angle_deg
                    ),
                    t.text.add_modifier(Modifier::BOLD),
                ),
                Line::styled(p.note.clone().unwrap_or_default(), t.warn),
            ],
        }
    }

    fn draw_steps(&self, shared: &Shared, frame: &mut Frame, area: Rect) {
        let t = &shared.theme;
        let steps: &[Step] = self.shown_plan().map_or(&[], |p| &p.steps);
        let visible = usize::from(area.height.saturating_sub(2)).max(1);
        let win = Window::new(self.selected, self.offset, visible, steps.len());
        let columns = [
            Column {
                header: "",
                width: 4,
                rank: 0,
                flex: false,
            },
            Column {
                header: "#",
                width: 2,
                rank: 0,
                flex: false,
            },
            Column {
                header: "to",
                width: 4,
                rank: 0,
                flex: false,
            },
            Column {
                header: "deg",
                width: 5,
                rank: 1,
                flex: false,
            },
            Column {
                header: "rotor%",
                width: 6,
                rank: 1,
                flex: false,
            },
            Column {
                header: "move",
                width: 5,
                rank: 2,
                flex: false,
            },
            Column {
                header: "pivot",
                width: 9,
                rank: 3,
                flex: false,
            },
            Column {
                header: "expect r p y",
                width: 12,
                rank: 4,
                flex: true,
            },
        ];
        let (kept, widths) = table::fit(&columns, area.width);
        let current = self.current();
        let rows: Vec<Row> = steps
            .iter()
            .enumerate()
            .skip(win.offset)
            .take(win.shown)
            .map(|(k, s)| {
                let done = self.is_done(k);
                let mark = if done {
                    "done"
                } else if current == Some(k) {
                    "now>"
                } else {
                    ""
                };
                let cells = self.step_cells(shared, k, s, mark);
                let row = Row::new(table::pick(&cells, &kept));
                if current == Some(k) {
                    row.style(t.accent.add_modifier(Modifier::REVERSED))
                } else if done {
                    row.style(t.dim)
                } else if k == self.selected {
                    row.style(t.text.add_modifier(Modifier::UNDERLINED))
                } else {
                    row.style(t.text)
                }
            })
            .collect();
        frame.render_widget(
            table::build(
                rows,
                &columns,
                &kept,
                widths,
                t.accent,
                Borders::TOP,
                format!(" {} ", win.title("step")),
            ),
            area,
        );
    }

    fn step_cells(&self, shared: &Shared, k: usize, s: &Step, mark: &str) -> Vec<String> {
        let pivot = pivot_names(shared, s);
        let [r, p, y] = rpy_deg(&s.target);
        vec![
            mark.to_string(),
            format!("{}", k + 1),
            shared.face_id(s.to).to_string(),
            format!("{:.1}", s.angle_deg),
            format!("{:.0}%", s.thrust_fraction * 100.0),
            match s.kind {
                MoveKind::Edge => "roll".to_string(),
                MoveKind::Vertex => "pivot".to_string(),
            },
            pivot,
            format!(
                "{:.0} {:.0} {:.0}",
                whole_deg(r),
                whole_deg(p),
                whole_deg(y)
            ),
        ]
    }

    /// The selected step whole, and what the rotor column means.
    fn detail_lines(&self, shared: &Shared) -> Vec<Line<'static>> {
        let t = &shared.theme;
        let legend = Line::styled(
            "rotor% = share of the best rotor moment the step needs",
            t.dim,
        );
        let Some(s) = self.shown_plan().and_then(|p| p.steps.get(self.selected)) else {
            return vec![legend];
        };
        let pivot = pivot_names(shared, s);
        let [r, p, y] = rpy_deg(&s.target);
        let how = match s.kind {
            MoveKind::Edge => "roll over edge",
            MoveKind::Vertex => "pivot on node",
        };
        vec![
            Line::styled(
                format!(
                    "Step {}: {how} {} by {:.1} deg onto {}, {:.0}% of the best rotor moment; expect r {:.0} p {:.0} y {:.0}",
                    self.selected + 1,
                    pivot,
                    s.angle_deg,
                    shared.face_id(s.to),
                    s.thrust_fraction * 100.0,
                    whole_deg(r),
                    whole_deg(p),
                    whole_deg(y)
                ),
                t.text,
            ),
            Line::styled(self.rotor_words(s), t.accent),
            legend,
        ]
    }

    /// The selected step's rotor setting and which way it tips the
    /// vehicle, in the plan sheet's words, so the crew has the commands at
    /// any width (the vehicle view shows them from [`NET_FROM_W`] columns).
    fn rotor_words(&self, s: &cagehand::righting::Step) -> String {
        use cagehand::righting::describe::{setting_text, step_words};
        let Some(model) = self.model.as_ref() else {
            return String::new();
        };
        let tips = step_words(
            &model.cage,
            &model.moves[s.move_index].roll,
            &s.start,
            &s.target,
        );
        let setting = if s.commands.schedule.is_empty() {
            setting_text(&model.limits.rotors, &s.commands.thrust_n)
        } else {
            format!(
                "{} at the start, changing during the roll (`cagehand plan` lists the schedule)",
                setting_text(&model.limits.rotors, &s.commands.thrust_n)
            )
        };
        format!("rotors: {setting}; {tips}")
    }

    fn foot_lines(&self, shared: &Shared) -> Vec<Line<'static>> {
        let t = &shared.theme;
        let plan = self.shown_plan();
        let action = match self.stepper.as_ref().map(|s| s.phase()) {
            None if plan.is_some_and(|p| p.reachable && !p.steps.is_empty()) => {
                "Enter: command step 1 (the roll is watched and verified)".to_string()
            }
            None => "Nothing to command.".to_string(),
            Some(Phase::Waiting { step }) => {
                format!("Enter: command step {}   x: abandon", step + 1)
            }
            Some(Phase::Commanded { step, .. }) => {
                format!("Step {} commanded: waiting for motion", step + 1)
            }
            Some(Phase::Rolling { step }) => {
                format!("Step {}: rolling, waiting to settle", step + 1)
            }
            Some(Phase::Done) => "Done: run the Preflight check (4).".to_string(),
            Some(Phase::NoRoute) => "No route from here: see the reason above.".to_string(),
        };
        let mut lines = vec![Line::styled(action, t.accent)];
        lines.extend(self.log.iter().map(|l| Line::styled(l.clone(), t.text)));
        lines
    }
}

#[cfg(test)]
mod tests {
    use crate::tui::model::{LiveState, Msg, demo_model, live_on, update};
    use crate::tui::view::render_text;
    use ratatui::crossterm::event::{KeyCode, KeyEvent, KeyModifiers};

    fn key(c: KeyCode) -> Msg {
        Msg::Key(KeyEvent::new(c, KeyModifiers::NONE))
    }

    #[test]
    fn done_steps_are_marked_and_the_header_follows_completion() {
        let mut m = demo_model();
        update(&mut m, key(KeyCode::Char('2')));
        let start = 8;
        let live = live_on(&m, start, 1.0, LiveState::Resting);
        update(&mut m, Msg::Live(Box::new(live)));
        let plan = m.screens.righting.shown_plan().unwrap().clone();
        let s = render_text(&m, 80, 24);
        assert!(s.contains("share of the best rotor moment"), "{s}");
        // The selected step's rotor setting, in the plan sheet's words, at
        // 80 columns too (where the vehicle view is not drawn).
        assert!(s.contains("rotors: #1 "), "{s}");
        assert!(s.contains("tips toward the "), "{s}");
        let n = plan.steps.len();
        assert!(s.contains(&crate::tui::model::count(n, "step")), "{s}");
        // Step through every roll: command, move, arrive.
        let mut t = 1.0;
        for step in &plan.steps {
            update(&mut m, key(KeyCode::Enter));
            t += 0.5;
            let mv = live_on(&m, step.from, t, LiveState::Moving);
            update(&mut m, Msg::Live(Box::new(mv)));
            t += 1.0;
            let at = live_on(&m, step.to, t, LiveState::Resting);
            update(&mut m, Msg::Live(Box::new(at)));
        }
        let s = render_text(&m, 80, 24);
        assert!(s.contains("Righting complete"), "{s}");
        // Every roll commanded is counted (over replans too).
        let said = format!("after {} commanded", crate::tui::model::count(n, "step"));
        assert!(s.contains(&said), "{said}:\n{s}");
        assert!(s.contains("done"), "finished steps are marked:\n{s}");
        assert!(!s.contains("now>"), "{s}");
    }

    #[test]
    fn turning_the_view_where_it_is_not_drawn_says_so() {
        let mut m = demo_model();
        update(&mut m, key(KeyCode::Char('2')));
        update(&mut m, Msg::Resize(80, 24));
        update(&mut m, key(KeyCode::Char('>')));
        let s = render_text(&m, 80, 24);
        assert!(s.contains("drawn from 120 columns"), "{s}");
        update(&mut m, Msg::Resize(140, 40));
        m.shared.notice = None;
        update(&mut m, key(KeyCode::Char('>')));
        let s = render_text(&m, 140, 40);
        assert!(s.contains("As it lies"), "{s}");
        assert!(!s.contains("drawn from 120 columns"), "{s}");
    }

    #[test]
    fn propped_has_no_plan_and_says_why() {
        let mut m = demo_model();
        update(&mut m, key(KeyCode::Char('2')));
        let live = live_on(&m, 8, 1.0, LiveState::Resting);
        update(&mut m, Msg::Live(Box::new(live)));
        assert!(m.screens.righting.shown_plan().is_some());
        let propped = live_on(&m, 8, 2.0, LiveState::Propped);
        update(&mut m, Msg::Live(Box::new(propped)));
        assert!(m.screens.righting.shown_plan().is_none());
        let s = render_text(&m, 80, 24);
        assert!(s.contains("propped near F9"), "{s}");
    }

    #[test]
    fn airborne_has_no_plan_even_when_the_hover_is_steady() {
        let mut m = demo_model();
        // The rest detector says resting (a steady hover), the tracker airborne.
        let mut live = live_on(&m, 8, 1.0, LiveState::Resting);
        live.state = LiveState::Airborne;
        update(&mut m, Msg::Live(Box::new(live)));
        assert!(m.screens.righting.shown_plan().is_none());
    }
}
