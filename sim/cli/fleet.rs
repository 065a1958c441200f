//! `loadloom fleet`: many homes from a population file.

use super::{CommandResult, Error};
use loadloom::fleet::{self, Shard};
use loadloom::progress::Progress;
use std::path::PathBuf;
use std::process::ExitCode;

/// Many homes from a population file, in parallel, Hive-partitioned
/// (OUT/home=00042/…), resumable, shardable across a cluster.
#[derive(clap::Args)]
pub struct Args {
    /// The population file (TOML).
    population: PathBuf,
    /// How many homes the fleet has.
    #[arg(long)]
    homes: u64,
    /// The fleet's folder.
    #[arg(long)]
    out: PathBuf,
    /// Homes simulated at once (default: the machine's cores).
    #[arg(long)]
    jobs: Option<usize>,
    /// Make only shard I of N (homes with index % N == I), or `auto` from
    /// a Slurm array or a Kubernetes Indexed Job.
    #[arg(long, value_name = "I/N|auto")]
    shard: Option<String>,
}

/// Reads the population, checks the options, makes the homes.
pub fn main(a: Args) -> CommandResult {
    let pop = fleet::load(&a.population)?;
    if a.homes == 0 || a.homes > 99_999 {
        return Err(Error::option(
            &format!("--homes {}", a.homes),
            "out of range",
            "a fleet has 1 … 99 999 homes",
        ));
    }
    let shard = match a.shard.as_deref() {
        None => Shard { index: 0, count: 1 },
        Some(t) => Shard::parse(t, &|k| std::env::var(k).ok())?,
    };
    let jobs = a.jobs.unwrap_or_else(|| {
        std::thread::available_parallelism()
            .map(|n| n.get())
            .unwrap_or(1)
    });
    let bar = Progress::counter("homes");
    let started = std::time::Instant::now();
    let progress = |done: u64, total: u64| bar.count(done, total);
    let result = fleet::run(&pop, a.homes, &a.out, jobs, shard, &progress);
    bar.finish();
    let r = result?;
    println!(
        "fleet {}: made {} homes, {} already complete (shard {}/{}), in {:.1} s{}",
        a.out.display(),
        r.made,
        r.skipped,
        shard.index,
        shard.count,
        started.elapsed().as_secs_f64(),
        if r.index_written {
            "; homes.parquet and fleet.json written"
        } else {
            "; the index waits for the other shards"
        }
    );
    Ok(ExitCode::SUCCESS)
}
