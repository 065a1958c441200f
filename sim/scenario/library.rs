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

templates!();

/// The text of a built-in template.
pub fn builtin(name: &str) -> Option<&'static str> {
    TEMPLATES.iter().find(|(n, _)| *n == name).map(|(_, t)| *t)
}

/// Names of the built-in templates.
pub fn names() -> Vec<&'static str> {
    TEMPLATES.iter().map(|(n, _)| *n).collect()
}
