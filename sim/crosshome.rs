//! Glue of the cross-home round trip: the simulator makes a fleet's homes
//! (the training homes over the training period, the test homes over the
//! test period), then `solver_check::crosshome` hands them to the solver
//! and scores each test home (it reads files only).

use crate::dataset::Format;
use crate::fleet::Population;
use crate::pipeline;
use crate::roundtrip::{check_periods, Plan};
use solver_check::crosshome::{FleetOutcome, Home};
use std::path::Path;

/// Why a cross-home round trip stopped before any solver ran.
pub enum Stop {
    /// Bad input (the population, a period): exit status 2.
    Bad(String),
    /// Writing the homes or the task failed: exit status 1.
    Failed(String),
}

/// Homes `0..train` of the population train the solver (over
/// `plan.train_s`), homes `train..train + test` test it (over
/// `plan.test_s`); everything is written under `work`. `progress` is told
/// (homes made, homes in all).
pub fn run(
    pop: &Population,
    (train, test): (u64, u64),
    work: &Path,
    plan: &Plan,
    progress: &dyn Fn(u64, u64),
) -> Result<FleetOutcome, Stop> {
    if train == 0 || test == 0 {
        return Err(Stop::Bad(
            "error: --train-homes and --test-homes must be 1 or more".into(),
        ));
    }
    if plan.train_s <= 0.0 {
        return Err(Stop::Bad(
            "error: --train must be above zero with --fleet (the training homes' period)".into(),
        ));
    }
    let homes_dir = work.join("homes");
    let (mut train_homes, mut test_homes) = (Vec::new(), Vec::new());
    for i in 0..train + test {
        let (mut s, _) = pop.home(i).map_err(|e| Stop::Bad(e.to_string()))?;
        check_periods(std::slice::from_ref(&s), plan.train_s, plan.test_s, false)
            .map_err(|m| Stop::Bad(format!("error: {m}")))?;
        s.run.length_s = if i < train { plan.train_s } else { plan.test_s };
        let name = format!("home={i:05}");
        let written = pipeline::write(&s, &homes_dir.join(&name), Format::Parquet, &mut |_| {})
            .map_err(|e| {
                Stop::Failed(format!(
                    "error: writing {name} under {} failed: {e}",
                    homes_dir.display()
                ))
            })?;
        let home = Home {
            name,
            dataset: written.dir,
        };
        if i < train {
            train_homes.push(home);
        } else {
            test_homes.push(home);
        }
        progress(i + 1, train + test);
    }
    let ext = Path::new(plan.estimate_name)
        .extension()
        .map_or("parquet".into(), |e| e.to_string_lossy().to_string());
    let task = solver_check::crosshome::prepare(
        &train_homes,
        &test_homes,
        work,
        &homes_dir,
        plan.reveal,
        &ext,
    )
    .map_err(|e| {
        Stop::Failed(format!(
            "error: preparing the task under {} failed: {e}",
            work.display()
        ))
    })?;
    solver_check::crosshome::run(&task, &plan.solver, plan.limit, &plan.allow_read).map_err(|e| {
        Stop::Failed(format!(
            "error: running the solver under {} failed: {e}",
            work.display()
        ))
    })
}
