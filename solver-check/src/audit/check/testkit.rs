//! Small declarations the stages' unit tests share.

use crate::audit::decl::{DeclAppliance, Declared};
use crate::contract::{Wiring, C64};

/// An hour, ms.
pub(super) const H: i64 = 3_600_000;

/// An appliance that is off or draws `s` from line `line` to neutral.
pub(super) fn on_off(id: &str, line: usize, s: C64) -> DeclAppliance {
    use crate::audit::decl::{DeclDraw, Steps};
    use crate::contract::Zip;
    DeclAppliance {
        id: id.into(),
        label: id.into(),
        states: vec![
            vec![],
            vec![DeclDraw {
                wiring: Wiring::LineNeutral(line),
                s,
                zip_p: Zip::POWER,
                zip_q: Zip::POWER,
                rated_v: None,
            }],
        ],
        steps: Steps::Jumps(vec![(0, 1, 1.0, 1.0), (1, 0, 1.0, 1.0)]),
    }
}

/// A 120/240 V home, a CT on each line as labelled.
pub(super) fn split_phase(appliances: Vec<DeclAppliance>) -> Declared {
    use crate::audit::decl::{DeclChannel, Supply};
    Declared {
        file: "t.toml".into(),
        supply_at: "t.toml:1:1".into(),
        supply: Supply {
            kind: crate::contract::SupplyKind::SplitPhase,
            voltage_v: 120.0,
            service_a: 200.0,
        },
        channels: vec![
            DeclChannel {
                conductor: Some(0),
                reversed: false,
            },
            DeclChannel {
                conductor: Some(1),
                reversed: false,
            },
        ],
        appliances,
        partial: false,
        real_only: false,
        timezone: "UTC".into(),
    }
}
