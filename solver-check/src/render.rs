//! One way to print a report: every command's result (a score, a
//! comparison, a leaderboard, an audit, a run summary) implements [`Render`],
//! and the command line picks the [`ReportForm`] the user asked for.

use serde_json::Value;

/// The form a report is printed in.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ReportForm {
    /// Aligned columns for a terminal.
    Text,
    /// Markdown tables, for pasting into documents and issues.
    Markdown,
    /// Pretty-printed JSON (each report names its format, e.g. `loadloom-score/1`).
    Json,
}

impl ReportForm {
    /// The form chosen by a command's `--json` and `--markdown` flags
    /// (`--json` wins; clap already refuses both at once).
    pub fn from_flags(json: bool, markdown: bool) -> ReportForm {
        if json {
            ReportForm::Json
        } else if markdown {
            ReportForm::Markdown
        } else {
            ReportForm::Text
        }
    }
}

/// A report that can be printed as text, Markdown or JSON.
pub trait Render {
    /// The terminal form.
    fn to_text(&self) -> String;
    /// The Markdown form; a report with no tables worth a Markdown form
    /// prints its text.
    fn to_markdown(&self) -> String {
        self.to_text()
    }
    /// The JSON form (a contract: fields are added, never renamed).
    fn to_json(&self) -> Value;

    /// The report in `form`, ready to print (JSON ends with a newline like
    /// the other forms).
    fn render(&self, form: ReportForm) -> String {
        match form {
            ReportForm::Text => self.to_text(),
            ReportForm::Markdown => self.to_markdown(),
            ReportForm::Json => {
                let mut s = serde_json::to_string_pretty(&self.to_json())
                    .expect("a serde_json::Value always serializes");
                s.push('\n');
                s
            }
        }
    }
}

/// Columns padded to their widest cell (in characters), two spaces apart;
/// the first `left` columns left-aligned (names), the rest right-aligned
/// (numbers). The text form of every report table.
pub fn aligned<H: AsRef<str>, R: AsRef<[String]>>(head: &[H], rows: &[R], left: usize) -> String {
    aligned_by(head, rows, &|k| k < left)
}

/// [`aligned`] with the columns for which `is_left` holds left-aligned
/// (words, wherever they stand), the others right-aligned.
pub fn aligned_by<H: AsRef<str>, R: AsRef<[String]>>(
    head: &[H],
    rows: &[R],
    is_left: &dyn Fn(usize) -> bool,
) -> String {
    let w: Vec<usize> = (0..head.len())
        .map(|k| {
            rows.iter()
                .map(|r| r.as_ref()[k].chars().count())
                .chain([head[k].as_ref().chars().count()])
                .max()
                .unwrap_or(0)
        })
        .collect();
    let line = |r: &mut dyn Iterator<Item = &str>| {
        r.enumerate()
            .map(|(k, s)| match is_left(k) {
                true => format!("{s:<w$}", w = w[k]),
                false => format!("{s:>w$}", w = w[k]),
            })
            .collect::<Vec<_>>()
            .join("  ")
            + "\n"
    };
    let mut out = line(&mut head.iter().map(AsRef::as_ref));
    for r in rows {
        out += &line(&mut r.as_ref().iter().map(String::as_str));
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    struct Two;
    impl Render for Two {
        fn to_text(&self) -> String {
            "two\n".into()
        }
        fn to_json(&self) -> Value {
            serde_json::json!({ "n": 2 })
        }
    }

    #[test]
    fn forms_follow_the_flags() {
        assert_eq!(ReportForm::from_flags(true, false), ReportForm::Json);
        assert_eq!(ReportForm::from_flags(false, true), ReportForm::Markdown);
        assert_eq!(ReportForm::from_flags(false, false), ReportForm::Text);
        assert_eq!(Two.render(ReportForm::Markdown), "two\n");
        assert_eq!(Two.render(ReportForm::Json), "{\n  \"n\": 2\n}\n");
    }

    #[test]
    fn columns_are_padded_names_left_numbers_right() {
        let rows = vec![vec!["fridge".to_string(), "1.5".to_string()]];
        let text = aligned(&["appliance", "MAE W"], &rows, 1);
        assert_eq!(text, "appliance  MAE W\nfridge       1.5\n");
        let rows = vec![vec!["a".to_string(), "12".to_string(), "ok".to_string()]];
        let text = aligned_by(&["id", "n", "verdict"], &rows, &|k| k != 1);
        assert_eq!(text, "id   n  verdict\na   12  ok     \n");
    }
}
