//! Benchmark: scoring one year at 1 s with 25 appliances (the split-phase
//! demo plus a second fridge). Writes the dataset and an estimate (the truth
//! × 1.1 plus a wobble) once, then times `score` in a child process and
//! reports its wall time and peak memory. Targets: under 10 s, under 1 GB.
//!
//!     cargo bench --bench score               # one year (about 3 minutes to prepare)
//!     LOADLOOM_BENCH_DAYS=30 cargo bench --bench score

use arrow_array::{ArrayRef, Float64Array, RecordBatch, TimestampMillisecondArray};
use arrow_schema::{DataType, Field, Schema, TimeUnit};
use loadloom::dataset::Format;
use loadloom::pipeline;
use parquet::arrow::ArrowWriter;
use std::path::{Path, PathBuf};
use std::process::Command;
use std::sync::Arc;
use std::time::Instant;

#[path = "common.rs"]
mod common;
use common::peak_mb;

fn prepare(days: f64, dir: &Path) -> (PathBuf, PathBuf, usize, u64) {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let mut s = loadloom::scenario::load(&root.join("scenarios/split-phase-house.toml"))
        .expect("demo parses");
    s.run.length_s = days * 86400.0;
    let mut extra = s
        .appliances
        .iter()
        .find(|a| a.id == "fridge")
        .expect("the demo has a fridge")
        .clone();
    extra.id = "garage_fridge".into();
    s.appliances.push(extra);
    let w = pipeline::write(&s, dir, Format::Parquet, &mut |_| {}).expect("write");
    // The estimate: every appliance's truth × 1.1, from the truth file.
    let ds = solver_check::Dataset::open(&w.dir).unwrap();
    let th = solver_check::stream::header(&w.dir.join("truth.parquet")).unwrap();
    let cols: Vec<String> = ds
        .appliances
        .iter()
        .map(|a| format!("{}_p_w", a.id))
        .collect();
    let mut st = th.stream(&cols).unwrap();
    let mut fields = vec![Field::new(
        "time",
        DataType::Timestamp(TimeUnit::Millisecond, Some(ds.timezone.as_str().into())),
        false,
    )];
    fields.extend(cols.iter().map(|c| Field::new(c, DataType::Float64, false)));
    let schema = Arc::new(Schema::new(fields));
    let est = dir.join("estimate.parquet");
    let mut wr =
        ArrowWriter::try_new(std::fs::File::create(&est).unwrap(), schema.clone(), None).unwrap();
    while let Some(b) = st.next_batch().unwrap() {
        let mut arrays: Vec<ArrayRef> = vec![Arc::new(
            TimestampMillisecondArray::from(b.time_ms.clone()).with_timezone(ds.timezone.as_str()),
        )];
        for (j, c) in b.cols.iter().enumerate() {
            arrays.push(Arc::new(Float64Array::from(
                c.iter()
                    .enumerate()
                    .map(|(i, v)| v * 1.1 + ((i + j) % 7) as f64)
                    .collect::<Vec<_>>(),
            )));
        }
        wr.write(&RecordBatch::try_new(schema.clone(), arrays).unwrap())
            .unwrap();
    }
    wr.close().unwrap();
    (w.dir, est, s.appliances.len(), w.rows)
}

fn main() {
    let args: Vec<String> = std::env::args().collect();
    if let Some(i) = args.iter().position(|a| a == "--child") {
        let opts = solver_check::score::Options {
            partial: false,
            thresholds: vec![],
        };
        let t = Instant::now();
        let r = solver_check::score::score(Path::new(&args[i + 1]), Path::new(&args[i + 2]), &opts)
            .expect("score");
        println!(
            "{} {} {}",
            t.elapsed().as_secs_f64(),
            peak_mb(),
            r.overall.mae_w
        );
        return;
    }
    let days: f64 = std::env::var("LOADLOOM_BENCH_DAYS")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(365.0);
    let dir = std::env::temp_dir().join(format!("loadloom-bench-score-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let (data, est, apps, rows) = prepare(days, &dir);
    let mut best = f64::MAX;
    let mut mem = 0.0;
    for _ in 0..3 {
        let o = Command::new(std::env::current_exe().unwrap())
            .args(["--child", data.to_str().unwrap(), est.to_str().unwrap()])
            .output()
            .unwrap();
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
        let out = String::from_utf8_lossy(&o.stdout);
        let v: Vec<f64> = out.split_whitespace().map(|x| x.parse().unwrap()).collect();
        best = best.min(v[0]);
        mem = f64::max(mem, v[1]);
    }
    println!(
        "scoring {days} d at 1 s, {apps} appliances, {rows} rows (truth and estimate Parquet):"
    );
    println!("  best of 3: {best:.2} s, peak memory {mem:.0} MB  (targets: < 10 s, < 1024 MB)");
    println!(
        "  {:.1} million appliance-rows per second",
        rows as f64 * apps as f64 / best / 1e6
    );
    let _ = std::fs::remove_dir_all(&dir);
}
