//! Stage 1, metering: how the CTs and channels really sit. Channels
//! without a CT, every metering hypothesis scored against the declared
//! appliances' steps, the choice, and its findings (reversed CT, CT on
//! another conductor, CTs or channels exchanged).

use super::finding::{Finding, Kind};
use super::fit::{any_fits, explained, fits_of, predicted, steps_explained, Fits};
use super::placement::{alternatives, uncheckable_in};
use super::thresholds::Thresholds;
use crate::audit::decl::{DeclAppliance, Declared};
use crate::audit::events::{ChannelStats, Event};
use crate::contract::{line_label, line_name, C64};
use serde_json::{json, Value};

/// How one channel reads: the conductor, the sign, and whether the power
/// is turned by the angle between the channel's voltage and that conductor's.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ChanMap {
    /// The conductor (line index) whose current the channel's CT reads.
    pub src: usize,
    /// The sign it reads with: 1, or −1 for a CT clamped the wrong way round.
    pub k: f64,
    /// Whether the power is turned by the angle between the channel's
    /// voltage and that conductor's (a CT on another line's conductor).
    pub turned: bool,
}

/// A hypothesis of how the monitor's channels read the conductors.
#[derive(Clone, Debug, PartialEq)]
pub struct Metering {
    /// How each channel reads, one per line channel.
    pub map: Vec<ChanMap>,
    /// Channels that read nothing (no CT): left out of every comparison.
    pub absent: Vec<bool>,
}

impl Metering {
    /// Complex factor from conductor power to channel reading.
    fn factor(&self, d: &Declared, c: usize) -> C64 {
        let m = self.map[c];
        let u = if m.turned {
            d.supply.unit(c) / d.supply.unit(m.src)
        } else {
            C64::new(1.0, 0.0)
        };
        u.scale(m.k)
    }
    /// Channel readings of per-conductor powers `t` (None: channel absent).
    pub fn read(&self, d: &Declared, t: &[C64]) -> Vec<Option<C64>> {
        (0..self.map.len())
            .map(|c| {
                (!self.absent[c]).then(|| {
                    let r = t[self.map[c].src] * self.factor(d, c);
                    if d.real_only {
                        C64::new(r.re, 0.0)
                    } else {
                        r
                    }
                })
            })
            .collect()
    }
}

/// The metering as declared.
pub fn declared_metering(d: &Declared, absent: &[bool]) -> Metering {
    let map = d
        .channels
        .iter()
        .enumerate()
        .map(|(c, ch)| ChanMap {
            src: ch.conductor.unwrap_or(c),
            k: if ch.reversed { -1.0 } else { 1.0 },
            turned: true,
        })
        .collect();
    Metering {
        map,
        absent: absent.to_vec(),
    }
}

pub(super) fn permutations(n: usize) -> Vec<Vec<usize>> {
    match n {
        1 => vec![vec![0]],
        2 => vec![vec![0, 1], vec![1, 0]],
        _ => vec![
            vec![0, 1, 2],
            vec![0, 2, 1],
            vec![1, 0, 2],
            vec![1, 2, 0],
            vec![2, 0, 1],
            vec![2, 1, 0],
        ],
    }
}

/// Every metering hypothesis with its cost (mistakes it supposes against
/// the declaration).
pub(super) fn hypotheses(d: &Declared, absent: &[bool]) -> Vec<(Metering, usize)> {
    let n = d.supply.lines();
    let decl = declared_metering(d, absent);
    let mut out = Vec::new();
    let per: Vec<(usize, f64)> = (0..n).flat_map(|b| [(b, 1.0), (b, -1.0)]).collect();
    let mut idx = vec![0usize; n];
    loop {
        let map: Vec<ChanMap> = idx
            .iter()
            .map(|&i| ChanMap {
                src: per[i].0,
                k: per[i].1,
                turned: true,
            })
            .collect();
        let cost = map
            .iter()
            .zip(&decl.map)
            .enumerate()
            .filter(|(c, _)| !absent[*c])
            .map(|(_, (m, dm))| (m.src != dm.src) as usize + (m.k != dm.k) as usize)
            .sum();
        out.push((
            Metering {
                map,
                absent: absent.to_vec(),
            },
            cost,
        ));
        let mut c = 0;
        loop {
            if c == n {
                break;
            }
            idx[c] += 1;
            if idx[c] < per.len() {
                break;
            }
            idx[c] = 0;
            c += 1;
        }
        if c == n {
            break;
        }
    }
    for p in permutations(n).into_iter().skip(1) {
        let map = p
            .iter()
            .enumerate()
            .map(|(c, &s)| ChanMap {
                src: s,
                k: decl.map[c].k,
                turned: false,
            })
            .collect();
        out.push((
            Metering {
                map,
                absent: absent.to_vec(),
            },
            1,
        ));
    }
    out
}

/// Share of rows where the conductor power a channel implies under `m` is
/// clearly negative; the largest over channels.
pub(super) fn negative_share(m: &Metering, stats: &[ChannelStats]) -> f64 {
    (0..m.map.len())
        .filter(|&c| !m.absent[c])
        .map(|c| {
            let mm = m.map[c];
            let st = &stats[c];
            let read = (st.rows - st.null).max(1) as f64;
            let b = if mm.turned { mm.src } else { c };
            st.negative[b][if mm.k > 0.0 { 0 } else { 1 }] as f64 / read
        })
        .fold(0.0, f64::max)
}

/// The channel stats say a channel has no CT: null nearly always, or nothing
/// at all while declared loads draw through its conductor.
pub(super) fn absent_channels(d: &Declared, stats: &[ChannelStats]) -> Vec<bool> {
    stats
        .iter()
        .enumerate()
        .map(|(c, st)| {
            let read = st.rows.max(1) as f64;
            st.null as f64 / read > 0.9 || d.channels[c].conductor.is_none()
        })
        .collect()
}

/// Channels that read nothing: a finding of a missing CT, or a note where
/// every appliance declared through the line shows on another connection.
pub(super) fn channel_findings(
    d: &Declared,
    events: &[Event],
    stats: &[ChannelStats],
    th: &Thresholds,
) -> (Vec<Finding>, Vec<String>) {
    let n = d.supply.lines();
    let mut findings = Vec::new();
    let mut notes = Vec::new();
    for c in 0..n {
        let st = &stats[c];
        let read = st.rows.max(1) as f64;
        let loaded = d
            .appliances
            .iter()
            .any(|a| a.wirings().iter().any(|w| w.lines(n).contains(&c)));
        let empty = st.null as f64 / read > 0.9;
        let silent = loaded && st.zero as f64 / read > 0.98;
        if d.channels[c].conductor.is_some()
            && silent
            && !empty
            && declared_elsewhere(d, events, c, th)
        {
            notes.push(format!("channel {} reads nothing, and every appliance declared through {} shows on another connection: nothing seems to run on {}, and those appliances are placed from their steps", line_name(c), line_label(c), line_label(c)));
        } else if d.channels[c].conductor.is_some() && (empty || silent) {
            findings.push(Finding {
                kind: Kind::NoCt,
                subject: line_name(c),
                message: format!("channel {} reads no current although a CT on {} is declared: {:.0} % of its rows are empty, {:.0} % read nothing; line-to-line loads show at half power on the other line only", line_name(c), line_label(d.channels[c].conductor.unwrap_or(c)), 100.0 * st.null as f64 / read, 100.0 * st.zero as f64 / read),
                confidence: (st.null.max(st.zero) as f64 / read).min(1.0),
                evidence: json!({ "rows": st.rows, "null_rows": st.null, "zero_rows": st.zero }),
                doubt: None,
            });
        }
    }
    (findings, notes)
}

/// A metering hypothesis as scored: (index, appliances fitted, steps
/// explained, negative share, cost).
pub(super) type Scored = (usize, usize, usize, f64, usize);

/// The metering hypotheses, each scored, the declared one's index and the
/// one chosen.
pub(super) struct MeteringChoice {
    pub(super) hyps: Vec<(Metering, usize)>,
    pub(super) scored: Vec<Scored>,
    pub(super) decl_m: Metering,
    pub(super) decl_i: usize,
    pub(super) chosen: usize,
}

/// The declared metering while it is admissible and explains at least
/// 90 % of the steps the best admissible one explains; otherwise the
/// cheapest admissible hypothesis within 95 % of the best.
pub(super) fn best_admissible(scored: &[Scored], decl_i: usize, th: &Thresholds) -> usize {
    let ok = |s: &&Scored| s.3 <= th.negative_ok;
    let (decl_ex, decl_neg) = (scored[decl_i].2, scored[decl_i].3);
    let best_ex = scored.iter().filter(ok).map(|s| s.2).max().unwrap_or(0);
    if decl_neg <= th.negative_ok && decl_ex as f64 >= 0.9 * best_ex as f64 {
        decl_i
    } else {
        scored
            .iter()
            .filter(ok)
            .filter(|s| s.2 as f64 >= 0.95 * best_ex as f64)
            .min_by_key(|s| (s.4, usize::MAX - s.2))
            .map(|s| s.0)
            .unwrap_or(decl_i)
    }
}

/// The most of `big` the declared metering explains with at most one
/// appliance moved to another connection (`decl_ex` with none moved).
pub(super) fn most_with_one_move(
    d: &Declared,
    decl_m: &Metering,
    big: &[&Event],
    decl_ex: usize,
) -> usize {
    // The other appliances' fits stay as they are while one is moved.
    let fits: Vec<Fits> = d
        .appliances
        .iter()
        .map(|a| fits_of(d, decl_m, a, big))
        .collect();
    let mut most = decl_ex;
    for (j, a) in d.appliances.iter().enumerate() {
        for (_, alt) in alternatives(d, a) {
            let moved = fits_of(d, decl_m, &alt, big);
            let others = fits
                .iter()
                .enumerate()
                .filter(|(o, _)| *o != j)
                .map(|(_, f)| f);
            most = most.max(steps_explained(others.chain([&moved]), big.len()));
        }
    }
    most
}

/// Scores every metering hypothesis on the steps `big` and chooses one.
pub(super) fn choose_metering(
    d: &Declared,
    stats: &[ChannelStats],
    absent: &[bool],
    big: &[&Event],
    th: &Thresholds,
) -> MeteringChoice {
    let decl_m = declared_metering(d, absent);
    let hyps = hypotheses(d, absent);
    let scored: Vec<Scored> = hyps
        .iter()
        .enumerate()
        .map(|(i, (m, cost))| {
            let neg = negative_share(m, stats);
            let (apps, ex) = if neg <= th.negative_ok {
                explained(d, m, big)
            } else {
                (0, 0)
            };
            (i, apps, ex, neg, *cost)
        })
        .collect();
    let decl_i = hyps.iter().position(|(m, _)| *m == decl_m).unwrap_or(0);
    let chosen = best_admissible(&scored, decl_i, th);
    let (decl_ex, decl_neg) = (scored[decl_i].2, scored[decl_i].3);
    // One appliance on another connection is a simpler mistake than a
    // metering fault: the declared metering stands when, with the one
    // appliance moved that helps most, it explains as many steps as the
    // metering chosen above. (A misdeclared appliance that switches often
    // can otherwise tip the choice; a lower bar, 90 %, kept the declared
    // metering where two channels were in fact exchanged.)
    let chosen = if chosen != decl_i
        && decl_neg <= th.negative_ok
        && most_with_one_move(d, &decl_m, big, decl_ex) >= scored[chosen].2
    {
        decl_i
    } else {
        chosen
    };
    MeteringChoice {
        hyps,
        scored,
        decl_m,
        decl_i,
        chosen,
    }
}

/// The confidence that the metering found (`ch`) and not the declared one
/// (`decl`) is right: the share of the `n_big` steps the declared metering
/// leaves unexplained that the metering found explains, of the appliances
/// only it fits, of the `replaced` appliance moves it replaces, or of
/// negative power the declared one implies: whichever says most.
pub(super) fn metering_confidence(
    decl: &Scored,
    ch: &Scored,
    n_big: usize,
    replaced: usize,
    th: &Thresholds,
) -> f64 {
    let (decl_apps, decl_ex, decl_neg) = (decl.1, decl.2, decl.3);
    let (ch_apps, ch_ex) = (ch.1, ch.2);
    let by_apps = 1.0 - (decl_apps as f64 + 1.0) / (ch_apps as f64 + 1.0);
    let by_steps =
        ch_ex.saturating_sub(decl_ex) as f64 / (n_big.saturating_sub(decl_ex) as f64).max(1.0);
    let by_moves = if replaced > 0 {
        1.0 - 1.0 / replaced as f64
    } else {
        0.0
    };
    let mut conf = by_apps.max(by_steps).max(by_moves);
    if decl_neg > th.negative_ok {
        conf = conf.max(decl_neg);
    }
    conf.clamp(0.0, 1.0)
}

/// The metering hypothesis (index into `scored`: index, appliances,
/// steps explained, negative share, cost) that explains, with every
/// appliance as declared, at least as many of `big` as the declared
/// metering does with the appliances `placed` (moved): one metering fault
/// is a simpler account than several appliances moved.
pub(super) fn simpler_metering(
    d: &Declared,
    decl_m: &Metering,
    placed: &[DeclAppliance],
    big: &[&Event],
    scored: &[(usize, usize, usize, f64, usize)],
    decl_i: usize,
    th: &Thresholds,
) -> Option<usize> {
    let dp = Declared {
        appliances: placed.to_vec(),
        ..d.clone()
    };
    let (_, with_moves) = explained(&dp, decl_m, big);
    scored
        .iter()
        .filter(|s| s.0 != decl_i && s.3 <= th.negative_ok)
        .max_by_key(|s| (s.2, usize::MAX - s.4))
        .filter(|s| s.2 >= with_moves)
        .map(|s| s.0)
}

pub(super) fn metering_findings(
    d: &Declared,
    decl: &Metering,
    m: &Metering,
    confidence: f64,
    evidence: Value,
    out: &mut Vec<Finding>,
) {
    let n = d.supply.lines();
    let mut push = |kind: Kind, subject: String, message: String| {
        out.push(Finding {
            kind,
            subject,
            message,
            confidence,
            evidence: evidence.clone(),
            doubt: None,
        })
    };
    if m.map.iter().any(|c| !c.turned) {
        let moved: Vec<usize> = (0..n).filter(|&c| m.map[c].src != c).collect();
        let names: Vec<String> = moved.iter().map(|&c| line_name(c)).collect();
        let reads: Vec<String> = moved
            .iter()
            .map(|&c| format!("{} reads {}", line_name(c), line_label(m.map[c].src)))
            .collect();
        push(
            Kind::ChannelsExchanged,
            names.join("+"),
            format!(
                "channels {} are exchanged, CT and voltage together (or their labels): {}",
                names.join(" and "),
                reads.join(", ")
            ),
        );
        return;
    }
    let mut done = vec![false; n];
    for a in 0..n {
        let b = m.map[a].src;
        if done[a] || m.absent[a] || b == decl.map[a].src {
            continue;
        }
        if b != a && m.map[b].src == a && decl.map[b].src == b && !m.absent[b] {
            done[a] = true;
            done[b] = true;
            push(Kind::CtsExchanged, format!("{}+{}", line_name(a.min(b)), line_name(a.max(b))), format!("the CTs of channels {} and {} are exchanged: each sits on the other's conductor", line_name(a), line_name(b)));
        } else {
            done[a] = true;
            push(
                Kind::CtOnOtherConductor,
                line_name(a),
                format!(
                    "the CT of channel {} is on conductor {}, not {}",
                    line_name(a),
                    line_label(b),
                    line_label(decl.map[a].src)
                ),
            );
        }
    }
    for c in 0..n {
        if !m.absent[c] && m.map[c].k != decl.map[c].k {
            push(
                Kind::ReversedCt,
                line_name(c),
                format!(
                    "the CT of channel {} reads reversed: the power it implies is negative{}",
                    line_name(c),
                    if decl.map[c].k < 0.0 {
                        " unless it is clamped as it should be (declared reversed)"
                    } else {
                        ""
                    }
                ),
            );
        }
    }
}

/// Whether every appliance declared through conductor `c` that has a step
/// to place it by shows at its full size, three times or more, on a
/// wiring that does not go through `c`: then a channel that reads nothing
/// says that nothing runs on that line (the appliances are declared there
/// by mistake), not that its CT is missing.
pub(super) fn declared_elsewhere(
    d: &Declared,
    events: &[Event],
    c: usize,
    th: &Thresholds,
) -> bool {
    let n = d.supply.lines();
    let through_c = |a: &DeclAppliance| a.wirings().iter().any(|w| w.lines(n).contains(&c));
    let absent: Vec<bool> = (0..n)
        .map(|x| x == c || d.channels[x].conductor.is_none())
        .collect();
    let m = declared_metering(d, &absent);
    let there: Vec<&DeclAppliance> = d
        .appliances
        .iter()
        .filter(|a| through_c(a) && uncheckable_in(d, a, th).is_none())
        .collect();
    !there.is_empty()
        && there.iter().all(|a| {
            alternatives(d, a)
                .iter()
                .filter(|(_, alt)| !through_c(alt))
                .any(|(_, alt)| {
                    let sigs = predicted(d, &m, alt);
                    events.iter().filter(|e| any_fits(e, &sigs)).count() >= 3
                })
        })
}

/// A channel that reads nothing (a "no CT" finding) while the metering found
/// has another channel reading its conductor: its CT is not on its own
/// conductor, and where the conductor it would sit on carries nothing the
/// data cannot tell a missing CT from one on that idle conductor. One
/// mistake is the simpler account: a channel already named by another
/// metering finding loses its "no CT" finding, and a CT found on the
/// silent channel's conductor with nothing reading its own is reported as
/// the two CTs exchanged.
pub(super) fn silent_channel_accounts(
    m: &Metering,
    findings: &mut Vec<Finding>,
    notes: &mut Vec<String>,
) {
    let n = m.map.len();
    let silent: Vec<usize> = (0..n)
        .filter(|&a| {
            findings
                .iter()
                .any(|f| f.kind == Kind::NoCt && f.subject == line_name(a))
        })
        .collect();
    for a in silent {
        let Some(b) = (0..n).find(|&b| b != a && !m.absent[b] && m.map[b].src == a) else {
            continue;
        };
        let idle = !(0..n).any(|x| !m.absent[x] && m.map[x].src == b);
        let named = |f: &Finding| {
            f.kind != Kind::NoCt
                && f.kind.is_metering()
                && f.subject.split('+').any(|x| x == line_name(a))
        };
        if findings.iter().any(named) {
            findings.retain(|f| !(f.kind == Kind::NoCt && f.subject == line_name(a)));
        } else if idle {
            let Some(k) = findings
                .iter()
                .position(|f| f.kind == Kind::CtOnOtherConductor && f.subject == line_name(b))
            else {
                continue;
            };
            let mut f = findings.remove(k);
            findings.retain(|f| !(f.kind == Kind::NoCt && f.subject == line_name(a)));
            f.kind = Kind::CtsExchanged;
            f.subject = format!("{}+{}", line_name(a.min(b)), line_name(a.max(b)));
            f.message = format!("the CTs of channels {} and {} are exchanged: {} reads {}, and {} reads nothing, as a CT on {}, which carries nothing, would (or it has no CT)", line_name(a), line_name(b), line_name(b), line_label(a), line_name(a), line_label(b));
            findings.push(f);
        } else {
            continue;
        }
        notes.push(format!("channel {} reads nothing while {} reads {}: taken as one metering mistake, not a missing CT as well", line_name(a), line_name(b), line_label(a)));
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Metering stage: a channel that reads nothing while another channel's
    /// CT is found on its conductor, and nothing reads the other's, is one
    /// mistake (the two CTs exchanged), not a missing CT as well.
    #[test]
    fn a_silent_channel_beside_a_ct_on_its_conductor_is_one_exchange() {
        let m = Metering {
            map: vec![
                ChanMap {
                    src: 0,
                    k: 1.0,
                    turned: true,
                },
                ChanMap {
                    src: 1,
                    k: 1.0,
                    turned: true,
                },
                ChanMap {
                    src: 1,
                    k: 1.0,
                    turned: true,
                },
            ],
            absent: vec![false, true, false],
        };
        let f = |kind: Kind, subject: &str| Finding {
            kind,
            subject: subject.into(),
            message: String::new(),
            confidence: 1.0,
            evidence: json!({}),
            doubt: None,
        };
        let mut findings = vec![f(Kind::NoCt, "l2"), f(Kind::CtOnOtherConductor, "l3")];
        let mut notes = Vec::new();
        silent_channel_accounts(&m, &mut findings, &mut notes);
        let got: Vec<(Kind, &str)> = findings
            .iter()
            .map(|f| (f.kind, f.subject.as_str()))
            .collect();
        assert_eq!(got, [(Kind::CtsExchanged, "l2+l3")]);
        assert_eq!(notes.len(), 1);
        // Already named by a finding about both channels: only the "no CT" goes.
        let mut findings = vec![f(Kind::NoCt, "l2"), f(Kind::ChannelsExchanged, "l2+l3")];
        silent_channel_accounts(&m, &mut findings, &mut notes);
        assert_eq!(findings.len(), 1);
        assert_eq!(findings[0].kind, Kind::ChannelsExchanged);
    }
}
