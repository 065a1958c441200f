//! What the audit reports: the kinds of mistake and their JSON names,
//! verdicts, findings, and the doubts that list a finding as possible.

use super::fit::tol;
use super::placement::{alternatives, wiring_names, ApplianceCheck};
use super::thresholds::Thresholds;
use crate::audit::decl::{DeclAppliance, Declared};
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

/// The findings, with their doubts, sorted into those listed, those
/// listed as possible, and undeclared loads a partial declaration leaves
/// unlisted.
pub(super) fn sort_findings(
    d: &Declared,
    mut findings: Vec<Finding>,
    placed: &[DeclAppliance],
    checks: &[ApplianceCheck],
    interval_s: f64,
    th: &Thresholds,
) -> (Vec<Finding>, Vec<Finding>, Vec<Finding>) {
    for f in findings.iter_mut() {
        f.doubt = f
            .doubt
            .take()
            .or_else(|| coarse_doubt(f.kind, interval_s, th))
            .or_else(|| undeclared_doubt(d, placed, checks, f));
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
/// that may be composites: listed as possible, with why.
pub(super) fn coarse_doubt(kind: Kind, interval_s: f64, th: &Thresholds) -> Option<String> {
    (interval_s >= th.coarse_interval_s && !kind.is_metering()).then(|| {
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

/// Why an undeclared load `f` may be a declared appliance after all: it has
/// the size of a one-power appliance that was not seen switching where declared, on a
/// connection that one could be on (either it is wired there, or it was
/// not used and this is another load); or it is smaller than an appliance
/// declared by one power only on the same connection (it may be one of
/// that appliance's elements or settings, which its entry does not give).
pub(super) fn undeclared_doubt(
    d: &Declared,
    placed: &[DeclAppliance],
    checks: &[ApplianceCheck],
    f: &Finding,
) -> Option<String> {
    if f.kind != Kind::UndeclaredLoad {
        return None;
    }
    let p = f.evidence["p_w"].as_f64()?;
    let w = f.evidence["wiring"].as_str()?;
    for (a, ck) in placed.iter().zip(checks) {
        // Only its size can tell a one-power appliance (an appliance with
        // several step sizes is told by whether its others show there too).
        let nameplate = a.states.len() == 2 && a.states.iter().all(|st| st.len() <= 1);
        if nameplate && ck.verdict == Verdict::Undecidable && ck.steps_declared < 2 {
            let like = alternatives(d, a).into_iter().find(|(name, alt)| {
                same_wiring_name(name, w) && (alt.largest_step_w() - p).abs() <= tol(p)
            });
            if let Some((name, _)) = like {
                return Some(format!("it has the size of {} on {name}, which was not seen switching where declared: either {} is wired on {name}, or this is another load", a.id, a.id));
            }
        }
        if nameplate && same_wiring_name(&wiring_names(a), w) && a.largest_step_w() > 1.2 * p {
            return Some(format!("it is smaller than {} ({:.0} W on the same connection, declared by one power only): it may be one of its elements or a lower setting", a.id, a.largest_step_w()));
        }
    }
    None
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::audit::check::testkit::{on_off, split_phase};
    use crate::contract::C64;
    use serde_json::json;

    /// Undeclared-load stage: at a coarse interval placements and undeclared
    /// loads are only possible, metering findings stand; a load smaller than
    /// a one-power entry on its connection may be part of it.
    #[test]
    fn undeclared_loads_another_account_fits_are_only_possible() {
        let th = &Thresholds::STANDARD;
        assert!(coarse_doubt(Kind::UndeclaredLoad, 60.0, th).is_some());
        assert!(coarse_doubt(Kind::WrongLine, 60.0, th).is_some());
        assert!(coarse_doubt(Kind::ReversedCt, 60.0, th).is_none());
        assert!(coarse_doubt(Kind::UndeclaredLoad, 10.0, th).is_none());
        let range = on_off("range", 0, C64::new(3000.0, 0.0));
        let d = split_phase(vec![range.clone()]);
        let ck = ApplianceCheck {
            id: "range".into(),
            declared: "L1-N".into(),
            verdict: Verdict::AsDeclared,
            seen: None,
            reason: String::new(),
            steps_declared: 9,
            steps_best_other: 0,
        };
        let load = |p: f64, w: &str| Finding {
            kind: Kind::UndeclaredLoad,
            subject: String::new(),
            message: String::new(),
            confidence: 1.0,
            evidence: json!({ "p_w": p, "wiring": w }),
            doubt: None,
        };
        let doubt = |f: &Finding| {
            undeclared_doubt(
                &d,
                std::slice::from_ref(&range),
                std::slice::from_ref(&ck),
                f,
            )
        };
        assert!(doubt(&load(900.0, "L1-N")).is_some());
        assert!(doubt(&load(900.0, "L2-N")).is_none(), "another connection");
        assert!(
            doubt(&load(2900.0, "L1-N")).is_none(),
            "about its size: not a part"
        );
    }
}
