//! The appliance library of `scenarios/library/`, built into the binary so a
//! scenario anywhere on disk can use `template = "..."`. A file of the same
//! name beside the scenario (in `library/`) takes precedence.

macro_rules! templates {
    ($($name:literal),* $(,)?) => {
        const TEMPLATES: &[(&str, &str)] = &[
            $(($name, include_str!(concat!("../../scenarios/library/", $name, ".toml")))),*
        ];
    };
}

templates!(
    "baseboard_heater",
    "clothes_dryer",
    "coffee_maker",
    "computer",
    "dehumidifier",
    "dishwasher",
    "electric_range",
    "ev_charger",
    "freezer",
    "fridge",
    "furnace_blower",
    "game_console",
    "hair_dryer",
    "heat_pump",
    "heat_pump_water_heater",
    "induction_hob",
    "kettle",
    "led_lighting",
    "microwave",
    "router",
    "standby",
    "sump_pump",
    "tv",
    "washing_machine",
    "water_heater"
);

/// The text of a built-in template.
pub fn builtin(name: &str) -> Option<&'static str> {
    TEMPLATES.iter().find(|(n, _)| *n == name).map(|(_, t)| *t)
}

/// Names of the built-in templates.
pub fn names() -> Vec<&'static str> {
    TEMPLATES.iter().map(|(n, _)| *n).collect()
}
