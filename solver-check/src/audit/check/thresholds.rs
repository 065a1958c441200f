//! Every cut-off the audit decides by, in one value.

/// Every cut-off the checks decide by, in one value: `Thresholds::STANDARD`
/// is what `loadloom audit` applies unless `--cutoff NAME=VALUE` sets one
/// ([`CUTOFFS`] names them); a validation may sweep them (`check_with`).
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
    /// Largest share of rows in which two channels a metering has read one
    /// conductor may read otherwise than two CTs on one conductor do (alike
    /// up to sign and the ratio of their voltages): gaps in one
    /// channel, a CT's gain error beyond the tolerance. Two CTs really on
    /// one conductor read apart in hardly any row; channels on two
    /// conductors, in most rows where either carries a load.
    pub apart_ok: f64,
    /// A cluster of steps is a load of its own only when coincidences of
    /// two loads its size (declared appliances, or a declared one and a
    /// busier cluster) would make as many with a chance below
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
    /// practice, no source). A move asks as many that fit it elsewhere and
    /// no other appliance: the same evidence to move it as to keep it
    /// (three steps at 10 s were a garage door opener's 15 s runs cut by
    /// the rows, read as a 240 V load in a clean home of development seed 2).
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
    /// From it on, a count of steps that fit a load is evidence only beyond
    /// what the sizes beside its own get by chance (`beyond_chance`), the
    /// undeclared loads an account leaves are no count of its mistakes, and
    /// a battery home's metering is not weighed against its mirror image
    /// by their mistakes.
    pub coarse_interval_s: f64,
    /// An appliance whose largest step is under this (W, on every connection
    /// it could be on) is not placed: smaller steps of many loads look alike.
    pub decide_w: f64,
    /// Steps on another wiring, none where declared (its declared wiring
    /// read by working CTs), that move an appliance of a partial declaration
    /// for certain: three runs, the fault matrix's bar for a mistake the data
    /// exercises (six state changes). An installer lists an appliance
    /// because it is there; that it never switched where declared while a
    /// load of its size and power factor switched three times on another
    /// wiring is a simpler account than an unlisted look-alike beside an
    /// appliance that was not used (common practice, no source).
    pub partial_move: usize,
    /// Runs seen whole (a start, then its stop) that make an undeclared load
    /// at a coarse interval a finding rather than possible, when its starts
    /// and stops balance, its size is no declared jump and coincidences of
    /// two make few of its steps (`composite_share`): loads that happen to switch within one row do
    /// not repeat at one size, starting and stopping alike, ten times
    /// (common practice, no source). A move at a coarse interval is a
    /// finding with as many steps (half as many runs) where found, beyond
    /// chance there and not where declared, and beyond what two declared
    /// loads switching together make (`coarse_move_doubt`: the chances
    /// carry the weight there). As many overlaps make a load of a declared
    /// appliance's size beside it a finding (a lost stop is likelier
    /// there), and as many runs beyond the habits of what could make them a
    /// load hidden among appliances of its size.
    pub coarse_runs: usize,
    /// Share of a coarse cluster's steps that two loads switching within
    /// one row are expected to make (the summed rates of the sums and
    /// differences of its size of two declared jumps, or of a declared jump
    /// and a busier cluster's step) from
    /// which it is possible only: a quarter. Steps of its size that
    /// coincidences make at a fourth of its count or more leave too little
    /// apart from them to call it a load of its own (common practice, no
    /// source); far fewer expected than seen is a load repeating at its size.
    pub composite_share: f64,
    /// Steps a declared appliance must explain under one of two meterings
    /// and not the other to take that one's side in their dispute: one run
    /// (a start and a stop); a single step is as likely another load's.
    pub dispute_run_steps: usize,
    /// How many times the other side's steps an appliance must explain to
    /// take a side, and how many times the declared metering's steps and
    /// appliances a metering fault needs to be chosen over it: twice
    /// (common practice, no source: a clear majority, not a near tie).
    pub dispute_ratio: f64,
    /// Declared appliances that must take a metering fault's side for it to
    /// be chosen over the declared metering: a fault moves every appliance
    /// on the channels it concerns, while one busy appliance elsewhere (or
    /// a load of its size nobody declared) speaks through one.
    pub dispute_apps: usize,
    /// Times a step of a declared appliance's size must come while it is
    /// already on (two starts with no stop between, the channels it draws
    /// through rising by twice its power) to make a load of its size beside
    /// it a finding rather than possible: one such overlap may be a stop of
    /// the appliance lost among other loads' changes with another load coming
    /// on before its next start; three of them hardly (common practice, no
    /// source). As many runs of a smaller load within the appliance's runs,
    /// and as many apart from them, make it another load than a setting or
    /// a stage of the appliance (0: every smaller load is another).
    pub overlap_runs: usize,
    /// Share of a one-power entry's size within which a load may be that
    /// entry drawing other than its nameplate: an entry gives one power, the
    /// nameplate (an appliance's total, or a rating at another voltage),
    /// while its steps are what it draws (a washer's heater alone, a
    /// compressor at the input the weather gives it). A load within this of
    /// an entry not seen switching where declared is only possibly another
    /// load, and so is a one-power appliance's move when another such entry
    /// has about the size of the steps (common practice, no source).
    pub nameplate_band: f64,
    /// Steps of a placement or undeclared load, on the wiring of a declared
    /// PV array, taken while the array's sun is below the horizon, that make
    /// it no doing of the array's (which changes by any amount while it
    /// produces): one run seen in the dark, a start and a stop (common
    /// practice, no source).
    pub dark_steps: usize,
    /// Share of the steps one metering explains from which another
    /// explains as many: a near tie, within 5 % (common practice, no
    /// source). Of the meterings that explain as many steps as the best,
    /// the one supposing fewest changes is weighed against the declared;
    /// a battery home's mirror image (every reading negated) that explains
    /// as many fits as well; and a metering that another, reading the
    /// conductors otherwise, explains as many steps as is not settled by
    /// the steps.
    pub fits_as_well: f64,
    /// How many times the runs the declared habits of the appliances of one
    /// step size start must the runs of that size be (besides beyond the
    /// Poisson chance `coincidence_p`) for a load hidden among them: a
    /// habit is an assumption, and a household may use an appliance twice
    /// as often as declared.
    pub habit_margin: f64,
    /// The most metering mistakes a metering found may make at once and be
    /// findings: installers' mistakes come one or two at a time, so an
    /// account of more fits data the declaration does not describe (loads
    /// not declared, or declared elsewhere) as well.
    pub metering_faults: usize,
}

impl Thresholds {
    /// The cut-offs `loadloom audit` applies.
    pub const STANDARD: Thresholds = Thresholds {
        possible: 0.5,
        negative_ok: 0.05,
        apart_ok: 0.05,
        coincidence_p: 0.001,
        clearly_better: 0.5,
        blind_move: 12,
        seen_where_declared: 2,
        shows_as_declared: 4,
        whole_share: 0.25,
        coarse_interval_s: 30.0,
        decide_w: 300.0,
        partial_move: 6,
        coarse_runs: 10,
        composite_share: 0.25,
        dispute_run_steps: 2,
        dispute_ratio: 2.0,
        dispute_apps: 2,
        overlap_runs: 3,
        nameplate_band: 0.2,
        dark_steps: 2,
        fits_as_well: 0.95,
        habit_margin: 3.0,
        metering_faults: 2,
    };
}

/// One cut-off as the command line names it (`--cutoff NAME=VALUE`), with
/// what it means in one line and the values it may take.
pub struct Cutoff {
    /// Its name: the field of [`Thresholds`] it sets.
    pub name: &'static str,
    /// What it decides, in one line (listed in errors and the README).
    pub meaning: &'static str,
    /// Smallest and largest value it may take.
    pub range: (f64, f64),
    /// Whether it is a count (a whole number).
    pub count: bool,
    get: fn(&Thresholds) -> f64,
    set: fn(&mut Thresholds, f64),
}

impl Cutoff {
    /// Its value in `th`.
    pub fn of(&self, th: &Thresholds) -> f64 {
        (self.get)(th)
    }
    /// Its value in [`Thresholds::STANDARD`].
    pub fn standard(&self) -> f64 {
        self.of(&Thresholds::STANDARD)
    }
}

/// Every cut-off of [`Thresholds`], in the order of its fields.
pub const CUTOFFS: [Cutoff; 23] = [
    Cutoff {
        name: "possible",
        meaning: "confidence below which a finding is listed apart as possible",
        range: (0.0, 1.0),
        count: false,
        get: |t| t.possible,
        set: |t, v| t.possible = v,
    },
    Cutoff {
        name: "negative_ok",
        meaning: "largest share of rows with a negative implied conductor power that still counts as a home that only consumes (a metering hypothesis above it is ruled out)",
        range: (0.0, 1.0),
        count: false,
        get: |t| t.negative_ok,
        set: |t, v| t.negative_ok = v,
    },
    Cutoff {
        name: "apart_ok",
        meaning: "largest share of rows in which two channels a metering has read one conductor may read otherwise than two CTs on one conductor do",
        range: (0.0, 1.0),
        count: false,
        get: |t| t.apart_ok,
        set: |t, v| t.apart_ok = v,
    },
    Cutoff {
        name: "coincidence_p",
        meaning: "chance, under the Poisson rate of coincidences of two loads (declared, or declared and a busier cluster), below which a cluster of steps is a load of its own",
        range: (0.0, 1.0),
        count: false,
        get: |t| t.coincidence_p,
        set: |t, v| t.coincidence_p = v,
    },
    Cutoff {
        name: "clearly_better",
        meaning: "how much better, in tolerances, a step must fit one appliance for another that also fits it not to share it",
        range: (0.0, 1.0),
        count: false,
        get: |t| t.clearly_better,
        set: |t, v| t.clearly_better = v,
    },
    Cutoff {
        name: "blind_move",
        meaning: "steps on another wiring, fitting no other appliance, that place an appliance declared through a conductor no working CT reads",
        range: (0.0, 1e6),
        count: true,
        get: |t| t.blind_move as f64,
        set: |t, v| t.blind_move = v as usize,
    },
    Cutoff {
        name: "seen_where_declared",
        meaning: "steps where declared from which a move elsewhere is only possible (the steps elsewhere may be another load's)",
        range: (0.0, 1e6),
        count: true,
        get: |t| t.seen_where_declared as f64,
        set: |t, v| t.seen_where_declared = v as usize,
    },
    Cutoff {
        name: "shows_as_declared",
        meaning: "steps as declared, each main step size among them, that keep an appliance where declared however many of its size show elsewhere; as many elsewhere are the least a move needs",
        range: (0.0, 1e6),
        count: true,
        get: |t| t.shows_as_declared as f64,
        set: |t, v| t.shows_as_declared = v as usize,
    },
    Cutoff {
        name: "whole_share",
        meaning: "share of its largest step from which each step size of a moved appliance must show on its new wiring",
        range: (0.0, 1.0),
        count: false,
        get: |t| t.whole_share,
        set: |t, v| t.whole_share = v,
    },
    Cutoff {
        name: "coarse_interval_s",
        meaning: "reporting interval (s) from which placements and undeclared loads are only possible (a move of coarse_runs steps or an undeclared load of coarse_runs runs, beyond chance, a look-alike of coarse_runs overlaps, or a hidden load of coarse_runs runs beyond the habits of what could make it, excepted), from which the undeclared loads an account of a metering fault leaves are not counted as its mistakes, and from which a battery home's metering and its mirror image are not weighed by their mistakes (the metering found stays possible)",
        range: (0.0, 86_400.0),
        count: false,
        get: |t| t.coarse_interval_s,
        set: |t, v| t.coarse_interval_s = v,
    },
    Cutoff {
        name: "decide_w",
        meaning: "largest step (W, on every connection the appliance could be on) under which an appliance is not placed",
        range: (0.0, 1e6),
        count: false,
        get: |t| t.decide_w,
        set: |t, v| t.decide_w = v,
    },
    Cutoff {
        name: "partial_move",
        meaning: "steps on another wiring, none where declared, that move an appliance of a partial declaration for certain",
        range: (0.0, 1e6),
        count: true,
        get: |t| t.partial_move as f64,
        set: |t, v| t.partial_move = v as usize,
    },
    Cutoff {
        name: "coarse_runs",
        meaning: "runs seen whole that make an undeclared load at a coarse interval a finding (starts and stops alike, no declared jump's size, far more than coincidences of two make), overlaps a load of a declared appliance's size beside it, runs beyond the habits a load hidden among appliances of its size, and steps a move",
        range: (0.0, 1e6),
        count: true,
        get: |t| t.coarse_runs as f64,
        set: |t, v| t.coarse_runs = v as usize,
    },
    Cutoff {
        name: "composite_share",
        meaning: "share of a coarse undeclared load's steps that two loads (declared, or declared and a busier cluster) switching within one row are expected to make, from which it is only possible",
        range: (0.0, 1.0),
        count: false,
        get: |t| t.composite_share,
        set: |t, v| t.composite_share = v,
    },
    Cutoff {
        name: "dispute_run_steps",
        meaning: "steps a declared appliance must explain under one of two meterings and not the other to take that one's side",
        range: (1.0, 1e6),
        count: true,
        get: |t| t.dispute_run_steps as f64,
        set: |t, v| t.dispute_run_steps = v as usize,
    },
    Cutoff {
        name: "dispute_ratio",
        meaning: "how many times the other side's steps an appliance must explain to take a side, and a metering fault's steps and appliances the declared metering's to be chosen",
        range: (1.0, 100.0),
        count: false,
        get: |t| t.dispute_ratio,
        set: |t, v| t.dispute_ratio = v,
    },
    Cutoff {
        name: "dispute_apps",
        meaning: "declared appliances that must take a metering fault's side for it to be chosen over the declared metering",
        range: (1.0, 1e6),
        count: true,
        get: |t| t.dispute_apps as f64,
        set: |t, v| t.dispute_apps = v as usize,
    },
    Cutoff {
        name: "overlap_runs",
        meaning: "times a step of a declared one-power appliance's size comes while it is already on (twice its power drawn) that make a load of its size beside it a finding (at a coarse interval, coarse_runs times); runs a smaller load needs both within its runs and apart from them to be another load; runs beyond the declared habits a load hidden among appliances of its size needs at least",
        range: (0.0, 1e6),
        count: true,
        get: |t| t.overlap_runs as f64,
        set: |t, v| t.overlap_runs = v as usize,
    },
    Cutoff {
        name: "nameplate_band",
        meaning: "share of a one-power entry's size within which a load may be that entry drawing other than its nameplate (an undeclared load near an entry not seen where declared, or a move another such entry has the size of, is only possible)",
        range: (0.0, 1.0),
        count: false,
        get: |t| t.nameplate_band,
        set: |t, v| t.nameplate_band = v,
    },
    Cutoff {
        name: "dark_steps",
        meaning: "steps of a placement or undeclared load on a declared PV array's wiring, taken while its sun is down, that make it no doing of the array's (0 turns the test off)",
        range: (0.0, 1e6),
        count: true,
        get: |t| t.dark_steps as f64,
        set: |t, v| t.dark_steps = v as usize,
    },
    Cutoff {
        name: "fits_as_well",
        meaning: "share of the steps one metering explains from which another explains as many (the cheapest of those as good as the best is weighed; a battery home's mirror image; a rival that leaves the metering unsettled)",
        range: (0.0, 1.0),
        count: false,
        get: |t| t.fits_as_well,
        set: |t, v| t.fits_as_well = v,
    },
    Cutoff {
        name: "habit_margin",
        meaning: "how many times the runs the declared habits of the appliances of one step size start the runs of that size must be (and beyond coincidence_p) to make a load of that size hidden among them",
        range: (1.0, 1000.0),
        count: false,
        get: |t| t.habit_margin,
        set: |t, v| t.habit_margin = v,
    },
    Cutoff {
        name: "metering_faults",
        meaning: "the most metering mistakes (a CT reversed or on another conductor, CTs or channels exchanged) a metering found may make at once and be findings; more are listed as possible",
        range: (0.0, 1e6),
        count: true,
        get: |t| t.metering_faults as f64,
        set: |t, v| t.metering_faults = v as usize,
    },
];

/// Why a cut-off setting was refused: what was wrong, and how to write it.
#[derive(Debug, Clone, PartialEq)]
pub struct CutoffError {
    /// What is wrong with the setting.
    pub message: String,
    /// How to write it, with every cut-off's name and range.
    pub help: String,
}

impl Thresholds {
    /// Whether rows `interval_s` apart are coarse: `coarse_interval_s` or
    /// more, where loads switching within one row make one step together.
    pub fn coarse(&self, interval_s: f64) -> bool {
        interval_s >= self.coarse_interval_s
    }

    /// The standard cut-offs with each `NAME=VALUE` of `settings` applied,
    /// in order (a name given twice: the last value counts).
    pub fn with_settings<S: AsRef<str>>(settings: &[S]) -> Result<Thresholds, CutoffError> {
        let mut th = Thresholds::STANDARD;
        for s in settings {
            th.apply(s.as_ref())?;
        }
        Ok(th)
    }

    /// Applies one `NAME=VALUE` setting.
    pub fn apply(&mut self, setting: &str) -> Result<(), CutoffError> {
        let refuse = |message: String| CutoffError {
            message,
            help: cutoff_help(),
        };
        let (name, value) = setting
            .split_once('=')
            .ok_or_else(|| refuse(format!("\"{setting}\" is not NAME=VALUE")))?;
        let (name, value) = (name.trim(), value.trim());
        let c = CUTOFFS
            .iter()
            .find(|c| c.name == name)
            .ok_or_else(|| refuse(format!("no cut-off is named \"{name}\"")))?;
        let v: f64 = value
            .parse()
            .map_err(|_| refuse(format!("\"{value}\" is not a number")))?;
        let (lo, hi) = c.range;
        if !v.is_finite() || v < lo || v > hi || (c.count && v.fract() != 0.0) {
            let what = if c.count {
                "a whole number"
            } else {
                "a number"
            };
            let message = format!("{name} = {value}: it must be {what} from {lo} to {hi}");
            return Err(refuse(message));
        }
        (c.set)(self, v);
        Ok(())
    }

    /// The cut-offs that differ from the standard ones.
    pub fn changed(&self) -> Vec<&'static Cutoff> {
        CUTOFFS
            .iter()
            .filter(|c| c.of(self) != c.standard())
            .collect()
    }
}

/// How to write a cut-off setting, with every name, its standard value and
/// its range.
fn cutoff_help() -> String {
    let names: Vec<String> = CUTOFFS
        .iter()
        .map(|c| {
            let (lo, hi) = c.range;
            format!("{} (standard {}, {lo} … {hi})", c.name, c.standard())
        })
        .collect();
    format!(
        "write NAME=VALUE, e.g. possible=0.7; the cut-offs are: {}",
        names.join(", ")
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Each name sets its own field and only it; the standard value reads
    /// back as the standard.
    #[test]
    fn each_cutoff_sets_its_own_field() {
        for c in &CUTOFFS {
            let mut th = Thresholds::STANDARD;
            let v = if c.count {
                7.0
            } else {
                c.range.0 + 0.375 * (c.range.1 - c.range.0).min(1.0)
            };
            th.apply(&format!("{}={v}", c.name)).unwrap();
            assert_eq!(c.of(&th), v, "{}", c.name);
            let changed: Vec<&str> = th.changed().iter().map(|c| c.name).collect();
            assert_eq!(changed, [c.name]);
        }
        assert!(Thresholds::STANDARD.changed().is_empty());
    }

    /// Every field of `Thresholds` has its entry in `CUTOFFS`, in order (a
    /// cut-off added to the value must be settable and reported too).
    #[test]
    fn every_field_is_a_cutoff() {
        let text = format!("{:?}", Thresholds::STANDARD);
        let fields: Vec<&str> = text
            .split(['{', ','])
            .skip(1)
            .filter_map(|f| f.split(':').next())
            .map(str::trim)
            .filter(|f| !f.is_empty() && !f.starts_with('}'))
            .collect();
        let names: Vec<&str> = CUTOFFS.iter().map(|c| c.name).collect();
        assert_eq!(fields, names);
    }

    /// Unknown names, non-numbers, non-finite, out-of-range and fractional
    /// counts are refused, naming every cut-off in the help.
    #[test]
    fn bad_settings_are_refused_with_the_names() {
        for bad in [
            "nope=1",
            "possible",
            "possible=x",
            "possible=NaN",
            "possible=inf",
            "possible=1.5",
            "possible=-0.1",
            "blind_move=2.5",
            "decide_w=-1",
        ] {
            let e = Thresholds::with_settings(&[bad]).unwrap_err();
            for c in &CUTOFFS {
                assert!(e.help.contains(c.name), "{bad}: {}", e.help);
            }
        }
        let th = Thresholds::with_settings(&["possible=0.7", " blind_move = 3 "]).unwrap();
        assert_eq!((th.possible, th.blind_move), (0.7, 3));
    }
}
