//! The vehicle as it lies, seen by a person standing beside it: the cage
//! projected from the live attitude onto a vertical plane, the ground
//! line, the nose, the rotors marked with the next step's command
//! (F forward, R reversed, o off), the next pivot highlighted and an arrow
//! for the way the vehicle will tip. A pure function of the geometry, the
//! attitude, the next step and the viewpoint; nothing here is drawn by
//! hand.
//!
//! Viewpoint: the person looks horizontally toward the azimuth
//! `view_azimuth_deg` (degrees clockwise from north, NED), so screen right
//! is that direction turned 90 deg clockwise and screen up is world up.

use crate::tui::theme::Theme;
use cagehand::cage::{Cage, MemberKind};
use cagehand::profile::Rotor;
use nalgebra::{UnitQuaternion, Vector3};
use ratatui::buffer::Buffer;
use ratatui::layout::Rect;
use ratatui::style::{Color, Style};
use ratatui::symbols::Marker;
use ratatui::text::{Line as TextLine, Span};
use ratatui::widgets::canvas::{Canvas, Line};
use ratatui::widgets::{Block, Widget};

/// Degrees the viewpoint turns per key press.
pub const TURN_STEP_DEG: f64 = 45.0;

/// The next step as the view needs it.
#[derive(Debug, Clone, Copy)]
pub struct NextStep<'a> {
    /// Pivot node indices (two for an edge, one for a vertex).
    pub pivot: &'a [usize],
    /// Thrust per rotor at the start of the step, newtons (profile order).
    pub thrust_n: &'a [f64],
    /// Direction the vehicle tips toward, body frame (zero: none).
    pub tip_body: Vector3<f64>,
}

/// The widget.
pub struct VehicleView<'a> {
    /// The cage (body-frame node positions).
    pub cage: &'a Cage,
    /// Rotors, body frame.
    pub rotors: &'a [Rotor],
    /// Attitude, body to world (NED).
    pub attitude: UnitQuaternion<f64>,
    /// The next step, when there is one.
    pub next: Option<NextStep<'a>>,
    /// Direction the viewer looks, degrees clockwise from north.
    pub view_azimuth_deg: f64,
    /// Colours.
    pub theme: &'a Theme,
    /// Frame around the view.
    pub block: Option<Block<'a>>,
}

/// Where body-frame points land in the drawing plane (metres: x to the
/// viewer's right, y up from the ground under the lowest node).
#[derive(Debug, Clone, Copy)]
pub struct Projection {
    attitude: UnitQuaternion<f64>,
    right: Vector3<f64>,
    ground_up_m: f64,
    /// Drawing bounds, x.
    pub x_bounds: [f64; 2],
    /// Drawing bounds, y.
    pub y_bounds: [f64; 2],
}

impl Projection {
    /// The projection for `cage` at `attitude`, fitted to `area` (cells are
    /// about twice as tall as wide, so x spans twice the cells' height
    /// ratio).
    pub fn new(
        cage: &Cage,
        attitude: &UnitQuaternion<f64>,
        view_azimuth_deg: f64,
        area: Rect,
    ) -> Projection {
        let az = view_azimuth_deg.to_radians();
        let right = Vector3::new(-az.sin(), az.cos(), 0.0);
        let centre = cage.com_body;
        let lowest = cage
            .nodes
            .iter()
            .map(|n| (attitude * (n.pos_body - centre)).z)
            .fold(f64::NEG_INFINITY, f64::max);
        let radius = cage
            .nodes
            .iter()
            .map(|n| (n.pos_body - centre).norm())
            .fold(0.0, f64::max)
            .max(1e-6);
        let y_span = 2.6 * radius;
        let cells = (f64::from(area.width.max(1)), f64::from(area.height.max(1)));
        let x_span = y_span * cells.0 / (2.0 * cells.1);
        Projection {
            attitude: *attitude,
            right,
            ground_up_m: lowest,
            x_bounds: [-x_span / 2.0, x_span / 2.0],
            y_bounds: [-0.2 * radius, y_span - 0.2 * radius],
        }
    }

    /// A world-frame offset from the centre of mass, projected.
    fn world(&self, w: &Vector3<f64>) -> (f64, f64) {
        (w.dot(&self.right), self.ground_up_m - w.z)
    }

    /// A body-frame point, projected (relative to `centre`, the centre of
    /// mass).
    pub fn point(&self, centre: &Vector3<f64>, p: &Vector3<f64>) -> (f64, f64) {
        self.world(&(self.attitude * (p - centre)))
    }

    /// The terminal cell a drawing-plane point falls in, inside `inner`
    /// (the canvas area), by the braille grid's own mapping.
    #[cfg(test)]
    pub fn cell(&self, inner: Rect, (x, y): (f64, f64)) -> Option<(u16, u16)> {
        let (w, h) = (f64::from(inner.width) * 2.0, f64::from(inner.height) * 4.0);
        let [x0, x1] = self.x_bounds;
        let [y0, y1] = self.y_bounds;
        if !(x0..=x1).contains(&x) || !(y0..=y1).contains(&y) {
            return None;
        }
        let gx = ((x - x0) * (w - 1.0) / (x1 - x0)) as u16;
        let gy = ((y1 - y) * (h - 1.0) / (y1 - y0)) as u16;
        Some((inner.x + gx / 2, inner.y + gy / 4))
    }
}

/// The command of one rotor as a letter: F forward, R reversed, o off.
pub fn command_letter(thrust_n: f64) -> char {
    if thrust_n > 0.005 {
        'F'
    } else if thrust_n < -0.005 {
        'R'
    } else {
        'o'
    }
}

impl VehicleView<'_> {
    /// The canvas area inside the block.
    pub fn inner(&self, area: Rect) -> Rect {
        self.block.as_ref().map_or(area, |b| b.inner(area))
    }
}

impl Widget for VehicleView<'_> {
    fn render(self, area: Rect, buf: &mut Buffer) {
        let inner = self.inner(area);
        if let Some(b) = &self.block {
            b.clone().render(area, buf);
        }
        if inner.width < 8 || inner.height < 4 {
            return;
        }
        let proj = Projection::new(self.cage, &self.attitude, self.view_azimuth_deg, inner);
        let c = self.cage.com_body;
        let pt = |p: &Vector3<f64>| proj.point(&c, p);
        let t = self.theme;
        let pivot: &[usize] = self.next.map_or(&[], |n| n.pivot);
        let highlight = Color::Yellow;
        let canvas = Canvas::default()
            .marker(Marker::Braille)
            .x_bounds(proj.x_bounds)
            .y_bounds(proj.y_bounds)
            .paint(|ctx| {
                // Ground.
                ctx.draw(&Line {
                    x1: proj.x_bounds[0],
                    y1: 0.0,
                    x2: proj.x_bounds[1],
                    y2: 0.0,
                    color: Color::Gray,
                });
                ctx.layer();
                // Members: strings thin colour, rods the gap colour.
                for m in &self.cage.members {
                    let (a, b) = (
                        pt(&self.cage.nodes[m.nodes[0]].pos_body),
                        pt(&self.cage.nodes[m.nodes[1]].pos_body),
                    );
                    let color = match m.kind {
                        MemberKind::Rod => t.gap_colour,
                        MemberKind::String => t.string_colour,
                    };
                    ctx.draw(&Line {
                        x1: a.0,
                        y1: a.1,
                        x2: b.0,
                        y2: b.1,
                        color,
                    });
                }
                ctx.layer();
                // The next pivot, drawn last so it wins shared cells.
                if let [a, b] = pivot {
                    let (p, q) = (
                        pt(&self.cage.nodes[*a].pos_body),
                        pt(&self.cage.nodes[*b].pos_body),
                    );
                    ctx.draw(&Line {
                        x1: p.0,
                        y1: p.1,
                        x2: q.0,
                        y2: q.1,
                        color: highlight,
                    });
                }
                for &n in pivot {
                    let p = pt(&self.cage.nodes[n].pos_body);
                    ctx.print(
                        p.0,
                        p.1,
                        Span::styled("P", Style::default().fg(highlight).bold()),
                    );
                }
                // Rotors with their next command.
                for (k, r) in self.rotors.iter().enumerate() {
                    let p = pt(&Vector3::from(r.position_m));
                    let thrust = self.next.and_then(|n| n.thrust_n.get(k).copied());
                    let letter = thrust.map_or('-', command_letter);
                    ctx.print(
                        p.0,
                        p.1,
                        Span::styled(format!("{}{letter}", k + 1), t.accent),
                    );
                }
                // Nose: the body +x end of the cage.
                let reach = self
                    .cage
                    .nodes
                    .iter()
                    .map(|n| (n.pos_body - c).norm())
                    .fold(0.0, f64::max);
                let nose = pt(&(c + Vector3::x() * reach));
                ctx.print(nose.0, nose.1, Span::styled("nose", t.warn));
                // Tipping arrow from the centre of mass.
                if let Some(n) = self.next
                    && n.tip_body != Vector3::zeros()
                {
                    let w = self.attitude * n.tip_body;
                    let (dx, _) = proj.world(&w);
                    let o = pt(&c);
                    let len = 0.8 * reach;
                    let text = if dx.abs() > 0.3 {
                        ctx.draw(&Line {
                            x1: o.0,
                            y1: o.1,
                            x2: o.0 + dx.signum() * len,
                            y2: o.1,
                            color: highlight,
                        });
                        if dx > 0.0 { "tips >>" } else { "<< tips" }
                    } else if w.dot(&Vector3::new(proj.right.y, -proj.right.x, 0.0)) > 0.0 {
                        "tips away from you"
                    } else {
                        "tips toward you"
                    };
                    let x = if dx.abs() > 0.3 {
                        o.0 + dx.signum() * len
                    } else {
                        o.0
                    };
                    ctx.print(x, o.1, Span::styled(text, Style::default().fg(highlight)));
                }
            });
        canvas.render(inner, buf);
        let legend = TextLine::from(vec![Span::styled(
            format!(
                "looking {:.0} deg, F fwd R rev o off, P pivot",
                self.view_azimuth_deg.rem_euclid(360.0)
            ),
            t.dim,
        )]);
        buf.set_line(inner.x, inner.y, &legend, inner.width);
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::tui::theme::ColourDepth;
    use cagehand::profile::Profile;
    use cagehand::rest::resting_attitude;
    use cagehand::righting::RightingModel;
    use cagehand::righting::describe::tip_direction_body;
    use ratatui::Terminal;
    use ratatui::backend::TestBackend;

    fn demo() -> (Cage, RightingModel) {
        let p = Profile::demo().expect("demo profile");
        let c = Cage::from_profile(&p).expect("demo cage");
        let m = RightingModel::new(&p, &c).expect("demo model");
        (c, m)
    }

    /// Render the view of the first step of the plan from `face`.
    fn render(face: usize, az: f64, w: u16, h: u16) -> (Buffer, Projection, Rect, Vec<usize>) {
        let (c, m) = demo();
        let q = resting_attitude(&c, face);
        let plan = m.plan(face, &q);
        let theme = Theme::new(ColourDepth::Basic);
        let step = plan.steps.first();
        let tip = step.map(|s| tip_direction_body(&c, &m.moves[s.move_index].roll));
        let next = step.map(|s| NextStep {
            pivot: &s.pivot,
            thrust_n: &s.commands.thrust_n,
            tip_body: tip.unwrap_or_else(Vector3::zeros),
        });
        let mut term = Terminal::new(TestBackend::new(w, h)).expect("test backend");
        let area = Rect::new(0, 0, w, h);
        let view = VehicleView {
            cage: &c,
            rotors: &m.limits.rotors,
            attitude: q,
            next,
            view_azimuth_deg: az,
            theme: &theme,
            block: Some(Block::bordered().title(" As it lies ")),
        };
        let inner = view.inner(area);
        let proj = Projection::new(&c, &q, az, inner);
        term.draw(|f| f.render_widget(view, f.area()))
            .expect("draws");
        let pivot = step.map(|s| s.pivot.clone()).unwrap_or_default();
        (term.backend().buffer().clone(), proj, inner, pivot)
    }

    fn text(buf: &Buffer) -> String {
        let w = buf.area.width as usize;
        buf.content
            .chunks(w)
            .map(|row| row.iter().map(|c| c.symbol()).collect::<String>())
            .collect::<Vec<_>>()
            .join("\n")
    }

    #[test]
    fn snapshots_at_several_attitudes() {
        // F1 upright, F10 and F19 lying over, seen from two sides.
        for (face, az) in [(0usize, 0.0), (9, 0.0), (18, 90.0)] {
            for (w, h) in [(80u16, 24u16), (120, 36)] {
                let (buf, ..) = render(face, az, w, h);
                insta::assert_snapshot!(
                    format!("vehicle_F{}_az{az}_{w}x{h}", face + 1),
                    text(&buf)
                );
            }
        }
    }

    #[test]
    fn the_pivot_is_drawn_where_its_nodes_project() {
        let (c, _) = demo();
        for face in [9usize, 15, 18] {
            for az in [0.0, 135.0, 270.0] {
                let (buf, proj, inner, pivot) = render(face, az, 80, 24);
                assert!(!pivot.is_empty(), "F{} has a first step", face + 1);
                for n in pivot {
                    let p = proj.point(&c.com_body, &c.nodes[n].pos_body);
                    let Some((x, y)) = proj.cell(inner, p) else {
                        panic!("pivot node off the view");
                    };
                    // The label "P" (or the highlighted edge) within a cell.
                    let near = (x.saturating_sub(1)..=x + 1).any(|cx| {
                        (y.saturating_sub(1)..=y + 1).any(|cy| {
                            buf.cell((cx, cy)).is_some_and(|cell| {
                                cell.symbol() == "P" || cell.fg == Color::Yellow
                            })
                        })
                    });
                    assert!(
                        near,
                        "F{} az {az}: pivot N{} not drawn near ({x}, {y})",
                        face + 1,
                        n + 1
                    );
                }
            }
        }
    }

    #[test]
    fn command_letters() {
        assert_eq!(command_letter(1.0), 'F');
        assert_eq!(command_letter(-0.3), 'R');
        assert_eq!(command_letter(0.0), 'o');
    }
}
