//! Pictures of datasets and scores: a day per conductor (`day`), a score
//! (`scores`), energy per month (`monthly`). Drawn as SVG by hand (no
//! browser, no Python); PNG rendered from that SVG.

mod axis;
mod day;
mod monthly;
pub mod palette;
mod scores;

use crate::diagnostic::Error;
pub use day::plot;
pub use monthly::{plot_monthly, Monthly, Parts};
pub use scores::plot_scores;
use std::fmt::Write as _;
use std::path::Path;

/// The window and size of a day's picture (`loadloom plot`).
pub struct PlotOptions {
    /// Window start, local date-time (default: the busiest local day).
    pub from: Option<String>,
    /// Window end, local date-time.
    pub to: Option<String>,
    /// Picture width in pixels.
    pub width: u32,
    /// Picture height in pixels.
    pub height: u32,
}

/// `--size 1400x900`: a picture's width and height in pixels, 300 … 10000
/// by 200 … 10000 (smaller leaves no room for the axes and legend; larger
/// is no screen or page).
pub fn parse_size(text: &str) -> Result<(u32, u32), Error> {
    text.split_once('x')
        .and_then(|(w, h)| Some((w.parse::<u32>().ok()?, h.parse::<u32>().ok()?)))
        .filter(|(w, h)| (300..=10000).contains(w) && (200..=10000).contains(h))
        .ok_or_else(|| {
            Error::option(
                &format!("--size {text}"),
                "expected WIDTHxHEIGHT in pixels",
                "write e.g. 1400x900 (300 … 10000 by 200 … 10000)",
            )
        })
}

/// What a day's picture shows: its window (local, with offsets) and legend.
pub struct Plotted {
    /// Window start, local time with its UTC offset.
    pub from: String,
    /// Window end, local time with its UTC offset.
    pub to: String,
    /// The appliances that drew power in the window, in legend order.
    pub legend: Vec<String>,
}

fn err(path: &Path, msg: impl std::fmt::Display, help: &str) -> Error {
    Error::file(path, msg.to_string(), help)
}

/// A time the calendar cannot hold, from a dataset's start, span or time
/// zone: the dataset (`file`) is damaged.
fn time_err(file: &Path) -> impl Fn(jiff::Error) -> Error + '_ {
    move |e| {
        err(
            file,
            "a time outside the calendar (the manifest's start, span or time zone)",
            "rewrite the dataset with `loadloom run`",
        )
        .caused_by(&e)
    }
}

/// The time zone a dataset's manifest names.
fn zone(ds: &crate::dataset::Dataset) -> Result<jiff::tz::TimeZone, Error> {
    jiff::tz::TimeZone::get(&ds.timezone).map_err(|e| {
        err(
            &ds.dir.join("manifest.json"),
            format!("unknown time zone `{}`", ds.timezone),
            "rewrite the dataset with `loadloom run`",
        )
        .caused_by(&e)
    })
}

/// Writes the picture as SVG, or as PNG rendered from the same SVG (pure
/// Rust: resvg with the system's fonts), by the file name's extension;
/// under a temporary name, renamed when complete.
pub fn write_picture(svg: &str, out: &Path) -> Result<(), Error> {
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

/// Means per time bucket of some columns of a table, within [w0, w1).
fn bucket_means(
    h: &crate::stream::Header,
    cols: &[String],
    (w0, w1): (i64, i64),
    buckets: usize,
) -> Result<Vec<Vec<Option<f64>>>, Error> {
    let mut sum = vec![vec![0.0f64; buckets]; cols.len()];
    let mut n = vec![vec![0u32; buckets]; cols.len()];
    let mut st = h.stream(cols)?;
    while let Some(b) = st.next_batch()? {
        for (k, &t) in b.time_ms.iter().enumerate() {
            if t < w0 || t >= w1 {
                continue;
            }
            let j = ((((t - w0) as f64) / (w1 - w0) as f64) * buckets as f64) as usize;
            for c in 0..cols.len() {
                let v = b.cols[c][k];
                if !v.is_nan() {
                    sum[c][j.min(buckets - 1)] += v;
                    n[c][j.min(buckets - 1)] += 1;
                }
            }
        }
    }
    Ok((0..cols.len())
        .map(|c| {
            (0..buckets)
                .map(|j| (n[c][j] > 0).then(|| sum[c][j] / n[c][j] as f64))
                .collect()
        })
        .collect())
}
