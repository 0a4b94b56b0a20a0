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
use ratatui::style::{Color, Modifier, Style};
use ratatui::symbols::Marker;
use ratatui::text::{Line, Span};
use ratatui::widgets::canvas::{Canvas, Context, Line as CanvasLine, Points};
use ratatui::widgets::{Block, Borders, Widget};

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
    /// Faces shaded and labelled by a figure (the margin map); a face
    /// listed here shows its fill's label instead of its id.
    pub fills: Vec<FaceFill>,
}

/// One face of a shaded map: how dense its dots are and what it says.
#[derive(Debug, Clone, PartialEq)]
pub struct FaceFill {
    /// Face index in the cage.
    pub face: usize,
    /// Shade: 0 none, 1 light, 2 medium, 3 dense.
    pub density: u8,
    /// Label at the face's centre (carries the figure, so the map reads
    /// without colour or shade).
    pub label: String,
    /// Style of the label and colour of the dots.
    pub style: Style,
    /// Label printed after all others, so no neighbour's label covers it.
    pub on_top: bool,
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
            fills: Vec::new(),
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

impl<'a> NetView<'a> {
    /// The net of the watched vehicle's cage in the screens' theme, with
    /// `marks`, in a bordered frame titled `title` (every screen that
    /// draws the net draws it this way).
    pub fn framed(shared: &'a Shared, marks: &'a NetMarks, title: impl Into<Line<'a>>) -> Self {
        NetView {
            cage: &shared.cage,
            net: &shared.net,
            marks,
            theme: &shared.theme,
            block: Block::default().borders(Borders::ALL).title(title),
        }
    }
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

/// Dots inside a net face, on the canvas's own dot grid (so neighbouring
/// faces share one pattern), kept off the outline: every dot for density
/// 3 on alternate rows, every other dot for 2, every other dot on every
/// fourth row for 1.
fn fill_dots(nf: &NetFace, density: u8, xb: [f64; 2], yb: [f64; 2], area: Rect) -> Vec<(f64, f64)> {
    let (sx, sy) = match density {
        0 => return Vec::new(),
        1 => (2, 4),
        2 => (2, 2),
        _ => (1, 2),
    };
    // Braille: 2 x 4 dots per cell.
    let px = (xb[1] - xb[0]) / (f64::from(area.width.max(1)) * 2.0);
    let py = (yb[1] - yb[0]) / (f64::from(area.height.max(1)) * 4.0);
    if !(px > 0.0 && py > 0.0) {
        return Vec::new();
    }
    // The face shrunk towards its centre, so the dots stay clear of the
    // outline.
    let c = Net::centroid(nf);
    let inset: Vec<[f64; 2]> = nf
        .points
        .iter()
        .map(|p| [c[0] + 0.8 * (p[0] - c[0]), c[1] + 0.8 * (p[1] - c[1])])
        .collect();
    let (mut x0, mut x1, mut y0, mut y1) = (f64::MAX, f64::MIN, f64::MAX, f64::MIN);
    for p in &inset {
        x0 = x0.min(p[0]);
        x1 = x1.max(p[0]);
        y0 = y0.min(p[1]);
        y1 = y1.max(p[1]);
    }
    let inside = |x: f64, y: f64| {
        let k = inset.len();
        let mut sign = 0.0_f64;
        for i in 0..k {
            let (a, b) = (inset[i], inset[(i + 1) % k]);
            let cross = (b[0] - a[0]) * (y - a[1]) - (b[1] - a[1]) * (x - a[0]);
            if cross * sign < 0.0 {
                return false;
            }
            if cross != 0.0 {
                sign = cross;
            }
        }
        true
    };
    // Grid indices from the canvas origin, so patterns line up.
    let (i0, i1) = (
        ((x0 - xb[0]) / px).floor() as i64,
        ((x1 - xb[0]) / px).ceil() as i64,
    );
    let (j0, j1) = (
        ((y0 - yb[0]) / py).floor() as i64,
        ((y1 - yb[0]) / py).ceil() as i64,
    );
    let mut dots = Vec::new();
    for j in j0.max(0)..=j1 {
        if j % sy != 0 {
            continue;
        }
        for i in i0.max(0)..=i1 {
            if i % sx != 0 {
                continue;
            }
            let (x, y) = (xb[0] + (i as f64 + 0.5) * px, yb[0] + (j as f64 + 0.5) * py);
            if inside(x, y) {
                dots.push((x, y));
            }
        }
    }
    dots
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
        // The fill of each face, by face index.
        let mut fill_of: Vec<Option<&FaceFill>> = vec![None; cage.faces.len()];
        for f in &marks.fills {
            if let Some(slot) = fill_of.get_mut(f.face) {
                *slot = Some(f);
            }
        }
        Canvas::default()
            .block(block)
            .marker(Marker::Braille)
            .x_bounds(xb)
            .y_bounds(yb)
            .paint(|ctx| {
                for fill in &marks.fills {
                    if let Some(nf) = net.face(fill.face) {
                        let coords = fill_dots(nf, fill.density, xb, yb, inner);
                        ctx.draw(&Points {
                            coords: &coords,
                            color: fill.style.fg.unwrap_or(Color::Reset),
                        });
                    }
                }
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
                // Labels on top last (a later label wins a shared cell).
                let on_top = |nf: &&NetFace| {
                    fill_of
                        .get(nf.face)
                        .copied()
                        .flatten()
                        .is_some_and(|f| f.on_top)
                };
                let below = net.faces.iter().filter(|nf| !on_top(nf));
                for nf in below.chain(net.faces.iter().filter(on_top)) {
                    let c = Net::centroid(nf);
                    let id = &cage.faces[nf.face].id;
                    let resting = marks.resting == Some(nf.face);
                    let nearest = marks.nearest == Some(nf.face);
                    let takeoff = marks.takeoff.contains(&nf.face);
                    let caret = if takeoff { "^" } else { "" };
                    let fill = fill_of.get(nf.face).copied().flatten();
                    let text = if let Some(f) = fill {
                        f.label.clone()
                    } else if resting {
                        format!("[{id}{caret}]")
                    } else if nearest {
                        format!("({id}{caret})")
                    } else {
                        format!("{id}{caret}")
                    };
                    let style = if let Some(f) = fill {
                        f.style
                    } else if resting {
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
