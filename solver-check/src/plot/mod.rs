//! `loadloom plot`: one panel per conductor with the measured power as a line
//! and, stacked beneath it, each appliance's share of that conductor in its
//! own colour, with a legend; the time axis in the home's local time. Drawn
//! as SVG by hand (no browser, no Python).

mod axis;
mod monthly;
pub mod palette;
mod scores;

use crate::dataset::Dataset;
use crate::stream::header;
use axis::Frame;
pub use monthly::{plot_monthly, Monthly};
use palette::{FRAME, INK, PANEL_FILL, ZERO_LINE};
pub use scores::plot_scores;
use std::fmt::Write as _;
use std::path::Path;

pub struct PlotOptions {
    pub from: Option<String>,
    pub to: Option<String>,
    pub width: u32,
    pub height: u32,
}

pub struct Plotted {
    pub from: String,
    pub to: String,
    pub legend: Vec<String>,
}

fn err(path: &Path, msg: impl std::fmt::Display, help: &str) -> String {
    format!("error: {msg}\n  --> {}\n  = help: {help}", path.display())
}

/// Writes the picture as SVG, or as PNG rendered from the same SVG (pure
/// Rust: resvg with the system's fonts), by the file name's extension;
/// under a temporary name, renamed when complete.
pub fn write_picture(svg: &str, out: &Path) -> Result<(), String> {
    let ext = out.extension().and_then(|e| e.to_str()).unwrap_or("");
    let tmp = out.with_extension(format!("{ext}.partial"));
    let bytes = match ext {
        "svg" => svg.as_bytes().to_vec(),
        "png" => {
            let mut opt = resvg::usvg::Options::default();
            let db = opt.fontdb_mut();
            db.load_system_fonts();
            // "sans-serif" maps to whatever sans family the system has (fontdb
            // assumes Arial otherwise); without fonts the text is left out.
            let family = db
                .faces()
                .flat_map(|f| f.families.iter().map(|(n, _)| n.clone()))
                .find(|n| n.contains("Sans") && !n.contains("Mono"));
            if let Some(f) = family {
                db.set_sans_serif_family(f);
            }
            let tree = resvg::usvg::Tree::from_str(svg, &opt).map_err(|e| {
                err(
                    out,
                    format!("cannot render the plot: {e}"),
                    "report this as a bug",
                )
            })?;
            let size = tree.size().to_int_size();
            let mut pixmap = resvg::tiny_skia::Pixmap::new(size.width(), size.height())
                .ok_or_else(|| err(out, "the picture has no size", "give --size"))?;
            resvg::render(
                &tree,
                resvg::tiny_skia::Transform::default(),
                &mut pixmap.as_mut(),
            );
            pixmap.encode_png().map_err(|e| {
                err(
                    out,
                    format!("cannot encode the PNG: {e}"),
                    "report this as a bug",
                )
            })?
        }
        _ => {
            return Err(err(
                out,
                "the plot file must end in .svg or .png",
                "write e.g. --out plot.svg or --out plot.png",
            ))
        }
    };
    std::fs::write(&tmp, bytes)
        .and_then(|_| std::fs::rename(&tmp, out))
        .map_err(|e| {
            err(
                out,
                format!("cannot write the plot: {e}"),
                "check the folder",
            )
        })
}

fn local_ms(text: &str, tz: &jiff::tz::TimeZone) -> Option<i64> {
    let c: jiff::civil::DateTime = text.parse().ok().or_else(|| {
        text.parse::<jiff::civil::Date>()
            .ok()
            .map(|d| d.at(0, 0, 0, 0))
    })?;
    c.to_zoned(tz.clone())
        .ok()
        .map(|z| z.timestamp().as_millisecond())
}

/// "x,y x,y …" to one decimal, leaving out the inner points of horizontal
/// runs (they add bytes, not shape: the pictures stay small enough to keep
/// in the repository).
fn points(pts: &[(f64, f64)]) -> String {
    let r: Vec<(String, String)> = pts
        .iter()
        .map(|(x, y)| (format!("{x:.1}"), format!("{y:.1}")))
        .collect();
    let mut out = String::new();
    for (j, (x, y)) in r.iter().enumerate() {
        let inner = j > 0 && j + 1 < r.len() && r[j - 1].1 == *y && r[j + 1].1 == *y;
        if !inner {
            let sep = if out.is_empty() { "" } else { " " };
            let _ = write!(out, "{sep}{x},{y}");
        }
    }
    out
}

/// An SVG path through the points, lifting the pen over gaps (`None`).
fn path(pts: &[Option<(f64, f64)>]) -> String {
    let mut d = String::new();
    for run in pts.split(|p| p.is_none()).filter(|r| !r.is_empty()) {
        let run: Vec<(f64, f64)> = run.iter().flatten().copied().collect();
        let sep = if d.is_empty() { "" } else { " " };
        let _ = write!(d, "{sep}M{}", points(&run).replace(' ', " L"));
    }
    d
}

fn escape(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

/// Draws `dataset` to `out` (SVG).
pub fn plot(dataset: &Path, out: &Path, o: &PlotOptions) -> Result<Plotted, String> {
    let ds = Dataset::open(dataset).map_err(|e| e.to_string())?;
    let tz = jiff::tz::TimeZone::get(&ds.timezone).map_err(|e| e.to_string())?;
    let t0 = ds.manifest["time"]["start_utc_ms"].as_i64().unwrap_or(0);
    let dt = (ds.interval_s * 1000.0).round() as i64;
    let end = t0 + ds.rows as i64 * dt;
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
    let truth_file = meters_file.replace("meters", "truth");
    let mh = header(&dataset.join(meters_file)).map_err(|e| e.to_string())?;
    let lines: Vec<String> = ds.lines.clone();

    // The window: as given, or the busiest local day by measured energy.
    let (w0, w1) = match (&o.from, &o.to) {
        (Some(f), t) => {
            let a = local_ms(f, &tz).ok_or_else(|| {
                err(
                    dataset,
                    format!("--from {f} is not a local date-time"),
                    "write e.g. 2027-01-05T06:00 or 2027-01-05",
                )
            })?;
            let b = match t {
                Some(t) => local_ms(t, &tz).ok_or_else(|| {
                    err(
                        dataset,
                        format!("--to {t} is not a local date-time"),
                        "write e.g. 2027-01-05T18:00",
                    )
                })?,
                None => a + 86_400_000,
            };
            (a, b)
        }
        (None, Some(t)) => {
            let b = local_ms(t, &tz).ok_or_else(|| {
                err(
                    dataset,
                    format!("--to {t} is not a local date-time"),
                    "write e.g. 2027-01-05T18:00",
                )
            })?;
            (b - 86_400_000, b)
        }
        (None, None) => {
            let mut st = mh
                .stream(&["total_p_w".to_string()])
                .map_err(|e| e.to_string())?;
            let mut days: Vec<(jiff::civil::Date, f64)> = Vec::new();
            while let Some(b) = st.next_batch().map_err(|e| e.to_string())? {
                for (k, &t) in b.time_ms.iter().enumerate() {
                    let d = jiff::Timestamp::from_millisecond(t)
                        .map_err(|e| e.to_string())?
                        .to_zoned(tz.clone())
                        .date();
                    let p = b.cols[0][k];
                    match days.last_mut() {
                        Some((dd, e)) if *dd == d => *e += if p.is_nan() { 0.0 } else { p },
                        _ => days.push((d, if p.is_nan() { 0.0 } else { p })),
                    }
                }
            }
            let best = days
                .iter()
                .max_by(|a, b| a.1.partial_cmp(&b.1).unwrap())
                .map(|d| d.0)
                .ok_or_else(|| err(dataset, "the meters have no rows", "rewrite the dataset"))?;
            let a = best
                .to_zoned(tz.clone())
                .map_err(|e| e.to_string())?
                .timestamp()
                .as_millisecond();
            let b = best
                .tomorrow()
                .map_err(|e| e.to_string())?
                .to_zoned(tz.clone())
                .map_err(|e| e.to_string())?
                .timestamp()
                .as_millisecond();
            (a, b)
        }
    };
    let (w0, w1) = (w0.max(t0), w1.min(end));
    if w1 <= w0 {
        return Err(err(
            dataset,
            "the window lies outside the dataset",
            "choose --from/--to inside the run",
        ));
    }

    // Buckets of the plot's width; each the mean of its rows.
    let (left, right_legend, top, bottom) = (80.0, 190.0, 40.0, 50.0);
    let plot_w = o.width as f64 - left - right_legend;
    let buckets = (plot_w as usize).clamp(10, 4000);
    let bucket_of = |t: i64| (((t - w0) as f64 / (w1 - w0) as f64) * buckets as f64) as usize;
    let mut meas = vec![vec![(0.0f64, 0u32); buckets]; lines.len()];
    let mcols: Vec<String> = lines.iter().map(|l| format!("{l}_p_w")).collect();
    let mut st = mh.stream(&mcols).map_err(|e| e.to_string())?;
    while let Some(b) = st.next_batch().map_err(|e| e.to_string())? {
        for (k, &t) in b.time_ms.iter().enumerate() {
            if t < w0 || t >= w1 {
                continue;
            }
            let j = bucket_of(t).min(buckets - 1);
            for x in 0..lines.len() {
                let v = b.cols[x][k];
                if !v.is_nan() {
                    meas[x][j].0 += v;
                    meas[x][j].1 += 1;
                }
            }
        }
    }
    // Appliances per line from the truth's per-conductor columns.
    let th = header(&dataset.join(&truth_file)).map_err(|e| e.to_string())?;
    let mut series: Vec<(usize, String, usize)> = Vec::new(); // (line, appliance id, column)
    let mut tcols = Vec::new();
    for a in &ds.appliances {
        for (x, l) in lines.iter().enumerate() {
            let c = format!("{}_{l}_p_w", a.id);
            if th.has(&c) {
                series.push((x, a.id.clone(), tcols.len()));
                tcols.push(c);
            }
        }
    }
    let mut sums = vec![vec![0.0f64; buckets]; tcols.len()];
    let mut counts = vec![0u32; buckets];
    let mut st = th.stream(&tcols).map_err(|e| e.to_string())?;
    while let Some(b) = st.next_batch().map_err(|e| e.to_string())? {
        for (k, &t) in b.time_ms.iter().enumerate() {
            if t < w0 || t >= w1 {
                continue;
            }
            let j = bucket_of(t).min(buckets - 1);
            counts[j] += 1;
            for c in 0..tcols.len() {
                sums[c][j] += b.cols[c][k];
            }
        }
    }
    let mean = |c: usize, j: usize| {
        if counts[j] > 0 {
            sums[c][j] / counts[j] as f64
        } else {
            0.0
        }
    };
    let energy: Vec<f64> = (0..tcols.len())
        .map(|c| (0..buckets).map(|j| mean(c, j).abs()).sum())
        .collect();
    let mut legend: Vec<String> = Vec::new();
    for (x, id, c) in &series {
        let _ = x;
        if energy[*c] > 0.0 && !legend.contains(id) {
            legend.push(id.clone());
        }
    }
    // Fills by place in the legend, so the appliances drawn get the most
    // distinct ones.
    let colour = |id: &str| palette::fill(legend.iter().position(|l| l == id).unwrap_or(0));
    let mut svg = String::new();
    let (w, h) = (o.width as f64, o.height as f64);
    let _ = write!(
        svg,
        r#"<svg xmlns="http://www.w3.org/2000/svg" width="{}" height="{}" viewBox="0 0 {} {}" font-family="sans-serif" font-size="12">"#,
        o.width, o.height, o.width, o.height
    );
    let _ = write!(svg, r#"<rect width="{w}" height="{h}" fill="white"/>"#);
    svg += &palette::defs(legend.len());
    let label = ds.manifest["scenario"]["home"]["label"]
        .as_str()
        .filter(|l| !l.is_empty())
        .map(str::to_string)
        .unwrap_or_else(|| {
            dataset
                .file_name()
                .map(|f| f.to_string_lossy().to_string())
                .unwrap_or_default()
        });
    let fmt = |ms: i64, f: &str| {
        jiff::Timestamp::from_millisecond(ms)
            .map(|t| t.to_zoned(tz.clone()).strftime(f).to_string())
            .unwrap_or_default()
    };
    let _ = write!(
        svg,
        r#"<text x="{left}" y="22" font-size="15" font-weight="bold" fill="{INK}">{} — {} to {}</text>"#,
        escape(&label),
        fmt(w0, "%Y-%m-%d %H:%M"),
        fmt(w1, "%Y-%m-%d %H:%M"),
    );
    let panel_h = (h - top - bottom) / lines.len() as f64;
    let xpos = |j: f64| left + j / buckets as f64 * plot_w;
    for (x, l) in lines.iter().enumerate() {
        let y0 = top + x as f64 * panel_h + 10.0;
        let ph = panel_h - 30.0;
        let mine: Vec<&(usize, String, usize)> = series.iter().filter(|s| s.0 == x).collect();
        let mut pos = vec![0.0f64; buckets];
        let mut neg = vec![0.0f64; buckets];
        for s in &mine {
            for j in 0..buckets {
                let v = mean(s.2, j);
                if v >= 0.0 {
                    pos[j] += v;
                } else {
                    neg[j] += v;
                }
            }
        }
        let m: Vec<Option<f64>> = meas[x]
            .iter()
            .map(|(s, n)| (*n > 0).then(|| s / *n as f64))
            .collect();
        let hi = pos
            .iter()
            .copied()
            .chain(m.iter().flatten().copied())
            .fold(1.0f64, f64::max)
            * 1.05;
        let lo = neg
            .iter()
            .copied()
            .chain(m.iter().flatten().copied())
            .fold(0.0f64, f64::min)
            * 1.05;
        let ypos = |v: f64| y0 + (hi - v) / (hi - lo) * ph;
        let _ = write!(
            svg,
            r#"<g class="panel" data-conductor="{l}"><rect x="{left}" y="{y0}" width="{plot_w}" height="{ph}" fill="{PANEL_FILL}" stroke="{FRAME}"/>"#
        );
        let frame = Frame {
            x: left,
            y: y0,
            w: plot_w,
            h: ph,
        };
        // Grid and ticks first, so the shares draw over them.
        axis::time_ticks(&mut svg, &tz, (w0, w1), frame, (plot_w / 70.0) as usize)?;
        // Stacked shares: positive parts upwards from zero, negative ones
        // (two-wattmeter readings below pf 0.5) downwards.
        let mut below_pos = vec![0.0f64; buckets];
        let mut below_neg = vec![0.0f64; buckets];
        for s in &mine {
            if energy[s.2] == 0.0 {
                continue;
            }
            for (sign, below) in [(1.0, &mut below_pos), (-1.0, &mut below_neg)] {
                let vals: Vec<f64> = (0..buckets)
                    .map(|j| {
                        let v = mean(s.2, j);
                        if v * sign > 0.0 {
                            v
                        } else {
                            0.0
                        }
                    })
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
                let pts = format!("{} {}", points(&upper), points(&lower));
                let _ = write!(
                    svg,
                    r#"<polygon class="share" data-appliance="{}" points="{}" fill="{}" fill-opacity="0.85"/>"#,
                    s.1,
                    pts,
                    colour(&s.1)
                );
                for j in 0..buckets {
                    below[j] += vals[j];
                }
            }
        }
        // The measured power of the conductor.
        let measured: Vec<Option<(f64, f64)>> = m
            .iter()
            .enumerate()
            .map(|(j, v)| v.map(|v| (xpos(j as f64 + 0.5), ypos(v))))
            .collect();
        let d = path(&measured);
        let _ = write!(
            svg,
            r#"<path class="measured" d="{}" fill="none" stroke="{INK}" stroke-width="1"/>"#,
            d.trim_end()
        );
        let _ = write!(
            svg,
            r#"<line x1="{left}" x2="{}" y1="{:.1}" y2="{:.1}" stroke="{ZERO_LINE}" stroke-dasharray="2,2"/>"#,
            left + plot_w,
            ypos(0.0),
            ypos(0.0)
        );
        let _ = write!(
            svg,
            r#"<text x="6" y="{:.1}" font-weight="bold">{}</text>"#,
            y0 + 12.0,
            l.to_uppercase()
        );
        for (v, name) in [(hi / 1.05, "max"), (0.0, "0")] {
            let _ = name;
            let _ = write!(
                svg,
                r#"<text x="{:.1}" y="{:.1}" text-anchor="end" font-size="10">{:.0} W</text>"#,
                left - 4.0,
                ypos(v) + 3.0,
                v
            );
        }
        // The lowest value, where it is a negative reading worth a label.
        if lo / 1.05 <= -0.5 {
            let _ = write!(
                svg,
                r#"<text x="{:.1}" y="{:.1}" text-anchor="end" font-size="10">{:.0} W</text>"#,
                left - 4.0,
                ypos(lo / 1.05) + 3.0,
                lo / 1.05
            );
        }
        axis::y_title(&mut svg, frame, "power (W)", 52.0);
        if x + 1 == lines.len() {
            axis::x_title(&mut svg, frame, &format!("local time ({})", ds.timezone));
        }
        svg += "</g>";
    }
    // Legend: every appliance that drew power in the window.
    let lx = o.width as f64 - right_legend + 15.0;
    let _ = write!(
        svg,
        r#"<g class="legend-box"><text x="{lx}" y="{}" font-weight="bold">appliances</text>"#,
        top + 4.0
    );
    for (i, id) in legend.iter().enumerate() {
        let y = top + 20.0 + i as f64 * 16.0;
        let _ = write!(
            svg,
            r#"<rect x="{lx}" y="{:.1}" width="11" height="11" fill="{}"/><text class="legend" x="{}" y="{:.1}">{}</text>"#,
            y - 9.0,
            colour(id),
            lx + 16.0,
            y,
            escape(id)
        );
    }
    let _ = write!(
        svg,
        r#"<text x="{lx}" y="{:.1}" font-size="10">dark line: measured power</text></g>"#,
        top + 20.0 + legend.len() as f64 * 16.0 + 6.0
    );
    svg += "</svg>\n";
    write_picture(&svg, out)?;
    Ok(Plotted {
        from: fmt(w0, "%Y-%m-%dT%H:%M%:z"),
        to: fmt(w1, "%Y-%m-%dT%H:%M%:z"),
        legend,
    })
}
