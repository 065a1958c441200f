//! Each score across the rungs: one panel per score (MAE, NDE, F1,
//! accuracy), the rungs along the bottom, one line per solver, the families
//! parted by a grey rule. SVG written by hand in the project's palette.

use super::Ladder;
use solver_check::metrics::Scores;
use solver_check::plot::palette::{FRAME, GRID, INK, PALETTE, PANEL_FILL};

type Pick = fn(&Scores) -> Option<f64>;

const PANELS: [(&str, Pick); 4] = [
    ("MAE (W)", |s| Some(s.mae_w)),
    ("NDE", |s| s.nde),
    ("F1", |s| Some(s.f1)),
    ("accuracy", |s| s.accuracy),
];

const W: f64 = 1100.0;
const PANEL_H: f64 = 170.0;
const LEFT: f64 = 70.0;
const RIGHT: f64 = 20.0;
const TOP: f64 = 40.0;
const BOTTOM: f64 = 170.0;

fn esc(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
}

/// Values of one score per solver and rung (None where it failed).
fn series(l: &Ladder, pick: Pick) -> Vec<Vec<Option<f64>>> {
    (0..l.solvers.len())
        .map(|k| {
            l.rungs
                .iter()
                .map(|r| match r.scores.get(k).map(|s| &s.1) {
                    Some(Ok(rep)) => pick(&rep.overall).filter(|v| v.is_finite()),
                    _ => None,
                })
                .collect()
        })
        .collect()
}

fn x_of(i: usize, n: usize) -> f64 {
    let span = W - LEFT - RIGHT;
    LEFT + span * (i as f64 + 0.5) / n.max(1) as f64
}

fn panel(l: &Ladder, p: usize, o: &mut String) {
    let (title, pick) = PANELS[p];
    let top = TOP + p as f64 * (PANEL_H + 20.0);
    let data = series(l, pick);
    let vals: Vec<f64> = data.iter().flatten().flatten().copied().collect();
    let hi = vals.iter().copied().fold(0.0f64, f64::max);
    let hi = if hi > 0.0 { hi * 1.1 } else { 1.0 };
    let y = |v: f64| top + PANEL_H - PANEL_H * v / hi;
    *o += &format!(
        r#"<rect x="{LEFT}" y="{top}" width="{}" height="{PANEL_H}" fill="{PANEL_FILL}" stroke="{FRAME}"/>"#,
        W - LEFT - RIGHT
    );
    for t in 0..=4 {
        let v = hi * t as f64 / 4.0;
        let (yv, label) = (
            y(v),
            if hi >= 10.0 {
                format!("{v:.0}")
            } else {
                format!("{v:.2}")
            },
        );
        *o += &format!(
            r#"<line x1="{LEFT}" x2="{}" y1="{yv:.1}" y2="{yv:.1}" stroke="{GRID}"/><text x="{}" y="{:.1}" font-size="11" text-anchor="end" fill="{INK}">{label}</text>"#,
            W - RIGHT,
            LEFT - 6.0,
            yv + 4.0
        );
    }
    *o += &format!(
        r#"<text x="{LEFT}" y="{:.1}" font-size="13" fill="{INK}">{}</text>"#,
        top - 6.0,
        esc(title)
    );
    let n = l.rungs.len();
    for k in 1..n {
        if l.rungs[k].family != l.rungs[k - 1].family {
            let x = (x_of(k, n) + x_of(k - 1, n)) / 2.0;
            *o += &format!(
                r#"<line x1="{x:.1}" x2="{x:.1}" y1="{top}" y2="{}" stroke="{FRAME}" stroke-dasharray="3 3"/>"#,
                top + PANEL_H
            );
        }
    }
    for (k, s) in data.iter().enumerate() {
        let colour = PALETTE[k % PALETTE.len()];
        let pts: Vec<String> = s
            .iter()
            .enumerate()
            .filter_map(|(i, v)| v.map(|v| format!("{:.1},{:.1}", x_of(i, n), y(v))))
            .collect();
        *o += &format!(
            r#"<polyline points="{}" fill="none" stroke="{colour}" stroke-width="2"/>"#,
            pts.join(" ")
        );
        for p in &pts {
            let (px, py) = p.split_once(',').unwrap_or(("0", "0"));
            *o += &format!(r#"<circle cx="{px}" cy="{py}" r="3" fill="{colour}"/>"#);
        }
    }
}

/// The picture as SVG text.
pub fn plot_svg(l: &Ladder) -> String {
    let n = l.rungs.len();
    let h = TOP + PANELS.len() as f64 * (PANEL_H + 20.0) + BOTTOM;
    let mut o = format!(
        r#"<svg xmlns="http://www.w3.org/2000/svg" width="{W}" height="{h}" viewBox="0 0 {W} {h}" font-family="sans-serif"><rect width="{W}" height="{h}" fill="white"/>"#
    );
    o += &format!(
        r#"<text x="{LEFT}" y="20" font-size="15" fill="{INK}">Scores across the layout ladder of {}</text>"#,
        esc(&l.home)
    );
    for p in 0..PANELS.len() {
        panel(l, p, &mut o);
    }
    let base = TOP + PANELS.len() as f64 * (PANEL_H + 20.0) - 10.0;
    for (i, r) in l.rungs.iter().enumerate() {
        let x = x_of(i, n);
        o += &format!(
            r#"<text x="{x:.1}" y="{base:.1}" font-size="11" fill="{INK}" text-anchor="end" transform="rotate(-50 {x:.1} {base:.1})">{}</text>"#,
            esc(&r.name)
        );
    }
    for (k, s) in l.solvers.iter().enumerate() {
        let y = h - 40.0 + 14.0 * k as f64 - 14.0 * (l.solvers.len() as f64 - 1.0);
        o += &format!(
            r#"<rect x="{LEFT}" y="{:.1}" width="14" height="4" fill="{}"/><text x="{}" y="{:.1}" font-size="12" fill="{INK}">{}</text>"#,
            y - 4.0,
            PALETTE[k % PALETTE.len()],
            LEFT + 20.0,
            y,
            esc(s)
        );
    }
    o + "</svg>\n"
}
