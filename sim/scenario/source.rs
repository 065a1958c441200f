//! The scenario text as a tree of values that remember where they were written,
//! and the constructor of the error ([`solver_check::diagnostic::Error`]) that
//! points back at that place (file:line:column, key path, the offending text
//! underlined, and what would be accepted).

use std::io::Read;
use std::ops::Range;
use std::path::{Path, PathBuf};

/// The files read for one scenario: the scenario itself and any templates.
#[derive(Default)]
pub struct Sources {
    files: Vec<(PathBuf, String)>,
}

impl Sources {
    pub fn add(&mut self, path: &Path, text: String) -> usize {
        self.files.push((path.to_path_buf(), text));
        self.files.len() - 1
    }
    pub fn path(&self, file: usize) -> &Path {
        &self.files[file].0
    }
    pub fn text(&self, file: usize) -> &str {
        &self.files[file].1
    }
}

/// Where a value was written: a file index into [`Sources`] and a byte range.
#[derive(Clone, Debug, Default)]
pub struct Src {
    pub file: usize,
    pub span: Range<usize>,
}

#[derive(Clone, Debug)]
pub enum Val {
    Str(String),
    Int(i64),
    Float(f64),
    Bool(bool),
    /// A TOML date-time, kept as its text.
    Date(String),
    Arr(Vec<Node>),
    Table(Vec<Entry>),
}

#[derive(Clone, Debug)]
pub struct Node {
    pub v: Val,
    pub src: Src,
}

#[derive(Clone, Debug)]
pub struct Entry {
    pub key: String,
    pub key_src: Src,
    pub node: Node,
}

impl Node {
    pub fn type_name(&self) -> &'static str {
        match self.v {
            Val::Str(_) => "a string",
            Val::Int(_) => "an integer",
            Val::Float(_) => "a number",
            Val::Bool(_) => "true/false",
            Val::Date(_) => "a date-time",
            Val::Arr(_) => "an array",
            Val::Table(_) => "a table",
        }
    }
}

/// The largest scenario, template or population file read, in bytes: the
/// demo scenarios are under 20 kB; a file a thousand times larger is not a
/// home description, and reading it would only delay the error.
pub const MAX_SOURCE_BYTES: u64 = 4 << 20;

/// Reads a scenario, template or population file (`what` names it in errors):
/// a regular file (a FIFO or device would block or never end), at most
/// [`MAX_SOURCE_BYTES`], in UTF-8 (a bad byte is reported with its line and
/// column).
pub fn read_source(path: &Path, what: &str) -> Result<String, Error> {
    let fail = |m: String, help: &str| Error::file(path, m, help);
    let meta = std::fs::metadata(path)
        .map_err(|e| fail(format!("cannot read the {what}: {e}"), "check the path"))?;
    if !meta.is_file() {
        return Err(fail(
            format!("the {what} is not a regular file (a folder, FIFO or device)"),
            "give the path of a .toml file",
        ));
    }
    let too_big = || {
        fail(
            format!("the {what} is larger than {} MiB", MAX_SOURCE_BYTES >> 20),
            "a scenario describes one home in a few kB; check that this is the right file",
        )
    };
    if meta.len() > MAX_SOURCE_BYTES {
        return Err(too_big());
    }
    let mut bytes = Vec::new();
    std::fs::File::open(path)
        .and_then(|f| f.take(MAX_SOURCE_BYTES + 1).read_to_end(&mut bytes))
        .map_err(|e| {
            fail(
                format!("cannot read the {what}: {e}"),
                "check its permissions",
            )
        })?;
    if bytes.len() as u64 > MAX_SOURCE_BYTES {
        return Err(too_big());
    }
    String::from_utf8(bytes).map_err(|e| not_utf8(path, what, e.as_bytes(), e.utf8_error()))
}

/// The error for a file that is not UTF-8, at the line and column of the
/// first bad byte.
fn not_utf8(path: &Path, what: &str, bytes: &[u8], e: std::str::Utf8Error) -> Error {
    let good = &bytes[..e.valid_up_to()];
    let line_start = good.iter().rposition(|b| *b == b'\n').map_or(0, |i| i + 1);
    let prefix = std::str::from_utf8(&good[line_start..]).unwrap_or("");
    let line_end = bytes[line_start..]
        .iter()
        .position(|b| *b == b'\n')
        .map_or(bytes.len(), |i| line_start + i);
    let column = prefix.chars().count() + 1;
    Error::new(Diagnostic {
        file: path.to_path_buf(),
        line: good.iter().filter(|b| **b == b'\n').count() + 1,
        column,
        path: String::new(),
        message: format!(
            "the {what} is not valid UTF-8: byte 0x{:02x} cannot start or continue a character",
            bytes[e.valid_up_to()]
        ),
        help: "save the file as UTF-8 (TOML files are UTF-8 text)".into(),
        excerpt: String::from_utf8_lossy(&bytes[line_start..line_end])
            .trim_end()
            .to_string(),
        underline: (column, 1),
        causes: Vec::new(),
        status: Status::BadInput,
    })
}

/// Parses TOML text into a [`Node`] tree; syntax errors carry their place.
pub fn parse_toml(sources: &Sources, file: usize) -> Result<Node, Error> {
    let text = sources.text(file);
    let doc = toml_edit::ImDocument::parse(text.to_string()).map_err(|e| {
        let span = e.span().unwrap_or(0..0);
        Error::at(
            sources,
            &Src { file, span },
            "",
            format!("this is not valid TOML: {}", e.message()),
            "check quoting, brackets and `=` on this line (quantities with units are strings: power = \"1.5 kW\")",
        )
    })?;
    let whole = Src {
        file,
        span: 0..text.len(),
    };
    Ok(table_node(doc.as_table(), file, &whole))
}

fn src_of(span: Option<Range<usize>>, file: usize, fallback: &Src) -> Src {
    match span {
        Some(s) => Src { file, span: s },
        None => fallback.clone(),
    }
}

fn table_node(t: &toml_edit::Table, file: usize, fallback: &Src) -> Node {
    let here = src_of(t.span(), file, fallback);
    let mut entries = Vec::new();
    for (k, item) in t.iter() {
        let key_src = src_of(t.key(k).and_then(|k| k.span()), file, &here);
        let node = match item {
            toml_edit::Item::None => continue,
            toml_edit::Item::Value(v) => value_node(v, file, &key_src),
            toml_edit::Item::Table(t) => table_node(t, file, &key_src),
            toml_edit::Item::ArrayOfTables(a) => {
                let arr_src = src_of(a.span(), file, &key_src);
                Node {
                    v: Val::Arr(a.iter().map(|t| table_node(t, file, &arr_src)).collect()),
                    src: arr_src,
                }
            }
        };
        entries.push(Entry {
            key: k.to_string(),
            key_src,
            node,
        });
    }
    Node {
        v: Val::Table(entries),
        src: here,
    }
}

fn value_node(v: &toml_edit::Value, file: usize, fallback: &Src) -> Node {
    use toml_edit::Value as V;
    let src = src_of(v.span(), file, fallback);
    let v = match v {
        V::String(s) => Val::Str(s.value().clone()),
        V::Integer(i) => Val::Int(*i.value()),
        V::Float(f) => Val::Float(*f.value()),
        V::Boolean(b) => Val::Bool(*b.value()),
        V::Datetime(d) => Val::Date(d.value().to_string()),
        V::Array(a) => Val::Arr(a.iter().map(|x| value_node(x, file, &src)).collect()),
        V::InlineTable(t) => {
            let mut entries = Vec::new();
            for (k, x) in t.iter() {
                let key_src = src_of(t.key(k).and_then(|k| k.span()), file, &src);
                entries.push(Entry {
                    key: k.to_string(),
                    key_src,
                    node: value_node(x, file, &src),
                });
            }
            Val::Table(entries)
        }
    };
    Node { v, src }
}

pub use solver_check::diagnostic::{Diagnostic, Error, Status};

/// The constructor of an [`Error`] at a place in the scenario's [`Sources`]
/// (a trait, as the error type lives in `solver_check`, so that every
/// command reports through one type). Import it to write `Error::at(…)`.
pub trait At {
    /// An error at `src` (file, line, column, the line's text underlined),
    /// at key path `path`.
    fn at(
        sources: &Sources,
        src: &Src,
        path: &str,
        message: impl Into<String>,
        help: impl Into<String>,
    ) -> Error;
}

impl At for Error {
    fn at(
        sources: &Sources,
        src: &Src,
        path: &str,
        message: impl Into<String>,
        help: impl Into<String>,
    ) -> Error {
        let text = sources.text(src.file);
        let start = src.span.start.min(text.len());
        let line_start = text[..start].rfind('\n').map(|i| i + 1).unwrap_or(0);
        let line_end = text[start..]
            .find('\n')
            .map(|i| start + i)
            .unwrap_or(text.len());
        let line = text[..start].matches('\n').count() + 1;
        let column = text[line_start..start].chars().count() + 1;
        let end = src.span.end.clamp(start, line_end);
        let width = text[start..end].chars().count().max(1);
        Error::new(Diagnostic {
            file: sources.path(src.file).to_path_buf(),
            line,
            column,
            path: path.to_string(),
            message: message.into(),
            help: help.into(),
            excerpt: text[line_start..line_end].trim_end().to_string(),
            underline: (column, width),
            causes: Vec::new(),
            status: Status::BadInput,
        })
    }
}
