//! Small declarations the stages' unit tests share.

use crate::audit::decl::{DeclAppliance, Declared};
use crate::contract::{SupplyKind, Wiring, C64};

/// An hour, ms.
pub(super) const H: i64 = 3_600_000;

/// An appliance that is off or draws `s` from line `line` to neutral.
pub(super) fn on_off(id: &str, line: usize, s: C64) -> DeclAppliance {
    on_off_wired(id, Wiring::LineNeutral(line), s)
}

/// An appliance that is off or draws `s` through `wiring`.
pub(super) fn on_off_wired(id: &str, wiring: Wiring, s: C64) -> DeclAppliance {
    use crate::audit::decl::{DeclDraw, Steps};
    use crate::contract::Zip;
    DeclAppliance {
        id: id.into(),
        label: id.into(),
        states: vec![
            vec![],
            vec![DeclDraw {
                wiring,
                s,
                zip_p: Zip::POWER,
                zip_q: Zip::POWER,
                rated_v: None,
            }],
        ],
        steps: Steps::Jumps(vec![(0, 1, 1.0, 1.0), (1, 0, 1.0, 1.0)]),
        habit: None,
    }
}

/// A dishwasher-like program on line `line` to neutral: a pump of
/// `pump_w` (state 1), with a heater of `heater_w` besides (state 2); each
/// of `washes` turns the pump on, the heater on and off `heats` times, and
/// the pump off.
pub(super) fn heater_program(
    line: usize,
    pump_w: f64,
    heater_w: f64,
    washes: usize,
    heats: usize,
) -> DeclAppliance {
    let mut a = on_off("dishwasher", line, C64::new(pump_w, 0.0));
    let pump = a.states[1][0].clone();
    a.states.push(vec![
        pump.clone(),
        crate::audit::decl::DeclDraw {
            s: C64::new(heater_w, 0.0),
            ..pump
        },
    ]);
    let wash = std::iter::once((0, 1, 1.0, 1.0))
        .chain((0..heats).flat_map(|_| [(1, 2, 1.0, 1.0), (2, 1, 1.0, 1.0)]))
        .chain(std::iter::once((1, 0, 1.0, 1.0)));
    let jumps: Vec<crate::audit::decl::Jump> = (0..washes).flat_map(|_| wash.clone()).collect();
    a.steps = crate::audit::decl::Steps::Jumps(jumps);
    a
}

/// A 120/240 V home, a CT on each line as labelled.
pub(super) fn split_phase(appliances: Vec<DeclAppliance>) -> Declared {
    home(SupplyKind::SplitPhase, 120.0, appliances)
}

/// A 230/400 V three-phase home, a CT on each line as labelled.
pub(super) fn three_phase(appliances: Vec<DeclAppliance>) -> Declared {
    home(SupplyKind::ThreePhase, 230.0, appliances)
}

/// A home of `kind` at `voltage_v` line to neutral, a CT on each line as
/// labelled.
fn home(kind: SupplyKind, voltage_v: f64, appliances: Vec<DeclAppliance>) -> Declared {
    use crate::audit::decl::{DeclChannel, Supply};
    Declared {
        file: "t.toml".into(),
        supply_at: "t.toml:1:1".into(),
        supply: Supply {
            kind,
            voltage_v,
            service_a: 200.0,
        },
        channels: (0..kind.lines())
            .map(|c| DeclChannel {
                conductor: Some(c),
                reversed: false,
            })
            .collect(),
        appliances,
        partial: false,
        real_only: false,
        timezone: "UTC".into(),
        generation: vec![],
    }
}

/// A day of 1 s rows on `lines` channels, each reading `mean_w` on
/// average and never negative, for the metering checks.
pub(super) fn day_stats(lines: usize, mean_w: f64) -> Vec<crate::audit::events::ChannelStats> {
    vec![
        crate::audit::events::ChannelStats {
            rows: 86_400,
            null: 0,
            zero: 0,
            sum_p: mean_w * 86_400.0,
            negative: vec![[0, 86_400]; lines],
            ..Default::default()
        };
        lines
    ]
}

/// The subjects of an outcome's findings, then its possible ones.
pub(super) fn listed(o: &super::Outcome) -> Vec<&str> {
    o.findings
        .iter()
        .chain(&o.possible)
        .map(|f| f.subject.as_str())
        .collect()
}
