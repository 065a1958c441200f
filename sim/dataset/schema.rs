//! The dataset contract (`loadloom-dataset/1`), declared once: the columns of
//! each table with their unit (names from `solver_check::contract::columns`). Parquet and CSV writers both follow it.

use crate::scenario::Scenario;
use arrow_schema::{DataType, Field, Schema, TimeUnit};
use solver_check::contract::{columns, line_name};
use std::collections::HashMap;
use std::sync::Arc;

/// How a column's values are stored.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum ColKind {
    /// Instant in ms since 1970-01-01 UTC, with the home's time zone attached.
    Time,
    /// 32-bit float (readings and truth powers).
    F32,
    /// 64-bit float (energy registers and event energies: sums that keep
    /// growing over the run).
    F64,
    /// Dictionary-encoded string (state names, appliance ids).
    Dict,
    /// Plain string.
    Str,
}

/// One column of the contract: its name, unit and storage.
#[derive(Clone, Debug)]
pub struct Col {
    /// The column's name (`l1_p_w`, `fridge_p_w`, …).
    pub name: String,
    /// Its unit as written in the manifest (`W`, `var`, `V`, `A`, `Wh`; empty for none).
    pub unit: &'static str,
    /// How its values are stored.
    pub kind: ColKind,
    /// Meter readings may be null (dropouts, a line without CT).
    pub nullable: bool,
}

fn col(name: impl Into<String>, unit: &'static str, kind: ColKind) -> Col {
    Col {
        name: name.into(),
        unit,
        kind,
        nullable: false,
    }
}

fn reading(name: impl Into<String>, unit: &'static str, kind: ColKind) -> Col {
    Col {
        name: name.into(),
        unit,
        kind,
        nullable: true,
    }
}

/// The shape of a dataset's tables.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Form {
    /// One home on its own: times in the home's zone, the home's own lines,
    /// truth wide (columns per appliance).
    Single,
    /// A home of a fleet: one schema for every home of every fleet, so a
    /// folder of homes reads as one table. Times in UTC (the zone is in
    /// `homes.parquet`), columns for all three lines (null where the home
    /// has no such line), truth long (a row per interval and appliance).
    Fleet,
}

/// Lines of every fleet table: the most any supply has.
pub const FLEET_LINES: usize = 3;

impl Form {
    /// The time zone attached to the tables' times.
    pub fn timezone(self, s: &Scenario) -> &str {
        match self {
            Form::Single => &s.home.timezone,
            Form::Fleet => "UTC",
        }
    }

    /// How many lines the meters table has columns for.
    pub fn lines(self, s: &Scenario) -> usize {
        match self {
            Form::Single => s.home.supply.lines(),
            Form::Fleet => FLEET_LINES,
        }
    }
}

/// The production channel's column (`[meter] production = true`): the PV
/// inverter's output as its own CT reads it, W, positive while it produces.
pub const PRODUCTION_P: &str = "production_p_w";

/// `meters`: one row per reporting interval; columns for `lines` lines
/// (those the home lacks are null).
pub fn meters(s: &Scenario, lines: usize) -> Vec<Col> {
    let mut c = vec![col(columns::TIME, "ms", ColKind::Time)];
    for x in 0..lines {
        let l = line_name(x);
        c.push(reading(columns::p(&l), "W", ColKind::F32));
        c.push(reading(columns::q(&l), "var", ColKind::F32));
        c.push(reading(columns::v(&l), "V", ColKind::F32));
        c.push(reading(columns::i(&l), "A", ColKind::F32));
    }
    c.push(reading(columns::NEUTRAL_I, "A", ColKind::F32));
    c.push(reading(columns::TOTAL_P, "W", ColKind::F32));
    c.push(reading(columns::TOTAL_Q, "var", ColKind::F32));
    if s.meter.production {
        c.push(reading(PRODUCTION_P, "W", ColKind::F32));
    }
    if s.faults.register {
        for x in 0..lines {
            c.push(reading(columns::energy(&line_name(x)), "Wh", ColKind::F64));
        }
    }
    c
}

/// `truth`: the same rows as `meters`, exact (no meter noise).
pub fn truth(s: &Scenario) -> Vec<Col> {
    let mut c = vec![col(columns::TIME, "ms", ColKind::Time)];
    for a in &s.appliances {
        c.push(col(columns::p(&a.id), "W", ColKind::F32));
        c.push(col(columns::q(&a.id), "var", ColKind::F32));
        c.push(col(columns::state(&a.id), "", ColKind::Dict));
        for x in a.lines() {
            let on_line = columns::on_line(&a.id, &line_name(x));
            c.push(col(columns::p(&on_line), "W", ColKind::F32));
        }
        if a.role == crate::scenario::Role::Storage {
            c.push(col(format!("{}_soc", a.id), "1", ColKind::F32));
        }
    }
    c.push(col(columns::UNMETERED_P, "W", ColKind::F32));
    c
}

/// `truth` of a fleet home, long: one row per reporting interval and
/// appliance; a line's power is null where the appliance draws nothing
/// from it (or the home has no such line).
pub fn truth_long() -> Vec<Col> {
    let mut c = vec![
        col(columns::TIME, "ms", ColKind::Time),
        col("appliance", "", ColKind::Dict),
        col("p_w", "W", ColKind::F32),
        col("q_var", "var", ColKind::F32),
        col("state", "", ColKind::Dict),
    ];
    for x in 0..FLEET_LINES {
        c.push(reading(columns::p(&line_name(x)), "W", ColKind::F32));
    }
    c
}

/// `events`: one row per state segment of each appliance.
pub fn events() -> Vec<Col> {
    vec![
        col("appliance", "", ColKind::Dict),
        col("state", "", ColKind::Str),
        col("start", "ms", ColKind::Time),
        col("end", "ms", ColKind::Time),
        col("mean_p_w", "W", ColKind::F64),
        col("energy_wh", "Wh", ColKind::F64),
    ]
}

/// The Arrow schema of a table; each field carries its `unit` in metadata.
pub fn arrow_schema(cols: &[Col], timezone: &str) -> Arc<Schema> {
    let fields: Vec<Field> = cols
        .iter()
        .map(|c| {
            let dt = match c.kind {
                ColKind::Time => DataType::Timestamp(TimeUnit::Millisecond, Some(timezone.into())),
                ColKind::F32 => DataType::Float32,
                ColKind::F64 => DataType::Float64,
                ColKind::Dict => {
                    DataType::Dictionary(Box::new(DataType::Int16), Box::new(DataType::Utf8))
                }
                ColKind::Str => DataType::Utf8,
            };
            Field::new(&c.name, dt, c.nullable)
                .with_metadata(HashMap::from([("unit".to_string(), c.unit.to_string())]))
        })
        .collect();
    Arc::new(Schema::new(fields))
}
