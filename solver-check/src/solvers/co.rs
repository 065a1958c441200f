//! `builtin:combinatorial`: combinatorial optimisation (Hart, "Nonintrusive appliance
//! load monitoring", Proc. IEEE 80(12), 1992): at each interval, the
//! combination of appliance levels whose sum is closest to the measured
//! total, ties broken by how common the levels were in training.
//!
//! The combinations are not enumerated per interval: the sums are binned
//! (5 W) and a knapsack-style dynamic programme over appliances finds, once,
//! the most probable combination reaching every reachable sum. Each interval
//! is then a look-up of the best reachable sum near its measurement.
//!
//! `builtin:combinatorial-per-line`: the same per conductor. Appliances on one line
//! get a programme per line; those drawing from several lines (line-to-line,
//! three-phase, several draws) are enumerated jointly (the most probable 4096
//! combinations) with their learned per-line split, and each combination is
//! scored by the per-line look-ups of what it leaves.

use super::states::{learn, PowerLevel};
use super::TaskFolder;
use crate::contract::columns;
use crate::table::Table;
use std::collections::HashMap;

const BIN_W: f64 = 5.0;
/// Weight of improbability against mismatch: W per nat of −log prior.
const PRIOR_W: f64 = 2.0;
/// How far from the measurement a reachable sum is searched, in bins.
const WINDOW: i64 = 80;

/// Best combinations of a group of appliances for every binned sum.
struct Knapsack {
    origin: i64,
    /// choice[i][b]: level of appliance i in the best combination of the
    /// first i + 1 appliances summing to bin b.
    choice: Vec<Vec<u8>>,
    /// For each measured bin: the target bin and its cost (W).
    target: Vec<(u32, f64)>,
    steps: Vec<Vec<i64>>,
}

impl Knapsack {
    /// `powers[i][l]`: power of appliance i at level l; `priors` likewise.
    fn new(powers: &[Vec<f64>], priors: &[Vec<f64>]) -> Knapsack {
        let steps: Vec<Vec<i64>> = powers
            .iter()
            .map(|p| p.iter().map(|w| (w / BIN_W).round() as i64).collect())
            .collect();
        let lo: i64 = steps
            .iter()
            .map(|s| s.iter().copied().min().unwrap_or(0).min(0))
            .sum();
        let hi: i64 = steps
            .iter()
            .map(|s| s.iter().copied().max().unwrap_or(0).max(0))
            .sum();
        let bins = (hi - lo + 1) as usize;
        let mut cur = vec![f64::NEG_INFINITY; bins];
        cur[(-lo) as usize] = 0.0;
        let mut choice = Vec::with_capacity(powers.len());
        for (i, st) in steps.iter().enumerate() {
            let mut next = vec![f64::NEG_INFINITY; bins];
            let mut ch = vec![u8::MAX; bins];
            for b in 0..bins {
                if cur[b] == f64::NEG_INFINITY {
                    continue;
                }
                for (l, s) in st.iter().enumerate() {
                    let nb = b as i64 + s;
                    if nb < 0 || nb >= bins as i64 {
                        continue;
                    }
                    let v = cur[b] + priors[i][l].ln();
                    if v > next[nb as usize] {
                        next[nb as usize] = v;
                        ch[nb as usize] = l as u8;
                    }
                }
            }
            choice.push(ch);
            cur = next;
        }
        let target = (0..bins as i64)
            .map(|m| {
                let mut best = (u32::MAX, f64::INFINITY);
                for b in (m - WINDOW).max(0)..(m + WINDOW + 1).min(bins as i64) {
                    if cur[b as usize] > f64::NEG_INFINITY {
                        let c = (b - m).abs() as f64 * BIN_W - PRIOR_W * cur[b as usize];
                        if c < best.1 {
                            best = (b as u32, c);
                        }
                    }
                }
                if best.0 == u32::MAX {
                    // Nothing reachable nearby: the nearest reachable sum.
                    let b = (0..bins)
                        .filter(|&b| cur[b] > f64::NEG_INFINITY)
                        .min_by_key(|&b| (b as i64 - m).abs())
                        .unwrap_or(0);
                    best = (
                        b as u32,
                        (b as i64 - m).abs() as f64 * BIN_W - PRIOR_W * cur[b],
                    );
                }
                best
            })
            .collect();
        Knapsack {
            origin: lo,
            choice,
            target,
            steps,
        }
    }

    /// Target bin and cost for a measured power.
    fn look(&self, w: f64) -> (u32, f64) {
        let m = (w / BIN_W).round() as i64 - self.origin;
        let n = self.target.len() as i64;
        let mc = m.clamp(0, n - 1);
        let (b, c) = self.target[mc as usize];
        (b, c + (m - mc).abs() as f64 * BIN_W)
    }

    /// Levels of the best combination summing to bin `b`.
    fn levels(&self, mut b: u32, out: &mut [usize]) {
        for i in (0..self.choice.len()).rev() {
            let l = self.choice[i][b as usize] as usize;
            out[i] = l;
            b = (b as i64 - self.steps[i][l]) as u32;
        }
    }
}

type Estimate = (Vec<i64>, Vec<crate::taskio::EstimateColumn>);

/// An appliance as learned from training: its id, the indices of the lines
/// it draws from, and its levels with their split over those lines.
type App = (String, Vec<usize>, Vec<PowerLevel>);

/// A joint combination of the multi-line appliances: their levels, the
/// power it puts on each line, and its log prior.
type Combo = (Vec<usize>, Vec<f64>, f64);

/// Level index per appliance and row (at most four levels: one byte).
type LevelOf = Vec<Vec<u8>>;

/// Learns each appliance's levels, solves every test row (per line when
/// `per_conductor` and the meter reports the lines) and returns the
/// estimate's times and columns.
pub fn solve(task: &TaskFolder, per_conductor: bool) -> Result<Estimate, String> {
    let lines = &task.lines;
    let apps = learn_apps(task)?;
    // A meter that reports only the total (per-line readings all null):
    // the per-line programme has nothing to fit, so it solves the total.
    let per_conductor = per_conductor && meter_has_lines(task);
    let meter_cols: Vec<String> = if per_conductor {
        lines.iter().map(|l| columns::p(l)).collect()
    } else {
        vec![columns::TOTAL_P.into()]
    };
    let test = task.test_meters(&meter_cols)?;
    let level_of = if per_conductor {
        solve_per_line(&apps, lines.len(), &test, &meter_cols)?
    } else {
        solve_total(&apps, &test)?
    };
    let cols = estimate_columns(&apps, level_of, per_conductor, lines);
    Ok((test.time_ms, cols))
}

/// Levels per appliance from the training truth, with their split over the
/// lines each draws from.
fn learn_apps(task: &TaskFolder) -> Result<Vec<App>, String> {
    let lines = &task.lines;
    let mut want: Vec<String> = task.ids.iter().map(|id| columns::p(id)).collect();
    for id in &task.ids {
        for l in lines {
            want.push(columns::p(&columns::on_line(id, l)));
        }
    }
    let train = task.train_truth(&want)?;
    let mut apps: Vec<App> = Vec::new();
    for id in &task.ids {
        let p = train
            .num(&columns::p(id))
            .ok_or_else(|| format!("the training truth lacks {id}_p_w"))?;
        let on: Vec<usize> = (0..lines.len())
            .filter(|&x| train.has(&columns::p(&columns::on_line(id, &lines[x]))))
            .collect();
        let per: Vec<&[f64]> = on
            .iter()
            .map(|&x| {
                train
                    .num(&columns::p(&columns::on_line(id, &lines[x])))
                    .unwrap()
            })
            .collect();
        apps.push((id.clone(), on, learn(p, &per)));
    }
    Ok(apps)
}

/// Whether the test meter reports every line with at least one reading.
fn meter_has_lines(task: &TaskFolder) -> bool {
    let line_cols: Vec<String> = task.lines.iter().map(|l| format!("{l}_p_w")).collect();
    task.test_meters(&line_cols).is_ok_and(|t| {
        line_cols
            .iter()
            .all(|c| t.num(c).is_some_and(|v| v.iter().any(|x| !x.is_nan())))
    })
}

/// One programme over all appliances, solving the measured total.
fn solve_total(apps: &[App], test: &Table) -> Result<LevelOf, String> {
    let n = test.time_ms.len();
    let mut level_of: LevelOf = vec![vec![0; n]; apps.len()];
    let ks = Knapsack::new(
        &apps
            .iter()
            .map(|a| a.2.iter().map(|l| l.p_w).collect())
            .collect::<Vec<_>>(),
        &apps
            .iter()
            .map(|a| a.2.iter().map(|l| l.prior).collect())
            .collect::<Vec<_>>(),
    );
    let total = test
        .num(columns::TOTAL_P)
        .ok_or("the test meters lack total_p_w")?;
    let mut lv = vec![0; apps.len()];
    for t in 0..n {
        ks.levels(ks.look(total[t]).0, &mut lv);
        for (k, l) in lv.iter().enumerate() {
            level_of[k][t] = *l as u8;
        }
    }
    Ok(level_of)
}

/// One programme per line over the appliances on that line only; the
/// multi-line appliances enumerated jointly, each combination scored by the
/// per-line look-ups of what it leaves.
fn solve_per_line(
    apps: &[App],
    n_lines: usize,
    test: &Table,
    meter_cols: &[String],
) -> Result<LevelOf, String> {
    let n = test.time_ms.len();
    let mut level_of: LevelOf = vec![vec![0; n]; apps.len()];
    let single: Vec<Vec<usize>> = (0..n_lines)
        .map(|x| (0..apps.len()).filter(|&k| apps[k].1 == [x]).collect())
        .collect();
    let multi: Vec<usize> = (0..apps.len()).filter(|&k| apps[k].1.len() != 1).collect();
    let ks: Vec<Knapsack> = single
        .iter()
        .map(|group| {
            Knapsack::new(
                &group
                    .iter()
                    .map(|&k| apps[k].2.iter().map(|l| l.split[0]).collect())
                    .collect::<Vec<_>>(),
                &group
                    .iter()
                    .map(|&k| apps[k].2.iter().map(|l| l.prior).collect())
                    .collect::<Vec<_>>(),
            )
        })
        .collect();
    let combos = joint_combos(apps, &multi, n_lines);
    let meas: Vec<&[f64]> = meter_cols
        .iter()
        .map(|c| {
            test.num(c)
                .ok_or_else(|| format!("the test meters lack {c}"))
        })
        .collect::<Result<_, _>>()?;
    let mut cache: HashMap<Vec<i64>, (usize, Vec<u32>)> = HashMap::new();
    for t in 0..n {
        let key: Vec<i64> = meas.iter().map(|m| (m[t] / BIN_W).round() as i64).collect();
        let (ci, targets) = cache
            .entry(key)
            .or_insert_with_key(|key| best_combo(&combos, &ks, key))
            .clone();
        for (j, &k) in multi.iter().enumerate() {
            level_of[k][t] = combos[ci].0[j] as u8;
        }
        for x in 0..n_lines {
            let mut out = vec![0; single[x].len()];
            ks[x].levels(targets[x], &mut out);
            for (j, &k) in single[x].iter().enumerate() {
                level_of[k][t] = out[j] as u8;
            }
        }
    }
    Ok(level_of)
}

/// Joint combinations of the multi-line appliances, most probable first
/// (at most 4096).
fn joint_combos(apps: &[App], multi: &[usize], n_lines: usize) -> Vec<Combo> {
    let mut combos: Vec<Combo> = vec![(vec![], vec![0.0; n_lines], 0.0)];
    for &k in multi {
        let mut next = Vec::new();
        for (ls, v, lp) in &combos {
            for (l, lev) in apps[k].2.iter().enumerate() {
                let mut v2 = v.clone();
                for (j, &x) in apps[k].1.iter().enumerate() {
                    v2[x] += lev.split[j];
                }
                let mut ls2 = ls.clone();
                ls2.push(l);
                next.push((ls2, v2, lp + lev.prior.ln()));
            }
        }
        next.sort_by(|a, b| b.2.partial_cmp(&a.2).unwrap());
        next.truncate(4096);
        combos = next;
    }
    combos
}

/// For binned per-line measurements `key`: the cheapest combination's
/// index and the target bin of each line's programme for what it leaves.
fn best_combo(combos: &[Combo], ks: &[Knapsack], key: &[i64]) -> (usize, Vec<u32>) {
    let n_lines = ks.len();
    let mut best = (0usize, f64::INFINITY, vec![0u32; n_lines]);
    let mut tg = vec![0u32; n_lines];
    for (ci, (_, v, lp)) in combos.iter().enumerate() {
        let mut cost = -PRIOR_W * lp;
        for x in 0..n_lines {
            let (b, c) = ks[x].look(key[x] as f64 * BIN_W - v[x]);
            tg[x] = b;
            cost += c;
            if cost >= best.1 {
                break;
            }
        }
        if cost < best.1 {
            best = (ci, cost, tg.clone());
        }
    }
    (best.0, best.2)
}

/// The estimate's columns: each appliance's power at its level per row and,
/// when solved per line, its split on each line it draws from.
fn estimate_columns(
    apps: &[App],
    level_of: LevelOf,
    per_conductor: bool,
    lines: &[String],
) -> Vec<crate::taskio::EstimateColumn> {
    let mut cols: Vec<crate::taskio::EstimateColumn> = Vec::new();
    for ((id, on, levels), lv) in apps.iter().zip(level_of) {
        let lv = std::rc::Rc::new(lv);
        let p: Vec<f64> = levels.iter().map(|l| l.p_w.max(0.0)).collect();
        let l2 = lv.clone();
        cols.push((columns::p(id), Box::new(move |t| p[l2[t] as usize])));
        if per_conductor {
            for (j, &x) in on.iter().enumerate() {
                let split: Vec<f64> = levels.iter().map(|l| l.split[j]).collect();
                let l2 = lv.clone();
                cols.push((
                    columns::p(&columns::on_line(id, &lines[x])),
                    Box::new(move |t| split[l2[t] as usize]),
                ));
            }
        }
    }
    cols
}
