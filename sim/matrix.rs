//! `audit --matrix` across measuring variants: which variants were asked
//! for, the homes read from a folder of scenarios, every variant's cases
//! run and compared with the first variant's, and the report.

use crate::audit::{
    differ_only_where_undecidable, run_matrix, same_findings, score, Case, MatrixOptions,
    MatrixScore, VARIANTS,
};
use crate::scenario::{self, Scenario};
use serde_json::{json, Value};
use solver_check::render::Render;
use std::path::{Path, PathBuf};

/// The command-line names of [`VARIANTS`], in their order.
pub const VARIANT_KEYS: [&str; 5] = ["1s", "10s", "noise", "dropouts", "background"];

/// Indices into [`VARIANTS`] of `--variant` values (`all` for every one).
pub fn parse_variants(values: &[String]) -> Result<Vec<usize>, scenario::Error> {
    let mut chosen = Vec::new();
    for v in values {
        if v == "all" {
            chosen.extend(0..VARIANTS.len());
        } else if let Some(i) = VARIANT_KEYS.iter().position(|k| k == v) {
            chosen.push(i);
        } else {
            return Err(scenario::Error::option(
                &format!("--variant {v}"),
                "unknown variant",
                format!("write one of {}, or all", VARIANT_KEYS.join(", ")),
            ));
        }
    }
    Ok(chosen)
}

/// The `*.toml` scenarios of a folder, sorted by path.
pub fn scenario_files(dir: &Path) -> std::io::Result<Vec<PathBuf>> {
    let mut files: Vec<PathBuf> = std::fs::read_dir(dir)?
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| p.extension().is_some_and(|x| x == "toml"))
        .collect();
    files.sort();
    Ok(files)
}

/// Each file loaded, named by its stem.
pub fn load_homes(files: &[PathBuf]) -> Result<Vec<(String, Scenario)>, scenario::Error> {
    files
        .iter()
        .map(|f| {
            let name = f
                .file_stem()
                .map(|n| n.to_string_lossy().to_string())
                .unwrap_or_default();
            Ok((name, scenario::load(f)?))
        })
        .collect()
}

/// One variant's cases and scores, compared with the first variant's.
pub struct VariantRun {
    /// The variant's name (`VARIANTS[i].name`).
    pub name: &'static str,
    /// Every case of the matrix under this variant.
    pub cases: Vec<Case>,
    /// Recall and precision per kind.
    pub score: MatrixScore,
    /// Cases whose findings equal the first variant's (None for the first).
    pub same: Option<usize>,
    /// Cases that differ from the first variant's only where one of the
    /// two calls the subject undecidable, plus `same`.
    pub agree: Option<usize>,
}

/// The matrix under every chosen variant.
pub struct MatrixReport {
    /// One entry per chosen variant, in the order asked.
    pub runs: Vec<VariantRun>,
}

/// Runs the matrix on `homes` under each chosen variant; `progress` hears
/// each step, prefixed with the variant's name.
pub fn run_variants(
    homes: &[(String, Scenario)],
    opts: &MatrixOptions,
    chosen: &[usize],
    progress: &mut dyn FnMut(String),
) -> MatrixReport {
    let mut runs: Vec<VariantRun> = Vec::new();
    for &i in chosen {
        let v = &VARIANTS[i];
        let cases = run_matrix(homes, opts, v, &mut |m| {
            progress(format!("{}: {m}", v.name))
        });
        let base = runs.first().map(|r| &r.cases);
        let count = |f: fn(&Case, &Case) -> bool| {
            base.map(|b| b.iter().zip(&cases).filter(|(a, c)| f(a, c)).count())
        };
        let same = count(|a, c| same_findings(&a.found, &c.found));
        let agree = count(differ_only_where_undecidable);
        runs.push(VariantRun {
            name: v.name,
            score: score(&cases),
            cases,
            same,
            agree,
        });
    }
    MatrixReport { runs }
}

/// Every case of a run: what was injected, what was found, and why.
fn case_list(cases: &[Case]) -> Value {
    json!(cases.iter().map(|c| json!({
        "scenario": c.scenario, "case": c.name,
        "injected": c.mistakes.iter().map(|m| format!("{} {}", m.kind, m.subject)).collect::<Vec<_>>(),
        "found": c.found.iter().map(|f| format!("{} {}", f.0, f.1)).collect::<Vec<_>>(),
        "undecidable": c.undecidable, "not_exercised": c.unexercised,
        "appliances": c.why,
    })).collect::<Vec<_>>())
}

impl Render for MatrixReport {
    /// Markdown tables per variant (the text form is the same Markdown).
    fn to_text(&self) -> String {
        let mut o = String::new();
        for r in &self.runs {
            o += &r.score.to_markdown(r.name);
            if let (Some(n), Some(a)) = (r.same, r.agree) {
                o += &format!("\nCases whose findings equal those of the first variant: {n} of {}; differing only where one of the two calls the subject undecidable: {}.\n", r.cases.len(), a - n);
            }
            o += "\n";
        }
        o
    }
    fn to_json(&self) -> Value {
        Value::Array(
            self.runs
                .iter()
                .map(|r| {
                    let mut j = r.score.to_json(r.name);
                    j["cases_with_findings_as_first_variant"] = json!(r.same);
                    j["cases_differing_from_first_variant_only_where_undecidable"] =
                        json!(r.agree.zip(r.same).map(|(a, s)| a - s));
                    j["case_list"] = case_list(&r.cases);
                    j
                })
                .collect(),
        )
    }
}
