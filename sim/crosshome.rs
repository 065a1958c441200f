//! Glue of the cross-home round trip: the simulator makes a fleet's homes
//! (the training homes over the training period, the test homes over the
//! test period), then `solver_check::crosshome` hands them to the solver
//! and scores each test home (it reads files only).

use crate::dataset::Format;
use crate::fleet::Population;
use crate::pipeline;
use crate::roundtrip::{check_periods, Plan};
use crate::scenario::Error;
use solver_check::crosshome::{FleetHome, FleetOutcome};
use std::path::Path;

/// Homes `0..train` of the population train the solver (over
/// `plan.train_s`), homes `train..train + test` test it (over
/// `plan.test_s`); everything is written under `work`. `progress` is told
/// (homes made, homes in all). The error says bad input (the population, a
/// period: exit status 2) or a failed run (writing the homes or the task: 1).
pub fn run(
    pop: &Population,
    (train, test): (u64, u64),
    work: &Path,
    plan: &Plan,
    progress: &dyn Fn(u64, u64),
) -> Result<FleetOutcome, Error> {
    if train == 0 || test == 0 {
        return Err(Error::option(
            &format!("--train-homes {train} --test-homes {test}"),
            "a cross-home round trip needs homes to train on and homes to test",
            "give --train-homes and --test-homes 1 or more",
        ));
    }
    if plan.train_s <= 0.0 {
        return Err(Error::option(
            "--train",
            "the training homes need a training period",
            "give --train above zero with --fleet",
        ));
    }
    let failed = |file: &Path, what: String, e: &std::io::Error| {
        let help = "check free space and permissions of the output folder";
        Error::file(file, what, help).caused_by(e).failed()
    };
    let homes_dir = work.join("homes");
    let (mut train_homes, mut test_homes) = (Vec::new(), Vec::new());
    for i in 0..train + test {
        let (mut s, _) = pop.home(i)?;
        check_periods(std::slice::from_ref(&s), plan.train_s, plan.test_s, false)?;
        s.run.length_s = if i < train { plan.train_s } else { plan.test_s };
        let name = format!("home={i:05}");
        let written = pipeline::write(&s, &homes_dir.join(&name), Format::Parquet, &mut |_| {})
            .map_err(|e| pipeline::write_error(&e, &homes_dir.join(&name)))?;
        let home = FleetHome {
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
    .map_err(|e| failed(work, "preparing the task failed".into(), &e))?;
    solver_check::crosshome::run(&task, &plan.solver, plan.limit, &plan.allow_read)
        .map_err(|e| failed(work, "running the solver failed".into(), &e))
}
