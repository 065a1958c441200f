//! `score --plot`: per appliance, truth (filled) and estimate (line) over the
//! busiest local day of the scored period, with local-time ticks, and bars of
//! each appliance's F1 and estimated accuracy.

use super::axis::{self, Frame};
use super::palette::{FRAME, INK, PALETTE, PANEL_FILL};
use super::{bucket_means, escape, path, points, time_err, write_picture, zone};
use crate::contract::columns;
use crate::dataset::Dataset;
use crate::diagnostic::Error;
use crate::stream::header;
use std::fmt::Write as _;
use std::path::Path;

/// Truth fill and estimate line: a light and a dark colour of the palette.
const TRUTH: &str = PALETTE[4];
const ESTIMATE: &str = PALETTE[6];
/// The two score bars: two middle-lightness colours of the palette.
const F1_BAR: &str = PALETTE[5];
const ACCURACY_BAR: &str = PALETTE[2];

/// Buckets (and pixels) across one appliance's panel.
const PANEL_W: usize = 420;
const PANEL_H: f64 = 90.0;
/// Room under a panel for its tick labels and axis title.
const GAP: f64 = 56.0;
const PER_ROW: usize = 2;

/// The busiest local day of the scored period (largest true energy over the
/// appliances), clipped to the period: [start, end) in UTC milliseconds.
fn busiest_day(
    report: &crate::score::Report,
    tz: &jiff::tz::TimeZone,
) -> Result<(i64, i64), jiff::Error> {
    let plan = &report.plan;
    let p_end = plan.start_ms + plan.rows as i64 * plan.interval_ms;
    let days = &report.overall_acc.days;
    let best = (0..days.len())
        .max_by(|&a, &b| days[a].sum_y.total_cmp(&days[b].sum_y))
        .unwrap_or(0);
    let mut day = jiff::Timestamp::from_millisecond(plan.start_ms)?
        .to_zoned(tz.clone())
        .date();
    for _ in 0..best {
        day = day.tomorrow()?;
    }
    let ms = |d: jiff::civil::Date| {
        d.to_zoned(tz.clone())
            .map(|z| z.timestamp().as_millisecond())
    };
    let next = day.tomorrow()?;
    Ok((ms(day)?.max(plan.start_ms), ms(next)?.min(p_end)))
}

/// One appliance's panel: truth filled, estimate as a line, local-time ticks,
/// the power axis in W.
fn panel(
    svg: &mut String,
    id: &str,
    f: Frame,
    (truth, estimate): (&[Option<f64>], &[Option<f64>]),
    tz: &jiff::tz::TimeZone,
    window: (i64, i64),
) -> Result<(), jiff::Error> {
    let hi = truth
        .iter()
        .chain(estimate)
        .flatten()
        .fold(1.0f64, |a, b| a.max(*b))
        * 1.05;
    let yp = |v: f64| f.y + f.h - v / hi * f.h;
    let _ = write!(
        svg,
        r#"<g class="appliance" data-appliance="{id}"><rect x="{}" y="{}" width="{}" height="{}" fill="{PANEL_FILL}" stroke="{FRAME}"/><text x="{}" y="{:.1}" font-weight="bold" fill="{INK}">{id}</text><text x="{:.1}" y="{:.1}" text-anchor="end" font-size="9" fill="{INK}">{:.0} W</text><text x="{:.1}" y="{:.1}" text-anchor="end" font-size="9" fill="{INK}">0 W</text>"#,
        f.x,
        f.y,
        f.w,
        f.h,
        f.x,
        f.y - 4.0,
        f.x - 3.0,
        yp(hi / 1.05) + 3.0,
        hi / 1.05,
        f.x - 3.0,
        f.y + f.h,
    );
    axis::time_ticks(svg, tz, window, f, 8)?;
    axis::y_title(svg, f, "power (W)", 36.0);
    axis::x_title(svg, f, "local time");
    let mut outline = vec![(f.x, f.y + f.h)];
    outline.extend(
        truth
            .iter()
            .enumerate()
            .map(|(j, v)| (f.x + j as f64, yp(v.unwrap_or(0.0)))),
    );
    outline.push((f.x + f.w, f.y + f.h));
    let _ = write!(
        svg,
        r#"<polygon class="truth" points="{}" fill="{TRUTH}"/>"#,
        points(&outline)
    );
    let line: Vec<Option<(f64, f64)>> = estimate
        .iter()
        .enumerate()
        .map(|(j, v)| v.map(|v| (f.x + j as f64, yp(v))))
        .collect();
    let d = path(&line);
    let _ = write!(
        svg,
        r#"<path class="estimate" d="{}" fill="none" stroke="{ESTIMATE}" stroke-width="1.2"/></g>"#,
        d.trim_end()
    );
    Ok(())
}

/// Bars of F1 and estimated accuracy per appliance on a 0 … 1 axis.
fn bars(svg: &mut String, report: &crate::score::Report, by: f64, width: f64) {
    let bar_w = width - 330.0;
    let _ = write!(
        svg,
        r#"<g class="bars"><text x="40" y="{by:.1}" font-weight="bold" fill="{INK}">per appliance:</text><rect x="140" y="{:.1}" width="10" height="8" fill="{F1_BAR}"/><text x="154" y="{by:.1}" fill="{INK}">F1</text><rect x="180" y="{:.1}" width="10" height="8" fill="{ACCURACY_BAR}"/><text x="194" y="{by:.1}" fill="{INK}">estimated accuracy</text>"#,
        by - 8.0,
        by - 8.0
    );
    let n = report.appliances.len() as f64;
    let (top, bottom) = (by + 6.0, by + 6.0 + n * 16.0);
    for v in [0.0, 0.5, 1.0] {
        let x = 160.0 + v * bar_w;
        let _ = write!(
            svg,
            r#"<line class="tick" x1="{x:.1}" x2="{x:.1}" y1="{top:.1}" y2="{bottom:.1}" stroke="{FRAME}" stroke-dasharray="2,3"/><text class="score-tick" x="{x:.1}" y="{:.1}" text-anchor="middle" font-size="9" fill="{INK}">{v:.1}</text>"#,
            bottom + 11.0
        );
    }
    let _ = write!(
        svg,
        r#"<text class="axis-title" x="{:.1}" y="{:.1}" text-anchor="middle" font-size="10" fill="{INK}">score (0 … 1, no unit)</text>"#,
        160.0 + bar_w / 2.0,
        bottom + 24.0
    );
    for (k, a) in report.appliances.iter().enumerate() {
        let yy = by + 20.0 + k as f64 * 16.0;
        let acc = a.scores.accuracy.unwrap_or(0.0).clamp(0.0, 1.0);
        let acc_text = a
            .scores
            .accuracy
            .map(|v| format!("{v:.2}"))
            .unwrap_or_else(|| "–".into());
        let _ = write!(
            svg,
            r#"<text class="bar-label" x="150" y="{:.1}" text-anchor="end" fill="{INK}">{}</text><rect x="160" y="{:.1}" width="{:.1}" height="6" fill="{F1_BAR}"/><rect x="160" y="{yy:.1}" width="{:.1}" height="6" fill="{ACCURACY_BAR}"/><text x="{:.1}" y="{:.1}" font-size="9" fill="{INK}">F1 {:.2}, accuracy {acc_text}</text>"#,
            yy + 4.0,
            escape(&a.id),
            yy - 6.0,
            a.scores.f1.clamp(0.0, 1.0) * bar_w,
            acc * bar_w,
            165.0 + bar_w,
            yy + 4.0,
            a.scores.f1,
        );
    }
    svg.push_str("</g>");
}

/// Draws `score --plot` for `report` to `out` (.svg or .png).
pub fn plot_scores(
    report: &crate::score::Report,
    dataset: &Path,
    estimate: &Path,
    out: &Path,
) -> Result<(), Error> {
    let ds = Dataset::open(dataset)?;
    let tz = zone(&ds)?;
    let window = busiest_day(report, &tz).map_err(time_err(dataset))?;
    let ids: Vec<String> = report.appliances.iter().map(|a| a.id.clone()).collect();
    let cols: Vec<String> = ids.iter().map(|i| columns::p(i)).collect();
    let truth_file = if ds.manifest["files"].get("truth.parquet").is_some() {
        "truth.parquet"
    } else {
        "truth.csv"
    };
    let open = |p: &Path| header(p);
    let y = bucket_means(&open(&dataset.join(truth_file))?, &cols, window, PANEL_W)?;
    let yh = bucket_means(&open(estimate)?, &cols, window, PANEL_W)?;
    let pw = PANEL_W as f64;
    let rows = ids.len().div_ceil(PER_ROW);
    let width = 60.0 + PER_ROW as f64 * (pw + 70.0);
    let bars_h = 60.0 + ids.len() as f64 * 16.0;
    let height = 60.0 + rows as f64 * (PANEL_H + GAP) + bars_h + 20.0;
    let mut svg = String::new();
    let _ = write!(
        svg,
        r#"<svg xmlns="http://www.w3.org/2000/svg" width="{width:.0}" height="{height:.0}" viewBox="0 0 {width:.0} {height:.0}" font-family="sans-serif" font-size="11"><rect width="100%" height="100%" fill="white"/>"#,
    );
    let fmt = |ms: i64| {
        jiff::Timestamp::from_millisecond(ms)
            .map(|t| {
                t.to_zoned(tz.clone())
                    .strftime("%Y-%m-%d %H:%M")
                    .to_string()
            })
            .unwrap_or_default()
    };
    let name = estimate
        .file_name()
        .map(|f| f.to_string_lossy().to_string())
        .unwrap_or_default();
    let _ = write!(
        svg,
        r#"<text x="20" y="24" font-size="14" font-weight="bold" fill="{INK}">{} against the truth, {} to {}, local time ({}): truth filled, estimate as a line</text>"#,
        escape(&name),
        fmt(window.0),
        fmt(window.1),
        escape(&ds.timezone)
    );
    for (k, id) in ids.iter().enumerate() {
        let f = Frame {
            x: 55.0 + (k % PER_ROW) as f64 * (pw + 70.0),
            y: 50.0 + (k / PER_ROW) as f64 * (PANEL_H + GAP),
            w: pw,
            h: PANEL_H,
        };
        panel(&mut svg, id, f, (&y[k], &yh[k]), &tz, window).map_err(time_err(dataset))?;
    }
    let by = 50.0 + rows as f64 * (PANEL_H + GAP) + 10.0;
    bars(&mut svg, report, by, width);
    svg += "</svg>\n";
    write_picture(&svg, out)
}
