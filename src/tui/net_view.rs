//! The unfolded net drawn on a braille canvas: strings solid, rod gaps
//! dashed, face ids at the face centres, the resting face framed in
//! brackets and outlined last, take-off faces marked with a caret, and a
//! planned path as numbered hinges. Layers go from least to most important,
//! because one braille cell carries one colour.

use crate::tui::model::{LiveState, Shared};
use crate::tui::theme::Theme;
use cagehand::cage::{Cage, MemberKind};
use cagehand::net::{Net, NetFace};
use ratatui::layout::Rect;
use ratatui::style::{Modifier, Style};
use ratatui::symbols::Marker;
use ratatui::text::{Line, Span};
use ratatui::widgets::canvas::{Canvas, Context, Line as CanvasLine};
use ratatui::widgets::{Block, Widget};

/// What to mark on the net.
#[derive(Debug, Clone, Default)]
pub struct NetMarks {
    /// The face the vehicle rests on (only while resting): `[F5]`.
    pub resting: Option<usize>,
    /// The nearest face while propped or moving (not resting): `(F5)`.
    pub nearest: Option<usize>,
    /// Take-off faces.
    pub takeoff: Vec<usize>,
    /// Planned path as the sequence of faces, start first.
    pub path: Vec<usize>,
}

impl NetMarks {
    /// The marks every net shows from the live picture: the resting face
    /// framed only while resting, the nearest face in parentheses while
    /// propped or moving, nothing while airborne or stale; take-off faces.
    pub fn live(shared: &Shared) -> NetMarks {
        let live = &shared.live;
        NetMarks {
            resting: live.resting_face(),
            nearest: match live.state {
                LiveState::Propped | LiveState::Moving => live.face,
                _ => None,
            },
            takeoff: shared.takeoff.clone(),
            path: Vec::new(),
        }
    }
}

/// The net widget.
pub struct NetView<'a> {
    /// Cage the net belongs to.
    pub cage: &'a Cage,
    /// The unfolded net.
    pub net: &'a Net,
    /// Marks.
    pub marks: &'a NetMarks,
    /// Styles.
    pub theme: &'a Theme,
    /// Frame around the canvas.
    pub block: Block<'a>,
}

/// Bounds padded so the net keeps its shape: a terminal cell is about twice
/// as tall as it is wide.
fn fitted_bounds(net: &Net, area: Rect) -> ([f64; 2], [f64; 2]) {
    let (x0, x1, y0, y1) = net.bounds();
    if !x0.is_finite() {
        return ([0.0, 1.0], [0.0, 1.0]);
    }
    let pad = 0.04 * (x1 - x0).max(y1 - y0);
    let (mut x0, mut x1, mut y0, mut y1) = (x0 - pad, x1 + pad, y0 - pad, y1 + pad);
    let (w, h) = (
        f64::from(area.width.max(1)),
        f64::from(area.height.max(1)) * 2.0,
    );
    let (dx, dy) = (x1 - x0, y1 - y0);
    if dx / w > dy / h {
        let want = dx / w * h;
        y0 -= (want - dy) / 2.0;
        y1 += (want - dy) / 2.0;
    } else {
        let want = dy / h * w;
        x0 -= (want - dx) / 2.0;
        x1 += (want - dx) / 2.0;
    }
    ([x0, x1], [y0, y1])
}

fn edge_kind(cage: &Cage, nf: &NetFace, i: usize) -> Option<MemberKind> {
    cage.faces[nf.face].edges[i]
        .member
        .map(|m| cage.members[m].kind)
}

fn draw_outline(
    ctx: &mut Context,
    cage: &Cage,
    nf: &NetFace,
    theme: &Theme,
    colour_override: Option<ratatui::style::Color>,
) {
    let k = nf.points.len();
    for i in 0..k {
        let (a, b) = (nf.points[i], nf.points[(i + 1) % k]);
        match (edge_kind(cage, nf, i), colour_override) {
            (_, Some(c)) => ctx.draw(&CanvasLine::new(a[0], a[1], b[0], b[1], c)),
            (Some(MemberKind::String), None) | (Some(MemberKind::Rod), None) => {
                ctx.draw(&CanvasLine::new(
                    a[0],
                    a[1],
                    b[0],
                    b[1],
                    theme.string_colour,
                ));
            }
            (None, None) => {
                // Rod gap: no member along this edge, drawn dashed.
                let dashes = 7;
                for d in (0..dashes).step_by(2) {
                    let t0 = d as f64 / dashes as f64;
                    let t1 = (d + 1) as f64 / dashes as f64;
                    let p = |t: f64| [a[0] + (b[0] - a[0]) * t, a[1] + (b[1] - a[1]) * t];
                    let (p0, p1) = (p(t0), p(t1));
                    ctx.draw(&CanvasLine::new(
                        p0[0],
                        p0[1],
                        p1[0],
                        p1[1],
                        theme.gap_colour,
                    ));
                }
            }
        }
    }
}

impl Widget for NetView<'_> {
    fn render(self, area: Rect, buf: &mut ratatui::buffer::Buffer) {
        let inner = self.block.inner(area);
        let (xb, yb) = fitted_bounds(self.net, inner);
        let NetView {
            cage,
            net,
            marks,
            theme,
            block,
        } = self;
        Canvas::default()
            .block(block)
            .marker(Marker::Braille)
            .x_bounds(xb)
            .y_bounds(yb)
            .paint(|ctx| {
                for nf in &net.faces {
                    draw_outline(ctx, cage, nf, theme, None);
                }
                ctx.layer();
                // The planned path: hinge midpoints numbered in step order.
                for (k, w) in marks.path.windows(2).enumerate() {
                    if let (Some(a), Some(b)) = (net.face(w[0]), net.face(w[1])) {
                        let (ca, cb) = (Net::centroid(a), Net::centroid(b));
                        ctx.draw(&CanvasLine::new(
                            ca[0],
                            ca[1],
                            cb[0],
                            cb[1],
                            theme.path_colour,
                        ));
                        let mid = [(ca[0] + cb[0]) / 2.0, (ca[1] + cb[1]) / 2.0];
                        ctx.print(
                            mid[0],
                            mid[1],
                            Span::styled(
                                format!("{}", k + 1),
                                Style::default()
                                    .fg(theme.path_colour)
                                    .add_modifier(Modifier::BOLD),
                            ),
                        );
                    }
                }
                ctx.layer();
                if let Some(nf) = marks.resting.and_then(|r| net.face(r)) {
                    draw_outline(ctx, cage, nf, theme, Some(theme.rest_colour));
                }
                ctx.layer();
                for nf in &net.faces {
                    let c = Net::centroid(nf);
                    let id = &cage.faces[nf.face].id;
                    let resting = marks.resting == Some(nf.face);
                    let nearest = marks.nearest == Some(nf.face);
                    let takeoff = marks.takeoff.contains(&nf.face);
                    let caret = if takeoff { "^" } else { "" };
                    let text = if resting {
                        format!("[{id}{caret}]")
                    } else if nearest {
                        format!("({id}{caret})")
                    } else {
                        format!("{id}{caret}")
                    };
                    let style = if resting {
                        Style::default()
                            .fg(theme.rest_colour)
                            .add_modifier(Modifier::BOLD | Modifier::REVERSED)
                    } else if nearest {
                        theme.warn.add_modifier(Modifier::UNDERLINED)
                    } else if takeoff {
                        theme.good
                    } else {
                        theme.text
                    };
                    // Centre the label on the face.
                    let dx = (xb[1] - xb[0]) / f64::from(inner.width.max(1));
                    ctx.print(
                        c[0] - dx * text.len() as f64 / 2.0,
                        c[1],
                        Line::from(Span::styled(text, style)),
                    );
                }
            })
            .render(area, buf);
    }
}
