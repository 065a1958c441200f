//! Supplies, the ways a load is wired to them, and how a load's power
//! shows on each line: the physics vocabulary the simulator and the audit
//! share.

use super::complex::C64;
use super::line_label;
use serde::Serialize;

/// The kind of supply a home has.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum SupplyKind {
    /// Two legs 180° apart around a neutral (120/240 V).
    SplitPhase,
    /// Three lines 120° apart around a neutral (a wye: 230/400 V, 120/208 V).
    ThreePhase,
    /// One line and a neutral.
    SinglePhase,
}

impl SupplyKind {
    /// How many lines (conductors besides the neutral) it has.
    pub fn lines(self) -> usize {
        match self {
            SupplyKind::SplitPhase => 2,
            SupplyKind::ThreePhase => 3,
            SupplyKind::SinglePhase => 1,
        }
    }

    /// Its name in scenarios, manifests and reports.
    pub fn name(self) -> &'static str {
        match self {
            SupplyKind::SplitPhase => "split-phase",
            SupplyKind::ThreePhase => "three-phase",
            SupplyKind::SinglePhase => "single-phase",
        }
    }

    /// Line-to-neutral phase angles in degrees.
    /// Split-phase legs are 180° apart (ANSI C84.1, common practice); a wye
    /// supply has L2 at −120° and L3 at +120° (positive sequence L1-L2-L3).
    pub fn angles_deg(self) -> &'static [f64] {
        match self {
            SupplyKind::SplitPhase => &[0.0, 180.0],
            SupplyKind::ThreePhase => &[0.0, -120.0, 120.0],
            SupplyKind::SinglePhase => &[0.0],
        }
    }

    /// Unit phasor of line `x`'s voltage to neutral.
    pub fn unit(self, x: usize) -> C64 {
        self.unit_table()[x]
    }

    /// Unit phasors of its lines' voltages to neutral (nominal, balanced).
    pub fn units(self) -> Vec<C64> {
        self.unit_table().to_vec()
    }

    /// The unit phasors of [`SupplyKind::angles_deg`], each computed once
    /// (the audit asks for them for every step it weighs; a sine and a
    /// cosine each time were a fifth of its work), the very values
    /// `C64::polar_deg` gives.
    fn unit_table(self) -> &'static [C64] {
        use std::sync::OnceLock;
        static TABLES: [OnceLock<Vec<C64>>; 3] =
            [OnceLock::new(), OnceLock::new(), OnceLock::new()];
        let k = match self {
            SupplyKind::SplitPhase => 0,
            SupplyKind::ThreePhase => 1,
            SupplyKind::SinglePhase => 2,
        };
        TABLES[k].get_or_init(|| {
            self.angles_deg()
                .iter()
                .map(|&a| C64::polar_deg(1.0, a))
                .collect()
        })
    }

    /// How a draw of complex power `s` on `w` shows on each line's meter
    /// channel at nominal, balanced voltage ([`Wiring::add_line_split`] at
    /// the unit phasors [`SupplyKind::units`]): all on its line to neutral;
    /// the equal split s/2 + s/2 between the legs of a split-phase supply,
    /// s/√3 · e^{∓j30°} between two lines of a wye (the two-wattmeter
    /// relation); a balanced three-phase load s/3 per line.
    pub fn split(self, w: Wiring, s: C64) -> Vec<C64> {
        let mut out = vec![C64::ZERO; self.lines()];
        w.add_line_split(self.unit_table(), s, &mut out);
        out
    }
}

/// Where a load is connected: one line to neutral, two lines, or all three.
///
/// Line-to-line pairs are kept in one orientation (see
/// [`Wiring::line_line`]), so two values for the same connection compare
/// equal and print the same name.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum Wiring {
    /// Line `x` (0-based) to neutral.
    LineNeutral(usize),
    /// Between two lines (0-based), in the orientation of
    /// [`Wiring::line_line`].
    LineLine(usize, usize),
    /// All three lines, as a balanced load.
    ThreePhase,
}

/// Why a wiring's text was refused by [`Wiring::parse`].
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum WiringError {
    /// Not of the form `L1-N`, `L1-L2` or `3P`.
    NotAWiring,
    /// Both ends are the same terminal.
    SelfConnection,
    /// A line (0-based) the supply does not have.
    NoSuchLine(usize),
    /// `3P` on a supply without three lines.
    NotThreePhase,
}

impl Wiring {
    /// The connection between lines `a` and `b` (0-based, different) of a
    /// supply of `lines` lines, in its one orientation: the cyclic order
    /// L1-L2, L2-L3, L3-L1 on three lines, L1-L2 on two.
    pub fn line_line(a: usize, b: usize, lines: usize) -> Wiring {
        let in_order = if lines == 3 { (a + 1) % 3 == b } else { a < b };
        if in_order {
            Wiring::LineLine(a, b)
        } else {
            Wiring::LineLine(b, a)
        }
    }

    /// Reads a wiring as scenarios and declarations write it (`L1-N`,
    /// `N-L2`, `L2-L3`, `L3-L1` in either order, `3P`) on a supply of
    /// `lines` lines.
    pub fn parse(text: &str, lines: usize) -> Result<Wiring, WiringError> {
        if text == "3P" {
            return if lines == 3 {
                Ok(Wiring::ThreePhase)
            } else {
                Err(WiringError::NotThreePhase)
            };
        }
        // A terminal: Some(line) or None for the neutral.
        let term = |s: &str| match s {
            "N" => Some(None),
            "L1" => Some(Some(0)),
            "L2" => Some(Some(1)),
            "L3" => Some(Some(2)),
            _ => None,
        };
        let (Some((a, b)), true) = (text.split_once('-'), text.matches('-').count() == 1) else {
            return Err(WiringError::NotAWiring);
        };
        let (Some(a), Some(b)) = (term(a), term(b)) else {
            return Err(WiringError::NotAWiring);
        };
        if a == b {
            return Err(WiringError::SelfConnection);
        }
        if let Some(x) = [a, b].into_iter().flatten().find(|&x| x >= lines) {
            return Err(WiringError::NoSuchLine(x));
        }
        match (a, b) {
            (Some(x), Some(y)) => Ok(Wiring::line_line(x, y, lines)),
            (Some(x), None) | (None, Some(x)) => Ok(Wiring::LineNeutral(x)),
            (None, None) => Err(WiringError::SelfConnection),
        }
    }

    /// Its name: `L1-N`, `L3-L1`, `3P`.
    pub fn name(self) -> String {
        match self {
            Wiring::LineNeutral(a) => format!("{}-N", line_label(a)),
            Wiring::LineLine(a, b) => format!("{}-{}", line_label(a), line_label(b)),
            Wiring::ThreePhase => "3P".into(),
        }
    }

    /// Whether it sits between two lines (not three-phase, not to neutral).
    pub fn is_line_to_line(self) -> bool {
        matches!(self, Wiring::LineLine(..))
    }

    /// The lines (0-based) it takes current from, on a supply of `n` lines.
    pub fn lines(self, n: usize) -> Vec<usize> {
        match self {
            Wiring::LineNeutral(a) => vec![a],
            Wiring::LineLine(a, b) => vec![a, b],
            Wiring::ThreePhase => (0..n).collect(),
        }
    }

    /// Every connection a supply of `n` lines offers.
    pub fn all(n: usize) -> Vec<Wiring> {
        let mut v: Vec<Wiring> = (0..n).map(Wiring::LineNeutral).collect();
        for a in 0..n {
            for b in a + 1..n {
                v.push(Wiring::line_line(a, b, n));
            }
        }
        if n == 3 {
            v.push(Wiring::ThreePhase);
        }
        v
    }

    /// The same connection with its lines renamed by `perm` (line x →
    /// perm\[x\]; `perm` covers every line of the supply).
    pub fn permuted(self, perm: &[usize]) -> Wiring {
        match self {
            Wiring::LineNeutral(a) => Wiring::LineNeutral(perm[a]),
            Wiring::LineLine(a, b) => Wiring::line_line(perm[a], perm[b], perm.len()),
            Wiring::ThreePhase => Wiring::ThreePhase,
        }
    }

    /// Adds to `out` (one entry per line) what a draw of complex power `s`
    /// on this connection shows on each line's meter channel, S_x = V_x ·
    /// conj(I_x), when the lines stand at the line-to-neutral phasors `e`
    /// (the same phasors for every draw: no voltage drop). A draw between
    /// terminals a and b takes I = conj(s / (V_a − V_b)), which leaves by a
    /// and returns by b, so S_a = s · V_a / (V_a − V_b) and S_b = −s · V_b /
    /// (V_a − V_b); to neutral V_b = 0 and S_a = s. At a balanced wye these
    /// are the two wattmeters' readings (Blondel's theorem; any textbook on
    /// three-phase power measurement). A three-phase load is its delta
    /// equivalent: a third of `s` between each pair L1-L2, L2-L3, L3-L1, as
    /// the simulator's network holds it.
    ///
    /// One arithmetic for every caller (the manifest's per-conductor
    /// figures, the difficulty card, `validate`, the audit's expected
    /// steps), so they agree to the last bit at the same phasors.
    pub fn add_line_split(self, e: &[C64], s: C64, out: &mut [C64]) {
        // `None` is the neutral, at zero potential against itself.
        let mut between = |a: Option<usize>, b: Option<usize>, s: C64| {
            let (ua, ub) = (a.map_or(C64::ZERO, |x| e[x]), b.map_or(C64::ZERO, |x| e[x]));
            let k = s / (ua - ub);
            if let Some(a) = a {
                out[a] += ua * k;
            }
            if let Some(b) = b {
                out[b] += -(ub * k);
            }
        };
        match self {
            Wiring::LineNeutral(x) => between(Some(x), None, s),
            Wiring::LineLine(a, b) => between(Some(a), Some(b), s),
            Wiring::ThreePhase => {
                for (a, b) in [(0, 1), (1, 2), (2, 0)] {
                    between(Some(a), Some(b), s.scale(1.0 / 3.0));
                }
            }
        }
    }

    /// The name of the same connection with its lines renamed by `perm`
    /// (line x → perm\[x\]), its two ends in the order they have here:
    /// `L1-L2` under the swap of L2 and L3 is `L1-L3`, where
    /// [`Wiring::permuted`] would name the one orientation, `L3-L1`. Both
    /// read back as the same connection; this one keeps a rewritten text
    /// line for line like the text it came from.
    pub fn permuted_name(self, perm: &[usize]) -> String {
        match self {
            Wiring::LineLine(a, b) => format!("{}-{}", line_label(perm[a]), line_label(perm[b])),
            w => w.permuted(perm).name(),
        }
    }

    /// Nominal voltage across it on a `kind` supply of line-to-neutral
    /// voltage `v_ln`: V_LN to neutral; between two lines 2·V_LN on
    /// split-phase and √3·V_LN on a wye supply (IEC 60038, ANSI C84.1); a
    /// three-phase load as its delta equivalent, line to line.
    pub fn nominal_v(self, kind: SupplyKind, v_ln: f64) -> f64 {
        match self {
            Wiring::ThreePhase => v_ln * 3f64.sqrt(),
            Wiring::LineNeutral(_) => v_ln,
            Wiring::LineLine(..) => match kind {
                SupplyKind::SplitPhase => 2.0 * v_ln,
                _ => v_ln * 3f64.sqrt(),
            },
        }
    }
}

impl Serialize for Wiring {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        s.serialize_str(&self.name())
    }
}

/// How a load's power follows its voltage: constant impedance, current and
/// power fractions (ZIP model, Bokhari et al., IEEE Trans. Power Delivery
/// 29(3), 2014): P(V) = P0 · (z·(V/V0)² + i·(V/V0) + p), with z + i + p = 1.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct Zip {
    /// Constant-impedance fraction.
    pub z: f64,
    /// Constant-current fraction.
    pub i: f64,
    /// Constant-power fraction.
    pub p: f64,
}

impl Zip {
    /// Constant power: no dependence on voltage.
    pub const POWER: Zip = Zip {
        z: 0.0,
        i: 0.0,
        p: 1.0,
    };

    /// The power at `u` times the nominal voltage, as a multiple of the
    /// nominal power.
    pub fn factor(&self, u: f64) -> f64 {
        self.z * u * u + self.i * u + self.p
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Either order of a line pair is the one connection, named in the
    /// cyclic order on three lines (common practice, no source).
    #[test]
    fn a_line_pair_has_one_orientation_and_one_name() {
        for (text, name) in [("L1-L3", "L3-L1"), ("L3-L1", "L3-L1"), ("L2-L1", "L1-L2")] {
            let w = Wiring::parse(text, 3).unwrap();
            assert_eq!(w.name(), name);
        }
        assert_eq!(Wiring::parse("L2-L1", 2).unwrap(), Wiring::LineLine(0, 1));
        assert_eq!(Wiring::parse("N-L2", 2).unwrap(), Wiring::LineNeutral(1));
        assert_eq!(Wiring::parse("L3-N", 2), Err(WiringError::NoSuchLine(2)));
        assert_eq!(Wiring::parse("3P", 2), Err(WiringError::NotThreePhase));
        assert_eq!(Wiring::parse("N-N", 3), Err(WiringError::SelfConnection));
        assert_eq!(Wiring::parse("L1-L2-L3", 3), Err(WiringError::NotAWiring));
        let all = Wiring::all(3);
        assert_eq!(all.len(), 7);
        assert!(all.contains(&Wiring::parse("L1-L3", 3).unwrap()));
        assert_eq!(
            Wiring::LineLine(0, 1).permuted(&[1, 2, 0]),
            Wiring::parse("L2-L3", 3).unwrap()
        );
        let swap23 = [0, 2, 1];
        assert_eq!(Wiring::LineLine(0, 1).permuted_name(&swap23), "L1-L3");
        assert_eq!(Wiring::LineLine(0, 1).permuted(&swap23).name(), "L3-L1");
        assert_eq!(Wiring::LineNeutral(1).permuted_name(&swap23), "L3-N");
        assert_eq!(Wiring::ThreePhase.permuted_name(&swap23), "3P");
    }

    /// Whatever the line voltages, the channels' readings of a draw add up
    /// to its power (Tellegen's theorem: Σ V_x·conj(I_x) = Σ S over the
    /// loads); at balanced nominal phasors a three-phase load reads a third
    /// per line and a load between the legs of a split-phase supply half
    /// per leg (textbook relations, common practice).
    #[test]
    fn the_line_split_keeps_the_power_at_any_voltages() {
        let s = C64::new(3000.0, -1200.0);
        let skewed = [
            C64::polar_deg(231.0, 1.0),
            C64::polar_deg(226.0, -118.0),
            C64::polar_deg(229.0, 121.5),
        ];
        for w in Wiring::all(3) {
            let mut out = [C64::ZERO; 3];
            w.add_line_split(&skewed, s, &mut out);
            let sum = out[0] + out[1] + out[2];
            assert!((sum - s).abs() < 1e-9, "{} {sum:?}", w.name());
        }
        for x in SupplyKind::ThreePhase.split(Wiring::ThreePhase, s) {
            assert!((x - s.scale(1.0 / 3.0)).abs() < 1e-9);
        }
        let legs = SupplyKind::SplitPhase.split(Wiring::LineLine(0, 1), s);
        assert!(legs.iter().all(|x| (*x - s.scale(0.5)).abs() < 1e-9));
        assert_eq!(
            SupplyKind::SplitPhase.split(Wiring::LineNeutral(1), s)[0],
            C64::ZERO
        );
    }
}
