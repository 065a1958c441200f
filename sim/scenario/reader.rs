//! Typed reading of a [`Node`] tree: every key that is read is remembered, so
//! a key nobody asked for is reported as unknown, with the keys that would be
//! accepted.

use super::source::{At, Entry, Error, Node, Sources, Val};
use crate::units::{parse_quantity, QuantityKind, MAX_APPLIANCE_DURATION_S};
use std::cell::RefCell;

/// Sizes of a plain number other than zero (no key needs more, and beyond
/// them the arithmetic downstream loses its digits or overflows).
pub const PLAIN_LIMITS: (f64, f64) = (1e-9, 1e6);

/// Reads values out of the trees of the scenario's source files; its errors
/// point at the place in those files.
pub struct Reader<'s> {
    pub sources: &'s Sources,
}

impl<'s> Reader<'s> {
    pub fn err(
        &self,
        node: &Node,
        path: &str,
        msg: impl Into<String>,
        help: impl Into<String>,
    ) -> Error {
        Error::at(self.sources, &node.src, path, msg, help)
    }

    pub fn table<'n>(&self, node: &'n Node, path: &str) -> Result<TableReader<'n, 's, '_>, Error> {
        match &node.v {
            Val::Table(entries) => Ok(TableReader {
                ctx: self,
                node,
                entries,
                path: path.to_string(),
                asked: RefCell::new(Vec::new()),
            }),
            _ => Err(self.err(
                node,
                path,
                format!("expected a table here, found {}", node.type_name()),
                "write `{ key = value, ... }` or a [section]",
            )),
        }
    }

    pub fn array<'n>(&self, node: &'n Node, path: &str) -> Result<&'n [Node], Error> {
        match &node.v {
            Val::Arr(a) => Ok(a),
            _ => Err(self.err(
                node,
                path,
                format!("expected an array here, found {}", node.type_name()),
                "write `[ ..., ... ]`",
            )),
        }
    }

    pub fn string<'n>(&self, node: &'n Node, path: &str) -> Result<&'n str, Error> {
        match &node.v {
            Val::Str(s) => Ok(s),
            _ => Err(self.err(
                node,
                path,
                format!("expected a string, found {}", node.type_name()),
                "put the value in double quotes",
            )),
        }
    }

    /// A plain number (a power factor, a spread, a probability): finite, and
    /// zero or within [`PLAIN_LIMITS`] in size.
    pub fn number(&self, node: &Node, path: &str) -> Result<f64, Error> {
        let (lo, hi) = PLAIN_LIMITS;
        match node.v {
            Val::Int(i) if i == 0 || (lo..=hi).contains(&(i as f64).abs()) => Ok(i as f64),
            Val::Float(f) if f == 0.0 || (lo..=hi).contains(&f.abs()) => Ok(f),
            Val::Int(_) | Val::Float(_) => Err(self.err(
                node,
                path,
                format!("this number is outside the range loadloom accepts: zero, or {lo:e} … {hi:e} in size"),
                "write a plain number such as 0.6",
            )),
            _ => Err(self.err(
                node,
                path,
                format!("expected a number, found {}", node.type_name()),
                "write a plain number such as 0.6",
            )),
        }
    }

    /// A whole number zero or more (seeds).
    pub fn whole(&self, node: &Node, path: &str) -> Result<u64, Error> {
        match node.v {
            Val::Int(i) if i >= 0 => Ok(i as u64),
            _ => Err(self.err(
                node,
                path,
                "expected a whole number zero or more",
                "write e.g. seed = 7",
            )),
        }
    }

    pub fn quantity(&self, node: &Node, path: &str, kind: QuantityKind) -> Result<f64, Error> {
        match &node.v {
            Val::Str(s) => parse_quantity(s, kind)
                .map_err(|m| self.err(node, path, m, format!("write {}", kind.example())))
                .and_then(|v| self.within_appliance_limits(node, path, kind, v)),
            Val::Int(_) | Val::Float(_) if kind == QuantityKind::Fraction => {
                self.number(node, path)
            }
            Val::Int(_) | Val::Float(_) => Err(self.err(
                node,
                path,
                format!("a {} needs a unit", kind.name()),
                format!("write {}", kind.example()),
            )),
            _ => Err(self.err(
                node,
                path,
                format!("expected {}, found {}", kind.example(), node.type_name()),
                format!("write {}", kind.example()),
            )),
        }
    }

    /// An appliance's durations (a dwell, a session, a period, `every`, a
    /// distribution's parameters) are at most [`MAX_APPLIANCE_DURATION_S`];
    /// the run itself may be longer.
    fn within_appliance_limits(
        &self,
        node: &Node,
        path: &str,
        kind: QuantityKind,
        v: f64,
    ) -> Result<f64, Error> {
        if kind == QuantityKind::Duration
            && path.starts_with("appliance")
            && v.abs() > MAX_APPLIANCE_DURATION_S
        {
            return Err(self.err(
                node,
                path,
                format!(
                    "{} is longer than an appliance's durations may be (at most 366 d)",
                    crate::units::human_duration(v)
                ),
                "a dwell, session or period of a load is at most a year; write e.g. \"7 d\"",
            ));
        }
        Ok(v)
    }

    /// A quantity that must be strictly positive.
    pub fn positive(&self, node: &Node, path: &str, kind: QuantityKind) -> Result<f64, Error> {
        let v = self.quantity(node, path, kind)?;
        if v <= 0.0 {
            return Err(self.err(
                node,
                path,
                format!("a {} here must be greater than zero", kind.name()),
                format!("write {}", kind.example()),
            ));
        }
        Ok(v)
    }

    /// A quantity that must be zero or more.
    pub fn non_negative(&self, node: &Node, path: &str, kind: QuantityKind) -> Result<f64, Error> {
        let v = self.quantity(node, path, kind)?;
        if v < 0.0 {
            return Err(self.err(
                node,
                path,
                format!("a {} here cannot be negative", kind.name()),
                format!("write {}", kind.example()),
            ));
        }
        Ok(v)
    }
}

/// A table being read; `finish` reports the keys nobody asked for.
pub struct TableReader<'n, 's, 'c> {
    pub ctx: &'c Reader<'s>,
    pub node: &'n Node,
    entries: &'n [Entry],
    pub path: String,
    asked: RefCell<Vec<&'static str>>,
}

impl<'n, 's, 'c> TableReader<'n, 's, 'c> {
    pub fn path_of(&self, key: &str) -> String {
        if self.path.is_empty() {
            key.to_string()
        } else {
            format!("{}.{key}", self.path)
        }
    }

    /// The same table under another path (once the appliance id is known).
    pub fn rebase(self, path: String) -> Self {
        TableReader { path, ..self }
    }

    pub fn opt(&self, key: &'static str) -> Option<&'n Node> {
        self.asked.borrow_mut().push(key);
        self.entries.iter().find(|e| e.key == key).map(|e| &e.node)
    }

    pub fn has(&self, key: &str) -> bool {
        self.entries.iter().any(|e| e.key == key)
    }

    pub fn req(&self, key: &'static str, what: &str) -> Result<&'n Node, Error> {
        self.opt(key).ok_or_else(|| {
            self.ctx.err(
                self.node,
                &self.path,
                format!("missing key `{key}`"),
                format!("add `{key} = ...` ({what})"),
            )
        })
    }

    pub fn entries(&self) -> &'n [Entry] {
        self.entries
    }

    /// Marks every key as read (for tables whose keys are names, like `next`).
    pub fn all_keys_known(&self) {
        self.asked.borrow_mut().push("*");
    }

    pub fn finish(self) -> Result<(), Error> {
        let asked = self.asked.borrow();
        if asked.contains(&"*") {
            return Ok(());
        }
        for e in self.entries {
            if !asked.iter().any(|a| *a == e.key) {
                let mut accepted: Vec<&str> = asked.clone();
                accepted.sort();
                accepted.dedup();
                return Err(Error::at(
                    self.ctx.sources,
                    &e.key_src,
                    &self.path_of(&e.key),
                    format!("unknown key `{}`", e.key),
                    format!("keys accepted here: {}", accepted.join(", ")),
                ));
            }
        }
        Ok(())
    }

    pub fn quantity(&self, key: &'static str, kind: QuantityKind) -> Result<Option<f64>, Error> {
        self.opt(key)
            .map(|n| self.ctx.quantity(n, &self.path_of(key), kind))
            .transpose()
    }
    pub fn positive(&self, key: &'static str, kind: QuantityKind) -> Result<Option<f64>, Error> {
        self.opt(key)
            .map(|n| self.ctx.positive(n, &self.path_of(key), kind))
            .transpose()
    }
    pub fn non_negative(
        &self,
        key: &'static str,
        kind: QuantityKind,
    ) -> Result<Option<f64>, Error> {
        self.opt(key)
            .map(|n| self.ctx.non_negative(n, &self.path_of(key), kind))
            .transpose()
    }
    pub fn string(&self, key: &'static str) -> Result<Option<&'n str>, Error> {
        self.opt(key)
            .map(|n| self.ctx.string(n, &self.path_of(key)))
            .transpose()
    }
    pub fn number(&self, key: &'static str) -> Result<Option<f64>, Error> {
        self.opt(key)
            .map(|n| self.ctx.number(n, &self.path_of(key)))
            .transpose()
    }
}
