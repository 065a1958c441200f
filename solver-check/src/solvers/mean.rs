//! `builtin:training-mean`: every appliance at its training mean, all the time. The
//! floor any real method must beat.

use super::TaskFolder;
use crate::contract::columns;

pub fn solve(task: &TaskFolder) -> Result<(Vec<i64>, Vec<crate::taskio::EstimateColumn>), String> {
    let cols: Vec<String> = task.ids.iter().map(|id| columns::p(id)).collect();
    let train = task.train_truth(&cols)?;
    let test = task.test_meters(&[])?;
    let mut out = Vec::new();
    for c in &cols {
        let v = train
            .num(c)
            .ok_or_else(|| format!("the training truth lacks {c}"))?;
        let mean = if v.is_empty() {
            0.0
        } else {
            v.iter().sum::<f64>() / v.len() as f64
        };
        out.push((
            c.clone(),
            Box::new(move |_| mean) as Box<dyn Fn(usize) -> f64>,
        ));
    }
    Ok((test.time_ms, out))
}
