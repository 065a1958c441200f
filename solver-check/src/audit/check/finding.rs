//! What the audit reports: the kinds of mistake and their JSON names,
//! verdicts, findings, and the doubts that list a finding as possible.

use super::fit::tol;
use super::thresholds::Thresholds;
use crate::audit::decl::{Declared, Inverter};
use crate::contract::Wiring;
use serde_json::Value;

/// A kind of installer mistake, as findings and the fault matrix name them.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum Kind {
    /// A line-to-neutral appliance on another line than declared.
    WrongLine,
    /// Declared line-to-line, seen line-to-neutral.
    DeclaredLlSeenLn,
    /// Declared line-to-neutral, seen line-to-line.
    DeclaredLnSeenLl,
    /// Any other connection than declared (e.g. three-phase declared single).
    WrongConnection,
    /// A CT clamped the wrong way round.
    ReversedCt,
    /// A CT on another line's conductor than its channel's.
    CtOnOtherConductor,
    /// Two channels' CTs on each other's conductors.
    CtsExchanged,
    /// Two channels exchanged whole (CT and voltage lead, or labels).
    ChannelsExchanged,
    /// A channel with a CT declared that reads no current.
    NoCt,
    /// A recurring load no declared appliance explains.
    UndeclaredLoad,
}

impl Kind {
    /// Every kind, in the order reports list them.
    pub const ALL: [Kind; 10] = [
        Kind::WrongLine,
        Kind::DeclaredLlSeenLn,
        Kind::DeclaredLnSeenLl,
        Kind::WrongConnection,
        Kind::ReversedCt,
        Kind::CtOnOtherConductor,
        Kind::CtsExchanged,
        Kind::ChannelsExchanged,
        Kind::NoCt,
        Kind::UndeclaredLoad,
    ];
    /// The kind's name in reports and JSON (`"reversed-ct"`).
    pub fn name(self) -> &'static str {
        match self {
            Kind::WrongLine => "wrong-line",
            Kind::DeclaredLlSeenLn => "declared-ll-seen-ln",
            Kind::DeclaredLnSeenLl => "declared-ln-seen-ll",
            Kind::WrongConnection => "wrong-connection",
            Kind::ReversedCt => "reversed-ct",
            Kind::CtOnOtherConductor => "ct-on-other-conductor",
            Kind::CtsExchanged => "cts-exchanged",
            Kind::ChannelsExchanged => "channels-exchanged",
            Kind::NoCt => "no-ct",
            Kind::UndeclaredLoad => "undeclared-load",
        }
    }
    /// Whether the kind is about the metering (CTs and channels).
    pub fn is_metering(self) -> bool {
        matches!(
            self,
            Kind::ReversedCt
                | Kind::CtOnOtherConductor
                | Kind::CtsExchanged
                | Kind::ChannelsExchanged
                | Kind::NoCt
        )
    }
}

impl std::fmt::Display for Kind {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.pad(self.name())
    }
}

/// What the audit concluded about one declared appliance.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Verdict {
    /// Its steps show where it is declared.
    AsDeclared,
    /// Its steps show on another connection: a finding.
    Finding,
    /// The data cannot place it (the reason says why).
    Undecidable,
}

impl Verdict {
    /// The verdict's name in reports and JSON (`"as declared"`).
    pub fn name(self) -> &'static str {
        match self {
            Verdict::AsDeclared => "as declared",
            Verdict::Finding => "finding",
            Verdict::Undecidable => "undecidable",
        }
    }
}

impl std::fmt::Display for Verdict {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.pad(self.name())
    }
}

/// One thing the data shows that the declaration does not say.
#[derive(Clone, Debug)]
pub struct Finding {
    /// The kind of mistake.
    pub kind: Kind,
    /// The appliance id, channel(s) ("l1", "l1+l2") or cluster the finding is about.
    pub subject: String,
    /// What was found and what to check, in words.
    pub message: String,
    /// Share of the evidence that speaks for it, 0 … 1 (below the possible line, [`Thresholds::possible`]:
    /// listed apart).
    pub confidence: f64,
    /// The figures behind it (step counts, powers), for the JSON report.
    pub evidence: Value,
    /// Why the finding is listed as possible whatever its confidence (the
    /// data allows another account as well), if it is.
    pub doubt: Option<String>,
}

/// The placement check of one declared appliance.
#[derive(Clone, Debug)]
pub struct ApplianceCheck {
    /// The appliance id.
    pub id: String,
    /// Its wiring as declared (`L1-N`).
    pub declared: String,
    /// What the audit concluded about it.
    pub verdict: Verdict,
    /// The wiring the data shows, where it differs from the declared.
    pub seen: Option<String>,
    /// Why the verdict, in words.
    pub reason: String,
    /// Steps that fit it on its declared wiring.
    pub steps_declared: usize,
    /// Steps that fit it on the best other wiring.
    pub steps_best_other: usize,
}

/// The findings, with their doubts, sorted into those listed, those
/// listed as possible, and undeclared loads a partial declaration leaves
/// unlisted.
pub(super) fn sort_findings(
    d: &Declared,
    mut findings: Vec<Finding>,
    settled: bool,
    th: &Thresholds,
) -> (Vec<Finding>, Vec<Finding>, Vec<Finding>) {
    for f in findings.iter_mut() {
        f.doubt = f
            .doubt
            .take()
            // A coarse interval's doubt is the stage's that found it
            // (placement, undeclared loads): each narrows it by evidence.
            .or_else(|| generation_doubt(d, f, settled, th));
    }
    let (findings, possible): (Vec<Finding>, Vec<Finding>) = findings
        .into_iter()
        .partition(|f| f.confidence >= th.possible && f.doubt.is_none());
    let (unlisted, findings) = findings
        .into_iter()
        .partition(|f| d.partial && f.kind == Kind::UndeclaredLoad);
    (findings, possible, unlisted)
}

/// At a coarse interval, placements and undeclared loads rest on steps
/// that may be composites: listed as possible, with why, unless the stage
/// that found them rules that out by evidence (placement:
/// `coarse_move_doubt`; undeclared loads: `UndeclaredStage::coarse_load_doubt`).
pub(super) fn coarse_doubt(kind: Kind, interval_s: f64, th: &Thresholds) -> Option<String> {
    (th.coarse(interval_s) && !kind.is_metering()).then(|| {
        format!("at {interval_s:.0} s per row, loads that switch within one row make one step together, so a step of this size may be two loads'")
    })
}

/// Whether two wiring names are the same connection (`L1-L2` and `L2-L1`).
pub(super) fn same_wiring_name(a: &str, b: &str) -> bool {
    fn parts(x: &str) -> Vec<&str> {
        let mut v: Vec<&str> = x.split('-').collect();
        v.sort();
        v
    }
    a == b || (!a.contains('+') && !b.contains('+') && parts(a) == parts(b))
}

/// Why a placement or an undeclared load may be the PV's or the battery's
/// doing: a battery run for self-consumption answers every change of the
/// home's power within seconds on its own wiring (at 10 s the two make one
/// step of another shape; at 1 s its answer is a step of the same size on
/// its wiring), so a finding on its wiring, or on several connections at
/// once, may rest on its answers ([`battery_may_make`]; a finding without
/// a wiring is doubted too, and every finding where the metering found
/// leaves the answers no shape of their own: `settled` false,
/// `metering::metering_settled`); and a PV inverter changes by any amount while it
/// produces, so a step on its wiring may be its own.
///
/// A PV array's doing is ruled out by its steps' size or times: a step
/// larger than the inverter's declared rating (beyond the tolerance steps
/// are fitted by) is not its own, nor are `th.dark_steps` steps taken while
/// its sun is down (evidence `dark_steps`, [`dark_steps_in`]); a
/// `dark_steps` of 0 turns that test off.
pub(super) fn generation_doubt(
    d: &Declared,
    f: &Finding,
    settled: bool,
    th: &Thresholds,
) -> Option<String> {
    if f.kind.is_metering() {
        return None;
    }
    let on = f.evidence["found"]
        .as_str()
        .or_else(|| f.evidence["wiring"].as_str());
    if let Some(b) = d.generation.iter().find(|g| g.follows_home) {
        let why = |tail: &str| {
            format!("the home battery ({}, on {}) answers each change of the home's power within seconds, {tail}", b.id, b.wiring.name())
        };
        if !settled {
            return Some(why("and the metering found does not keep its answers apart from other steps (a channel without a CT, two channels on one conductor, or another metering that fits the steps as well), so steps anywhere may be partly its answers"));
        }
        if on.is_none_or(|on| battery_may_make(b, on)) {
            return Some(why(&format!(
                "so steps on {} may be partly its answers",
                b.wiring.name()
            )));
        }
    }
    let on = on?;
    let pvs: Vec<_> = d
        .generation
        .iter()
        .filter(|g| same_wiring_name(&g.wiring.name(), on))
        .collect();
    let pv = pvs.first()?;
    let size = f.evidence["step_w"]
        .as_f64()
        .or_else(|| f.evidence["p_w"].as_f64())
        .unwrap_or(0.0)
        .abs();
    // Several arrays on one wiring may change together: their ratings add.
    let rating: Option<f64> = pvs.iter().map(|g| g.rating_w).sum();
    let beyond = rating.is_some_and(|r| size > r + tol(r));
    let dark = f.evidence["dark_steps"].as_u64().unwrap_or(0) as usize;
    if beyond || (th.dark_steps > 0 && dark >= th.dark_steps) {
        return None;
    }
    Some(format!(
        "{} on {on} changes its power by any amount while it produces, so steps on {on} may be its own",
        pv.id
    ))
}

/// Whether the answers of battery `b` may make or shape the steps of a
/// finding on wiring `on`: those of its own wiring, or on several
/// connections at once (`+` in the name: a cluster of parts on several, or
/// an appliance drawing on several). A battery answers a step by drawing
/// or feeding along its own wiring only: across two lines, its current
/// leaves on one and returns on the other, so on a split-phase supply
/// (whose two voltages are each other's negatives) it moves both lines'
/// power alike (textbook circuit relation); on one line to neutral, that
/// line alone. An answer in the row of the step it answers leaves a shape
/// that fits no one connection; an answer alone fits the battery's wiring.
/// A step on one line alone, or on lines it is not across, is no answer of
/// it. A three-phase battery may answer each line apart (a unit that
/// balances each phase), so it may make any step.
fn battery_may_make(b: &Inverter, on: &str) -> bool {
    b.wiring == Wiring::ThreePhase || on.contains('+') || same_wiring_name(&b.wiring.name(), on)
}

/// How many of the moments `times` (UTC ms) every declared PV array on
/// wiring `on` is known to be dark at (its sun below the horizon): steps
/// then are not the arrays' doing. None on that wiring: 0.
pub(super) fn dark_steps_in(d: &Declared, on: &str, times: impl Iterator<Item = i64>) -> usize {
    let pvs: Vec<_> = d
        .generation
        .iter()
        .filter(|g| !g.follows_home && same_wiring_name(&g.wiring.name(), on))
        .collect();
    if pvs.is_empty() {
        return 0;
    }
    times.filter(|&t| pvs.iter().all(|g| g.dark_at(t))).count()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::audit::check::testkit::split_phase;
    use serde_json::json;

    /// At a coarse interval placements and undeclared loads are only
    /// possible (an undeclared load has its own exception, in its stage),
    /// metering findings stand.
    #[test]
    fn placements_at_a_coarse_interval_are_only_possible() {
        let th = &Thresholds::STANDARD;
        assert!(coarse_doubt(Kind::UndeclaredLoad, 60.0, th).is_some());
        assert!(coarse_doubt(Kind::WrongLine, 60.0, th).is_some());
        assert!(coarse_doubt(Kind::ReversedCt, 60.0, th).is_none());
        assert!(coarse_doubt(Kind::UndeclaredLoad, 10.0, th).is_none());
    }

    /// A PV inverter or a home battery makes placements and undeclared
    /// loads on its own wiring possible only; a battery also those on
    /// several connections at once or with no wiring, and all of them
    /// where it is three-phase or the metering is unsettled; metering
    /// findings stand.
    #[test]
    fn findings_the_pv_or_the_battery_could_make_are_only_possible() {
        let th = &Thresholds::STANDARD;
        let mut d = split_phase(vec![]);
        let f = |kind: Kind, ev: serde_json::Value| Finding {
            kind,
            subject: String::new(),
            message: String::new(),
            confidence: 1.0,
            evidence: ev,
            doubt: None,
        };
        let on_ll = f(Kind::UndeclaredLoad, json!({ "wiring": "L2-L1" }));
        let on_ln = f(Kind::WrongLine, json!({ "found": "L1-N" }));
        let ct = f(Kind::ReversedCt, json!({}));
        assert!(
            generation_doubt(&d, &on_ll, true, th).is_none(),
            "no generation"
        );
        d.generation
            .push(Inverter::new("pv", Wiring::LineLine(0, 1), false));
        assert!(generation_doubt(&d, &on_ll, true, th).is_some());
        assert!(
            generation_doubt(&d, &on_ln, true, th).is_none(),
            "not the PV's wiring"
        );
        assert!(generation_doubt(&d, &ct, true, th).is_none());
        d.generation.clear();
        d.generation
            .push(Inverter::new("battery", Wiring::LineLine(0, 1), true));
        assert!(generation_doubt(&d, &on_ll, true, th).is_some());
        let shapeless = f(Kind::UndeclaredLoad, json!({ "wiring": "L1-N+L2-N" }));
        assert!(generation_doubt(&d, &shapeless, true, th).is_some());
        assert!(
            generation_doubt(&d, &on_ln, true, th).is_none(),
            "a step on one line alone is no answer of a battery across both"
        );
        let why = generation_doubt(&d, &on_ln, false, th)
            .expect("unless the metering leaves the battery's answers no shape of their own");
        assert!(why.contains("metering found"), "{why}");
        let unplaced = f(Kind::UndeclaredLoad, json!({}));
        assert!(
            generation_doubt(&d, &unplaced, true, th).is_some(),
            "no wiring to judge by"
        );
        d.generation[0].wiring = Wiring::ThreePhase;
        assert!(
            generation_doubt(&d, &on_ln, true, th).is_some(),
            "a three-phase battery may answer each line apart"
        );
        assert!(generation_doubt(&d, &ct, true, th).is_none());
    }

    /// A PV array cannot make a step larger than its inverter's rating,
    /// nor steps while its sun is down: a load on its wiring that shows so
    /// stands as a finding.
    #[test]
    fn steps_beyond_the_arrays_rating_or_in_its_dark_are_not_its_own() {
        use crate::audit::decl::SunUp;
        use std::sync::Arc;
        const HOUR: i64 = 3_600_000;
        let th = &Thresholds::STANDARD;
        let mut d = split_phase(vec![]);
        let mut pv = Inverter::new("pv", Wiring::LineNeutral(0), false);
        pv.rating_w = Some(600.0);
        // Daylight from 06:00 to 18:00 UTC every day.
        pv.sun_up = Some(SunUp(Arc::new(|ms| (6..18).contains(&((ms / HOUR) % 24)))));
        d.generation.push(pv);
        let load = |p_w: f64, dark: usize| Finding {
            kind: Kind::UndeclaredLoad,
            subject: String::new(),
            message: String::new(),
            confidence: 1.0,
            evidence: json!({ "wiring": "L1-N", "p_w": p_w, "dark_steps": dark }),
            doubt: None,
        };
        assert!(
            generation_doubt(&d, &load(650.0, 0), true, th).is_some(),
            "within the tolerance of 600 W"
        );
        assert!(
            generation_doubt(&d, &load(700.0, 0), true, th).is_none(),
            "beyond it"
        );
        assert!(
            generation_doubt(&d, &load(500.0, 1), true, th).is_some(),
            "one step in the dark"
        );
        assert!(
            generation_doubt(&d, &load(500.0, 2), true, th).is_none(),
            "a run in the dark"
        );
        let times = [2 * HOUR, 7 * HOUR, 17 * HOUR, 23 * HOUR, 26 * HOUR];
        assert_eq!(dark_steps_in(&d, "L1-N", times.into_iter()), 3);
        assert_eq!(
            dark_steps_in(&d, "L2-N", times.into_iter()),
            0,
            "no array there"
        );
    }
}
