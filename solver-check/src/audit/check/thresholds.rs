//! Every cut-off the audit decides by, in one value.

/// Every cut-off the checks decide by, in one value: `Thresholds::STANDARD`
/// is what `loadloom audit` applies; the validation may try others
/// (`check_with`).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Thresholds {
    /// Findings below this confidence are listed apart as "possible". A
    /// finding's confidence is the share of the evidence that speaks for it
    /// against the declaration (steps or appliances that only the finding
    /// explains, or the share of negative power the declaration implies).
    pub possible: f64,
    /// Largest share of rows with a negative implied power that still counts as
    /// a consuming home (noise around zero, brief export).
    pub negative_ok: f64,
    /// A cluster of steps is a load of its own only when coincidences of
    /// declared appliances its size would make as many with a chance below
    /// this: 0.1 %, as every cluster that behaves as a load is tested, several
    /// in one audit, and at most 2 % of clean audits may raise any false
    /// finding (Bonferroni: 1 % over ten tests). Measured in the fault matrix
    /// at 10 s: a bath heater and a fridge starting together, 8 times where
    /// 3.5 were expected (p 2.7 %), are coincidences; a 4.8 kW heat strip
    /// between a 4.5 kW water heater and a 5.4 kW dryer element, 6 times
    /// where 0.97 were expected (p 0.05 %), is a load.
    pub coincidence_p: f64,
    /// How much better (in tolerances) a step must fit one appliance than
    /// another for the other not to share it. Two steps of about one size from
    /// two appliances each fit both; but a step 0.2 tolerances from one and
    /// 0.8 from the other is, with residuals of about a third of the tolerance
    /// (the tolerance is three standard errors wide), some fifteen times
    /// likelier the first's (Gaussian likelihood ratio exp(4.5 (0.8² − 0.2²));
    /// common practice, no source). Measured in the fault matrix at 10 s: a
    /// hair dryer's half-heat step 10 W from its own and 40 W from a washer's
    /// heater step.
    pub clearly_better: f64,
    /// Steps an appliance declared on a line no working CT reads must show
    /// elsewhere, fitting no other appliance, to be placed there: twice the
    /// fault matrix's bar for a mistake the data exercises (six state changes),
    /// as its absence from the declared line cannot be checked. In the doubt
    /// of the confidence they count as that many steps against.
    pub blind_move: usize,
    /// Steps where declared (a start and a stop: one run) from which steps
    /// elsewhere may be another load's rather than the appliance moved; a
    /// single step there is as likely another load's switching.
    pub seen_where_declared: usize,
    /// Steps that fit an appliance as declared and no other appliance, each
    /// of its main step sizes among them, that keep it where it is declared
    /// however many steps of its size show elsewhere (an undeclared load of the
    /// same size on another line): two runs seen whole where declared (common
    /// practice, no source).
    pub shows_as_declared: usize,
    /// An appliance placed on another wiring must show there, among all the
    /// steps that fit it, each of its step sizes of this share of its largest
    /// or more: a dryer that never ran is not placed on a line by three washer
    /// steps of about its main step's size (measured in the fault matrix with
    /// 1 % noise). Smaller steps (a washer's 150 VA drain pump beside its
    /// 1 kW heater) may hide among other loads' changes.
    pub whole_share: f64,
    /// From this reporting interval (s) on, loads that switch within one
    /// interval are common enough that a step is often two loads' at once
    /// (measured in the outside validation at 1 min with real power only: four
    /// in five placements and most undeclared loads were such composites).
    pub coarse_interval_s: f64,
    /// An appliance whose largest step is under this (W, on every connection
    /// it could be on) is not placed: smaller steps of many loads look alike.
    pub decide_w: f64,
}

impl Thresholds {
    /// The cut-offs `loadloom audit` applies.
    pub const STANDARD: Thresholds = Thresholds {
        possible: 0.5,
        negative_ok: 0.05,
        coincidence_p: 0.001,
        clearly_better: 0.5,
        blind_move: 12,
        seen_where_declared: 2,
        shows_as_declared: 4,
        whole_share: 0.25,
        coarse_interval_s: 30.0,
        decide_w: 300.0,
    };
}
