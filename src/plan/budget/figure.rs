//! The budget's figure for a proposal (SVG): every target's σd/d against the
//! hours invested (its inverse curve, log–log, with its goal), and the
//! programme's goals met against total hours (the allocation's steps) with
//! the hours asked. Written by hand as plain SVG 1.1 (no fonts or scripts
//! beyond a generic family), so a document processor or a browser shows it
//! as it is; colours are the Okabe–Ito colour-blind-safe set and every kind
//! has its own marker shape too.

use super::{Budget, BudgetRow};
use crate::io::targets::Kind;
use crate::output::num;
use std::fmt::Write;

/// Width of the figure, px.
pub const WIDTH: f64 = 900.0;
/// Height of the figure, px.
pub const HEIGHT: f64 = 760.0;

const LEFT: f64 = 80.0;
const RIGHT: f64 = 190.0;
const TOP1: f64 = 60.0;
const H1: f64 = 360.0;
const TOP2: f64 = 520.0;
const H2: f64 = 180.0;

fn colour(k: Kind) -> &'static str {
    match k {
        Kind::Parallax => "#0072B2",
        Kind::Pulsator => "#D55E00",
        Kind::Transient => "#009E73",
        _ => "#555555",
    }
}

/// A marker of the kind at (x, y): circle, square or triangle (a field's
/// triangle is grey, a transient's green).
fn marker(k: Kind, x: f64, y: f64, c: &str) -> String {
    match k {
        Kind::Parallax => format!(r#"<circle cx="{x:.1}" cy="{y:.1}" r="3.2" fill="{c}"/>"#),
        Kind::Pulsator => format!(
            r#"<rect x="{:.1}" y="{:.1}" width="6" height="6" fill="{c}"/>"#,
            x - 3.0,
            y - 3.0
        ),
        _ => format!(
            r#"<polygon points="{:.1},{:.1} {:.1},{:.1} {:.1},{:.1}" fill="{c}"/>"#,
            x,
            y - 4.0,
            x - 3.6,
            y + 2.6,
            x + 3.6,
            y + 2.6
        ),
    }
}

fn esc(s: &str) -> String {
    let mut o = String::with_capacity(s.len());
    for c in s.chars() {
        match c {
            '&' => o.push_str("&amp;"),
            '<' => o.push_str("&lt;"),
            '>' => o.push_str("&gt;"),
            '"' => o.push_str("&quot;"),
            c if c.is_control() => o.push(' '),
            c => o.push(c),
        }
    }
    o
}

/// Decades from 10^lo to 10^hi with 1, 2, 5 ticks inside.
fn log_ticks(lo: f64, hi: f64) -> Vec<f64> {
    let mut t = Vec::new();
    let mut e = lo.floor() as i32;
    while (e as f64) <= hi.ceil() {
        for m in [1.0, 2.0, 5.0] {
            let v = m * 10f64.powi(e);
            let l = v.log10();
            if l >= lo - 1e-9 && l <= hi + 1e-9 {
                t.push(v);
            }
        }
        e += 1;
    }
    t
}

fn label(v: f64) -> String {
    if v >= 1.0 {
        num(v, 0)
    } else if v >= 0.1 {
        num(v, 1)
    } else {
        num(v, 2)
    }
}

fn curve_points(r: &BudgetRow) -> Vec<(f64, f64)> {
    r.curve
        .iter()
        .filter(|p| p.hours > 0.0 && p.distance_precision_pct.is_finite())
        .map(|p| (p.hours, p.distance_precision_pct))
        .collect()
}

/// The figure as SVG text. The curves come from the budget's rows (computed
/// with curves); the lower panel from its allocation's steps when hours
/// were asked, else from the goals the budget can reach.
pub fn svg(b: &Budget) -> String {
    let mut s = String::new();
    let _ = write!(
        s,
        r#"<?xml version="1.0" encoding="UTF-8"?>
<svg xmlns="http://www.w3.org/2000/svg" version="1.1" width="{WIDTH}" height="{HEIGHT}" viewBox="0 0 {WIDTH} {HEIGHT}" font-family="sans-serif" font-size="12">
<title>Distance precision against telescope hours, {} with {}, {} to {}</title>
<rect x="0" y="0" width="{WIDTH}" height="{HEIGHT}" fill="white"/>
"#,
        esc(&b.site),
        esc(&b.instrument),
        b.from,
        b.to
    );
    let pw = WIDTH - LEFT - RIGHT;
    // Upper panel: σd/d against hours, log–log.
    let pts: Vec<(f64, f64)> = b.rows.iter().flat_map(curve_points).collect();
    let goals: Vec<f64> = b
        .rows
        .iter()
        .map(|r| r.goal_pct)
        .filter(|g| g.is_finite() && *g > 0.0)
        .collect();
    let hmin = pts.iter().map(|p| p.0).fold(f64::INFINITY, f64::min);
    let hmax = pts.iter().map(|p| p.0).fold(0.0, f64::max);
    let ymin = pts
        .iter()
        .map(|p| p.1)
        .chain(goals.iter().copied())
        .fold(f64::INFINITY, f64::min);
    let ymax = pts
        .iter()
        .map(|p| p.1)
        .chain(goals.iter().copied())
        .fold(0.0, f64::max);
    let (xl0, xl1) = if pts.is_empty() {
        (-1.0, 1.0)
    } else {
        nice_log_span(hmin, hmax)
    };
    let (yl0, yl1) = if pts.is_empty() {
        (0.0, 2.0)
    } else {
        nice_log_span(ymin, ymax)
    };
    let x = |h: f64| LEFT + (h.log10() - xl0) / (xl1 - xl0) * pw;
    let y = |p: f64| TOP1 + H1 - (p.log10() - yl0) / (yl1 - yl0) * H1;
    let _ = writeln!(
        s,
        r##"<text x="{LEFT}" y="28" font-size="15" font-weight="bold">Distance precision against telescope hours (clear weather, with overheads)</text>
<text x="{LEFT}" y="46" fill="#444">{} · {} · {} to {} · one line per target, its goal dashed</text>"##,
        esc(&b.site),
        esc(&b.instrument),
        b.from,
        b.to
    );
    let _ = writeln!(
        s,
        r##"<rect x="{LEFT}" y="{TOP1}" width="{pw}" height="{H1}" fill="none" stroke="#000"/>"##
    );
    for t in log_ticks(xl0, xl1) {
        let xx = x(t);
        let _ = writeln!(
            s,
            r##"<line x1="{xx:.1}" y1="{TOP1}" x2="{xx:.1}" y2="{:.1}" stroke="#ddd"/><text x="{xx:.1}" y="{:.1}" text-anchor="middle">{}</text>"##,
            TOP1 + H1,
            TOP1 + H1 + 16.0,
            label(t)
        );
    }
    for t in log_ticks(yl0, yl1) {
        let yy = y(t);
        let _ = writeln!(
            s,
            r##"<line x1="{LEFT}" y1="{yy:.1}" x2="{:.1}" y2="{yy:.1}" stroke="#ddd"/><text x="{:.1}" y="{:.1}" text-anchor="end">{}</text>"##,
            LEFT + pw,
            LEFT - 6.0,
            yy + 4.0,
            label(t)
        );
    }
    let _ = writeln!(
        s,
        r#"<text x="{:.1}" y="{:.1}" text-anchor="middle">telescope hours</text>
<text x="22" y="{:.1}" text-anchor="middle" transform="rotate(-90 22 {:.1})">σd/d (%)</text>"#,
        LEFT + pw / 2.0,
        TOP1 + H1 + 34.0,
        TOP1 + H1 / 2.0,
        TOP1 + H1 / 2.0
    );
    let mut labels: Vec<(f64, f64, f64)> = Vec::new();
    for r in &b.rows {
        let c = colour(r.kind);
        let p = curve_points(r);
        if p.is_empty() {
            continue;
        }
        let poly: Vec<String> = p
            .iter()
            .map(|(h, v)| format!("{:.1},{:.1}", x(*h), y(*v)))
            .collect();
        let _ = writeln!(
            s,
            r#"<g class="curve" data-target="{}"><polyline points="{}" fill="none" stroke="{c}" stroke-width="1.6"/>"#,
            esc(&r.target),
            poly.join(" ")
        );
        for (h, v) in &p {
            s.push_str(&marker(r.kind, x(*h), y(*v), c));
        }
        if r.goal_pct.is_finite() && r.goal_pct > 0.0 {
            let (x0, x1) = (x(p[0].0), x(p[p.len() - 1].0));
            let gy = y(r.goal_pct);
            let _ = write!(
                s,
                r#"<line class="goal" x1="{x0:.1}" y1="{gy:.1}" x2="{x1:.1}" y2="{gy:.1}" stroke="{c}" stroke-dasharray="4 3" stroke-width="0.8"/>"#
            );
        }
        // The name at the curve's end, moved up or down off names already placed.
        let (lh, lv) = p[p.len() - 1];
        let (lx, mut ly) = (x(lh) + 5.0, y(lv) + 3.0);
        let w = 5.5 * r.target.chars().count() as f64;
        let clash = |ly: f64, placed: &[(f64, f64, f64)]| {
            placed
                .iter()
                .any(|(px, py, pw)| (ly - py).abs() < 9.5 && lx < px + pw && *px < lx + w)
        };
        for k in 1u32..12 {
            if !clash(ly, &labels) {
                break;
            }
            let dy = 10.0 * k.div_ceil(2) as f64;
            ly = y(lv) + 3.0 + if k % 2 == 1 { dy } else { -dy };
        }
        labels.push((lx, ly, w));
        let _ = writeln!(
            s,
            r#"<text x="{lx:.1}" y="{ly:.1}" font-size="9" fill="{c}">{}</text></g>"#,
            esc(&r.target)
        );
    }
    // Legend by kind.
    let mut ly = TOP1 + 10.0;
    for (k, name) in [
        (Kind::Parallax, "parallax"),
        (Kind::Pulsator, "pulsator"),
        (Kind::Transient, "transient"),
        (Kind::Field, "field"),
    ] {
        if b.rows.iter().any(|r| r.kind == k) {
            let lx = WIDTH - RIGHT + 70.0;
            s.push_str(&marker(k, lx, ly, colour(k)));
            let _ = writeln!(
                s,
                r#"<text x="{:.1}" y="{:.1}">{name}</text>"#,
                lx + 10.0,
                ly + 4.0
            );
            ly += 18.0;
        }
    }
    // Lower panel: goals met against total hours (expected weather).
    let (steps, asked): (Vec<(f64, f64, usize)>, Option<f64>) = match &b.allocation {
        Some(a) => (
            a.steps
                .iter()
                .map(|s| (s.hours, s.weight, s.goals_met))
                .collect(),
            Some(a.hours_asked),
        ),
        // Without hours asked, the goals the budget can reach (its curve).
        None => (
            b.goals_met_curve
                .iter()
                .map(|s| (s.hours, s.weight, s.goals_met))
                .collect(),
            None,
        ),
    };
    let _ = writeln!(
        s,
        r#"<text x="{LEFT}" y="{:.1}" font-size="15" font-weight="bold">Goals met against total hours (expected weather, calibrations included)</text>"#,
        TOP2 - 22.0
    );
    let _ = writeln!(
        s,
        r##"<rect x="{LEFT}" y="{TOP2}" width="{pw}" height="{H2}" fill="none" stroke="#000"/>"##
    );
    let xmax2 = steps.iter().map(|s| s.0).chain(asked).fold(1.0, f64::max) * 1.08;
    let wmax = steps.iter().map(|s| s.1).fold(1.0, f64::max);
    let x2 = |h: f64| LEFT + h / xmax2 * pw;
    let y2 = |w: f64| TOP2 + H2 - w / wmax * H2;
    // Whole hours on the axis (its labels have no decimals).
    let step = nice_step(xmax2).max(1.0);
    let mut t = 0.0;
    while t <= xmax2 + 1e-9 {
        let xx = x2(t);
        let _ = writeln!(
            s,
            r##"<line x1="{xx:.1}" y1="{TOP2}" x2="{xx:.1}" y2="{:.1}" stroke="#ddd"/><text x="{xx:.1}" y="{:.1}" text-anchor="middle">{}</text>"##,
            TOP2 + H2,
            TOP2 + H2 + 16.0,
            num(t, 0)
        );
        t += step;
    }
    let wstep = nice_step(wmax).max(1.0);
    let mut w = 0.0;
    while w <= wmax + 1e-9 {
        let yy = y2(w);
        let _ = writeln!(
            s,
            r#"<text x="{:.1}" y="{:.1}" text-anchor="end">{}</text>"#,
            LEFT - 6.0,
            yy + 4.0,
            num(w, 0)
        );
        w += wstep;
    }
    let _ = writeln!(
        s,
        r#"<text x="{:.1}" y="{:.1}" text-anchor="middle">total hours (expected weather)</text>
<text x="22" y="{:.1}" text-anchor="middle" transform="rotate(-90 22 {:.1})">goals met (weighted)</text>"#,
        LEFT + pw / 2.0,
        TOP2 + H2 + 34.0,
        TOP2 + H2 / 2.0,
        TOP2 + H2 / 2.0
    );
    if !steps.is_empty() {
        let mut pts = vec![format!("{:.1},{:.1}", x2(0.0), y2(0.0))];
        let mut last_w = 0.0;
        for (h, w, _) in &steps {
            pts.push(format!("{:.1},{:.1}", x2(*h), y2(last_w)));
            pts.push(format!("{:.1},{:.1}", x2(*h), y2(*w)));
            last_w = *w;
        }
        pts.push(format!("{:.1},{:.1}", x2(xmax2), y2(last_w)));
        let _ = writeln!(
            s,
            r##"<polyline class="goals-met" points="{}" fill="none" stroke="#000" stroke-width="1.8"/>"##,
            pts.join(" ")
        );
        for (h, w, n) in &steps {
            let _ = writeln!(
                s,
                r##"<circle class="step" data-hours="{h}" data-weight="{w}" data-goals="{n}" cx="{:.1}" cy="{:.1}" r="2.5" fill="#000"/>"##,
                x2(*h),
                y2(*w)
            );
        }
    } else {
        let _ = writeln!(
            s,
            r##"<text x="{:.1}" y="{:.1}" text-anchor="middle" fill="#444">no goal within reach in this range</text>"##,
            LEFT + pw / 2.0,
            TOP2 + H2 / 2.0
        );
    }
    if let Some(h) = asked {
        let xx = x2(h);
        // The label on the side of the line that has room for it.
        let (tx, anchor) = if xx > LEFT + pw - 100.0 {
            (xx - 4.0, "end")
        } else {
            (xx + 4.0, "start")
        };
        let _ = writeln!(
            s,
            r##"<line class="asked" x1="{xx:.1}" y1="{TOP2}" x2="{xx:.1}" y2="{:.1}" stroke="#CC79A7" stroke-width="2" stroke-dasharray="6 3"/><text x="{tx:.1}" y="{:.1}" text-anchor="{anchor}" fill="#CC79A7">{} h asked</text>"##,
            TOP2 + H2,
            TOP2 + H2 - 8.0,
            num(h, 1)
        );
    }
    s.push_str("</svg>\n");
    s
}

/// A span of log10 values around [lo, hi] whose ends are 1, 2 or 5 times a
/// power of ten (at least a factor 2 wide).
fn nice_log_span(lo: f64, hi: f64) -> (f64, f64) {
    let down = |v: f64| {
        let e = v.log10().floor();
        let m = v / 10f64.powf(e);
        let m = if m >= 5.0 {
            5.0
        } else if m >= 2.0 {
            2.0
        } else {
            1.0
        };
        (m * 10f64.powf(e)).log10()
    };
    let up = |v: f64| {
        let e = v.log10().floor();
        let m = v / 10f64.powf(e);
        let m = if m <= 1.0 + 1e-12 {
            1.0
        } else if m <= 2.0 {
            2.0
        } else if m <= 5.0 {
            5.0
        } else {
            10.0
        };
        (m * 10f64.powf(e)).log10()
    };
    let (a, b) = (down(lo * 0.95), up(hi * 1.05));
    (a, b.max(a + 2f64.log10()))
}

/// A round step for about six ticks over 0..max.
fn nice_step(max: f64) -> f64 {
    let raw = (max / 6.0).max(1e-9);
    let p = 10f64.powf(raw.log10().floor());
    for m in [1.0, 2.0, 5.0, 10.0] {
        if m * p >= raw {
            return m * p;
        }
    }
    10.0 * p
}

/// Scale of the PNG against the SVG's pixels: 2, so the raster is
/// 1800 × 1520 px, sharp at a page's width in print.
pub const PNG_SCALE: f32 = 2.0;

/// The figure as PNG: the SVG of [`svg`] rendered by the `resvg` crate, on
/// white, at [`PNG_SCALE`]. Its text takes the system's fonts (the generic
/// sans-serif family, else the first family installed); on a system with no
/// font at all the curves, axes and markers are drawn and the labels are not.
pub fn png(b: &Budget) -> crate::error::Result<Vec<u8>> {
    png_of_svg(&svg(b), PNG_SCALE)
}

/// An SVG document rendered to PNG at `scale` (see [`png`]).
pub fn png_of_svg(text: &str, scale: f32) -> crate::error::Result<Vec<u8>> {
    use resvg::{tiny_skia, usvg};
    let bad = |why: String| crate::error::RungError::invalid("figure (PNG)", why);
    let mut opt = usvg::Options::default();
    {
        let db = opt.fontdb_mut();
        db.load_system_fonts();
        // The generic family the SVG names must be a font that is there.
        let generic = [usvg::fontdb::Family::SansSerif];
        let query = usvg::fontdb::Query {
            families: &generic,
            ..Default::default()
        };
        if db.query(&query).is_none() {
            // A sans family when there is one, else any.
            let family = |f: &usvg::fontdb::FaceInfo| f.families.first().map(|(n, _)| n.clone());
            let sans = |n: &String| n.contains("Sans") && !n.contains("Mono");
            let first = db
                .faces()
                .filter_map(family)
                .find(sans)
                .or_else(|| db.faces().find_map(family));
            if let Some(name) = first {
                db.set_sans_serif_family(name);
            }
        }
    }
    let tree = usvg::Tree::from_str(text, &opt).map_err(|e| bad(e.to_string()))?;
    let size = tree.size();
    let w = (size.width() * scale).ceil() as u32;
    let h = (size.height() * scale).ceil() as u32;
    let mut pixmap = tiny_skia::Pixmap::new(w.max(1), h.max(1))
        .ok_or_else(|| bad(format!("no raster of {w} × {h} px")))?;
    pixmap.fill(tiny_skia::Color::WHITE);
    resvg::render(
        &tree,
        tiny_skia::Transform::from_scale(scale, scale),
        &mut pixmap.as_mut(),
    );
    pixmap.encode_png().map_err(|e| bad(e.to_string()))
}
