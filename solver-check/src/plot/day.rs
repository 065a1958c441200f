//! `loadloom plot`: one panel per conductor with the measured power as a line
//! and, stacked beneath it, each appliance's share of that conductor in its
//! own fill, with a legend; local-time ticks.

use super::axis::{self, Frame};
use super::palette::{self, FRAME, INK, PANEL_FILL, ZERO_LINE};
use super::{bucket_means, err, escape, local_ms, path, points, time_err, write_picture, zone};
use super::{PlotOptions, Plotted};
use crate::contract::columns;
use crate::dataset::Dataset;
use crate::diagnostic::Error;
use crate::stream::{header, Header};
use std::fmt::Write as _;
use std::path::Path;

/// Margins: left (power labels), right (the legend), top (title), bottom.
const LEFT: f64 = 80.0;
const LEGEND_W: f64 = 190.0;
const TOP: f64 = 40.0;
const BOTTOM: f64 = 50.0;
const DAY_MS: i64 = 86_400_000;

/// One appliance's share of one conductor: its mean power per bucket.
struct Share {
    line: usize,
    id: String,
    means: Vec<f64>,
}

fn parse_local(
    dataset: &Path,
    flag: &str,
    text: &str,
    tz: &jiff::tz::TimeZone,
) -> Result<i64, Error> {
    local_ms(text, tz).ok_or_else(|| {
        err(
            dataset,
            format!("{flag} {text} is not a local date-time"),
            "write e.g. 2027-01-05T06:00 or 2027-01-05",
        )
    })
}

/// The local day with the most measured energy (`total_p_w`): [start, end).
fn busiest_day(dataset: &Path, mh: &Header, tz: &jiff::tz::TimeZone) -> Result<(i64, i64), Error> {
    let e = time_err(dataset);
    let mut st = mh.stream(&[columns::TOTAL_P.to_string()])?;
    let mut days: Vec<(jiff::civil::Date, f64)> = Vec::new();
    while let Some(b) = st.next_batch()? {
        for (k, &t) in b.time_ms.iter().enumerate() {
            let d = jiff::Timestamp::from_millisecond(t)
                .map_err(&e)?
                .to_zoned(tz.clone())
                .date();
            let p = if b.cols[0][k].is_nan() {
                0.0
            } else {
                b.cols[0][k]
            };
            match days.last_mut() {
                Some((dd, energy)) if *dd == d => *energy += p,
                _ => days.push((d, p)),
            }
        }
    }
    let best = days
        .iter()
        .max_by(|a, b| a.1.total_cmp(&b.1))
        .map(|d| d.0)
        .ok_or_else(|| err(dataset, "the meters have no rows", "rewrite the dataset"))?;
    let ms = |d: jiff::civil::Date| -> Result<i64, Error> {
        Ok(d.to_zoned(tz.clone())
            .map_err(&e)?
            .timestamp()
            .as_millisecond())
    };
    Ok((ms(best)?, ms(best.tomorrow().map_err(&e)?)?))
}

/// The window: as given (a day from --from, or the day up to --to), or the
/// busiest local day; clipped to the dataset's span.
fn window(
    dataset: &Path,
    mh: &Header,
    tz: &jiff::tz::TimeZone,
    o: &PlotOptions,
    (t0, end): (i64, i64),
) -> Result<(i64, i64), Error> {
    let (w0, w1) = match (&o.from, &o.to) {
        (Some(f), t) => {
            let a = parse_local(dataset, "--from", f, tz)?;
            let b = match t {
                Some(t) => parse_local(dataset, "--to", t, tz)?,
                None => a + DAY_MS,
            };
            (a, b)
        }
        (None, Some(t)) => {
            let b = parse_local(dataset, "--to", t, tz)?;
            (b - DAY_MS, b)
        }
        (None, None) => busiest_day(dataset, mh, tz)?,
    };
    if w1 <= w0 {
        return Err(err(
            dataset,
            "--to is not after --from",
            "give a --to later than --from",
        ));
    }
    let (w0, w1) = (w0.max(t0), w1.min(end));
    if w1 <= w0 {
        return Err(err(
            dataset,
            "the window lies outside the dataset",
            "choose --from/--to inside the run",
        ));
    }
    Ok((w0, w1))
}

/// Each appliance's share of each conductor it uses, from the truth's
/// `ID_LINE_p_w` columns, as bucket means (0 where a bucket has no rows).
fn shares(
    ds: &Dataset,
    th: &Header,
    window: (i64, i64),
    buckets: usize,
) -> Result<Vec<Share>, Error> {
    let mut found = Vec::new();
    for a in &ds.appliances {
        for (x, l) in ds.lines.iter().enumerate() {
            let c = columns::p(&columns::on_line(&a.id, l));
            if th.has(&c) {
                found.push((x, a.id.clone(), c));
            }
        }
    }
    let cols: Vec<String> = found.iter().map(|f| f.2.clone()).collect();
    let means = bucket_means(th, &cols, window, buckets)?;
    Ok(found
        .into_iter()
        .zip(means)
        .map(|((line, id, _), m)| Share {
            line,
            id,
            means: m.into_iter().map(|v| v.unwrap_or(0.0)).collect(),
        })
        .collect())
}

/// What one conductor's panel needs.
struct Panel<'a> {
    frame: Frame,
    conductor: &'a str,
    shares: Vec<&'a Share>,
    measured: &'a [Option<f64>],
}

/// Stacks the shares: positive parts upwards from zero, negative ones
/// (two-wattmeter readings below pf 0.5) downwards.
fn stack(
    svg: &mut String,
    p: &Panel,
    xpos: &dyn Fn(f64) -> f64,
    ypos: &dyn Fn(f64) -> f64,
    fill: &dyn Fn(&str) -> String,
) {
    let buckets = p.measured.len();
    let mut below_pos = vec![0.0f64; buckets];
    let mut below_neg = vec![0.0f64; buckets];
    for s in p
        .shares
        .iter()
        .filter(|s| s.means.iter().any(|v| *v != 0.0))
    {
        for (sign, below) in [(1.0, &mut below_pos), (-1.0, &mut below_neg)] {
            let vals: Vec<f64> = s
                .means
                .iter()
                .map(|&v| if v * sign > 0.0 { v } else { 0.0 })
                .collect();
            if vals.iter().all(|v| *v == 0.0) {
                continue;
            }
            let upper: Vec<(f64, f64)> = (0..buckets)
                .map(|j| (xpos(j as f64), ypos(below[j] + vals[j])))
                .collect();
            let lower: Vec<(f64, f64)> = (0..buckets)
                .rev()
                .map(|j| (xpos(j as f64), ypos(below[j])))
                .collect();
            let _ = write!(
                svg,
                r#"<polygon class="share" data-appliance="{}" points="{} {}" fill="{}" fill-opacity="0.85"/>"#,
                s.id,
                points(&upper),
                points(&lower),
                fill(&s.id)
            );
            for j in 0..buckets {
                below[j] += vals[j];
            }
        }
    }
}

/// The power range of a panel: (top, bottom) with 5 % room, from the
/// stacked shares and the measured power.
fn range(p: &Panel) -> (f64, f64) {
    let buckets = p.measured.len();
    let sum = |pick: fn(f64) -> f64| -> Vec<f64> {
        (0..buckets)
            .map(|j| p.shares.iter().map(|s| pick(s.means[j])).sum())
            .collect()
    };
    let pos = sum(|v| if v >= 0.0 { v } else { 0.0 });
    let neg = sum(|v| if v >= 0.0 { 0.0 } else { v });
    let m = p.measured.iter().flatten().copied();
    let hi = pos.iter().copied().chain(m.clone()).fold(1.0f64, f64::max) * 1.05;
    let lo = neg.iter().copied().chain(m).fold(0.0f64, f64::min) * 1.05;
    (hi, lo)
}

/// One conductor's panel: grid and ticks, the stacked shares, the measured
/// power, the zero line and the power labels.
fn panel(
    svg: &mut String,
    p: &Panel,
    ticks: &dyn Fn(&mut String, Frame) -> Result<(), Error>,
    fill: &dyn Fn(&str) -> String,
) -> Result<(), Error> {
    let f = p.frame;
    let (hi, lo) = range(p);
    let buckets = p.measured.len();
    let xpos = |j: f64| f.x + j / buckets as f64 * f.w;
    let ypos = |v: f64| f.y + (hi - v) / (hi - lo) * f.h;
    let _ = write!(
        svg,
        r#"<g class="panel" data-conductor="{}"><rect x="{}" y="{}" width="{}" height="{}" fill="{PANEL_FILL}" stroke="{FRAME}"/>"#,
        p.conductor, f.x, f.y, f.w, f.h
    );
    // Grid and ticks first, so the shares draw over them.
    ticks(svg, f)?;
    stack(svg, p, &xpos, &ypos, fill);
    let measured: Vec<Option<(f64, f64)>> = p
        .measured
        .iter()
        .enumerate()
        .map(|(j, v)| v.map(|v| (xpos(j as f64 + 0.5), ypos(v))))
        .collect();
    let _ = write!(
        svg,
        r#"<path class="measured" d="{}" fill="none" stroke="{INK}" stroke-width="1"/><line x1="{}" x2="{}" y1="{:.1}" y2="{:.1}" stroke="{ZERO_LINE}" stroke-dasharray="2,2"/><text x="6" y="{:.1}" font-weight="bold">{}</text>"#,
        path(&measured),
        f.x,
        f.x + f.w,
        ypos(0.0),
        ypos(0.0),
        f.y + 12.0,
        p.conductor.to_uppercase()
    );
    // The top, zero and, where it is a negative reading worth a label, the bottom.
    let mut marks = vec![hi / 1.05, 0.0];
    if lo / 1.05 <= -0.5 {
        marks.push(lo / 1.05);
    }
    for v in marks {
        let _ = write!(
            svg,
            r#"<text x="{:.1}" y="{:.1}" text-anchor="end" font-size="10">{:.0} W</text>"#,
            f.x - 4.0,
            ypos(v) + 3.0,
            v
        );
    }
    axis::y_title(svg, f, "power (W)", 52.0);
    Ok(())
}

/// The legend: every appliance that drew power in the window.
fn legend(svg: &mut String, lx: f64, legend: &[String], fill: &dyn Fn(&str) -> String) {
    let _ = write!(
        svg,
        r#"<g class="legend-box"><text x="{lx}" y="{}" font-weight="bold">appliances</text>"#,
        TOP + 4.0
    );
    for (i, id) in legend.iter().enumerate() {
        let y = TOP + 20.0 + i as f64 * 16.0;
        let _ = write!(
            svg,
            r#"<rect x="{lx}" y="{:.1}" width="11" height="11" fill="{}"/><text class="legend" x="{}" y="{:.1}">{}</text>"#,
            y - 9.0,
            fill(id),
            lx + 16.0,
            y,
            escape(id)
        );
    }
    let _ = write!(
        svg,
        r#"<text x="{lx}" y="{:.1}" font-size="10">dark line: measured power</text></g>"#,
        TOP + 20.0 + legend.len() as f64 * 16.0 + 6.0
    );
}

/// The home's label, or the folder's name.
fn label(ds: &Dataset, dataset: &Path) -> String {
    ds.manifest["scenario"]["home"]["label"]
        .as_str()
        .filter(|l| !l.is_empty())
        .map(str::to_string)
        .unwrap_or_else(|| {
            dataset
                .file_name()
                .map(|f| f.to_string_lossy().to_string())
                .unwrap_or_default()
        })
}

/// Draws `dataset` to `out` (.svg or .png).
pub fn plot(dataset: &Path, out: &Path, o: &PlotOptions) -> Result<Plotted, Error> {
    let ds = Dataset::open(dataset)?;
    let tz = zone(&ds)?;
    let t0 = ds.manifest["time"]["start_utc_ms"].as_i64().unwrap_or(0);
    let end = t0 + ds.rows as i64 * (ds.interval_s * 1000.0).round() as i64;
    let meters_file = ["meters.parquet", "meters.csv"]
        .into_iter()
        .find(|f| ds.manifest["files"].get(*f).is_some())
        .ok_or_else(|| {
            err(
                dataset,
                "the manifest lists no meters file",
                "plot a folder written by `loadloom run`",
            )
        })?;
    let mh = header(&dataset.join(meters_file))?;
    let th = header(&dataset.join(meters_file.replace("meters", "truth")))?;
    let (w0, w1) = window(dataset, &mh, &tz, o, (t0, end))?;
    let plot_w = o.width as f64 - LEFT - LEGEND_W;
    let buckets = (plot_w as usize).clamp(10, 4000);
    let mcols: Vec<String> = ds.lines.iter().map(|l| columns::p(l)).collect();
    let measured = bucket_means(&mh, &mcols, (w0, w1), buckets)?;
    let shares = shares(&ds, &th, (w0, w1), buckets)?;
    let mut drew: Vec<String> = Vec::new();
    for s in shares.iter().filter(|s| s.means.iter().any(|v| *v != 0.0)) {
        if !drew.contains(&s.id) {
            drew.push(s.id.clone());
        }
    }
    // Fills by place in the legend, so the appliances drawn get the most
    // distinct ones.
    let fill = |id: &str| palette::fill(drew.iter().position(|l| l == id).unwrap_or(0));
    let fmt = |ms: i64, f: &str| {
        jiff::Timestamp::from_millisecond(ms)
            .map(|t| t.to_zoned(tz.clone()).strftime(f).to_string())
            .unwrap_or_default()
    };
    let (w, h) = (o.width, o.height);
    let mut svg = format!(
        r#"<svg xmlns="http://www.w3.org/2000/svg" width="{w}" height="{h}" viewBox="0 0 {w} {h}" font-family="sans-serif" font-size="12"><rect width="{w}" height="{h}" fill="white"/>{}<text x="{LEFT}" y="22" font-size="15" font-weight="bold" fill="{INK}">{} — {} to {}</text>"#,
        palette::defs(drew.len()),
        escape(&label(&ds, dataset)),
        fmt(w0, "%Y-%m-%d %H:%M"),
        fmt(w1, "%Y-%m-%d %H:%M"),
    );
    let panel_h = (h as f64 - TOP - BOTTOM) / ds.lines.len() as f64;
    let ticks = |svg: &mut String, f: Frame| {
        axis::time_ticks(svg, &tz, (w0, w1), f, (plot_w / 70.0) as usize).map_err(time_err(dataset))
    };
    for (x, l) in ds.lines.iter().enumerate() {
        let frame = Frame {
            x: LEFT,
            y: TOP + x as f64 * panel_h + 10.0,
            w: plot_w,
            h: panel_h - 30.0,
        };
        let p = Panel {
            frame,
            conductor: l,
            shares: shares.iter().filter(|s| s.line == x).collect(),
            measured: &measured[x],
        };
        panel(&mut svg, &p, &ticks, &fill)?;
        if x + 1 == ds.lines.len() {
            axis::x_title(&mut svg, frame, &format!("local time ({})", ds.timezone));
        }
        svg += "</g>";
    }
    legend(&mut svg, w as f64 - LEGEND_W + 15.0, &drew, &fill);
    svg += "</svg>\n";
    write_picture(&svg, out)?;
    Ok(Plotted {
        from: fmt(w0, "%Y-%m-%dT%H:%M%:z"),
        to: fmt(w1, "%Y-%m-%dT%H:%M%:z"),
        legend: drew,
    })
}
