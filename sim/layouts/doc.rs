//! A scenario as an editable tree of TOML values, with every template
//! merged into its appliance, written back as a self-contained scenario
//! file. The layout ladder edits this tree (wiring strings, supply keys) so
//! that each rung's file reads like the home it came from, in its own units.

use crate::scenario::decode::{collect_templates, library_dirs, merge};
use crate::scenario::source::{parse_toml, read_source, Entry, Error, Node, Sources, Src, Val};
use std::path::Path;

/// A scenario tree whose appliances carry their templates inline.
#[derive(Clone)]
pub struct Doc {
    pub root: Node,
    /// The template each appliance came from, by id (for finding a home's
    /// charger or heat pump).
    pub templates: Vec<(String, String)>,
}

/// A node holding `v`, with no place in any file.
pub fn node(v: Val) -> Node {
    Node {
        v,
        src: Src::default(),
    }
}

/// A string node.
pub fn text(s: &str) -> Node {
    node(Val::Str(s.to_string()))
}

impl Doc {
    /// Reads a scenario file and merges each appliance's template into it.
    pub fn load(path: &Path) -> Result<Doc, Error> {
        let text = read_source(path, "scenario")?;
        let mut sources = Sources::default();
        let file = sources.add(path, text);
        let mut root = parse_toml(&sources, file)?;
        let dirs = library_dirs(path, &root, &sources)?;
        let mut found = Vec::new();
        collect_templates(&root, &dirs, &mut sources, &mut found)?;
        let mut templates = Vec::new();
        if let Val::Table(top) = &mut root.v {
            top.retain(|e| e.key != "library");
            for e in top
                .iter_mut()
                .filter(|e| e.key == "appliance" || e.key == "unmetered")
            {
                let Val::Arr(list) = &mut e.node.v else {
                    continue;
                };
                for app in list.iter_mut() {
                    let Some(name) = app.get("template").and_then(Node::as_str) else {
                        continue;
                    };
                    let name = name.to_string();
                    let (_, _, tnode) = found
                        .iter()
                        .find(|(n, _, _)| *n == name)
                        .expect("collected");
                    let inner = tnode
                        .get("appliance")
                        .expect("checked when the scenario loaded");
                    let mut merged = merge(inner, app);
                    merged.remove("template");
                    if let Val::Table(t) = &mut merged.v {
                        // The id first, as people write it.
                        t.sort_by_key(|e| e.key != "id");
                    }
                    if let Some(id) = merged.get("id").and_then(Node::as_str) {
                        templates.push((id.to_string(), name));
                    }
                    *app = merged;
                }
            }
        }
        Ok(Doc { root, templates })
    }

    /// The table `[key]` at the top, created when absent.
    pub fn section(&mut self, key: &str) -> &mut Node {
        self.root.entry(key)
    }

    /// Every load's table (appliances, then unmetered loads), in order.
    pub fn appliances_mut(&mut self) -> Vec<&mut Node> {
        let Val::Table(top) = &mut self.root.v else {
            return vec![];
        };
        top.iter_mut()
            .filter(|e| e.key == "appliance" || e.key == "unmetered")
            .flat_map(|e| match &mut e.node.v {
                Val::Arr(list) => list.iter_mut().collect::<Vec<_>>(),
                _ => vec![],
            })
            .collect()
    }

    /// The appliance table with this id.
    pub fn appliance_mut(&mut self, id: &str) -> Option<&mut Node> {
        self.appliances_mut()
            .into_iter()
            .find(|a| a.get("id").and_then(Node::as_str) == Some(id))
    }

    /// The template an appliance came from.
    pub fn template_of(&self, id: &str) -> Option<&str> {
        self.templates
            .iter()
            .find(|(a, _)| a == id)
            .map(|(_, t)| t.as_str())
    }

    /// The scenario as TOML text: top-level keys, then `[section]`s, then
    /// `[[appliance]]` and `[[unmetered]]` lists (nested lists inline).
    pub fn render(&self, header: &str) -> String {
        let mut out = String::new();
        for line in header.lines() {
            out += &format!("# {line}\n");
        }
        let Val::Table(top) = &self.root.v else {
            return out;
        };
        for e in top
            .iter()
            .filter(|e| !is_table(&e.node) && !is_list(&e.node))
        {
            out += &format!("{} = {}\n", key(&e.key), value(&e.node));
        }
        for e in top.iter().filter(|e| is_table(&e.node)) {
            out += &format!("\n[{}]\n", key(&e.key));
            out += &body(&e.node);
        }
        for e in top.iter().filter(|e| is_list(&e.node)) {
            let Val::Arr(list) = &e.node.v else { continue };
            for item in list {
                out += &format!("\n[[{}]]\n", key(&e.key));
                out += &body(item);
            }
        }
        out
    }
}

fn is_table(n: &Node) -> bool {
    matches!(n.v, Val::Table(_))
}

/// A non-empty array of tables (written as `[[key]]` at the top).
fn is_list(n: &Node) -> bool {
    matches!(&n.v, Val::Arr(a) if !a.is_empty() && a.iter().all(is_table))
}

/// The entries of a table, one `key = value` a line; arrays of tables are
/// written one inline table a line.
fn body(n: &Node) -> String {
    let Val::Table(entries) = &n.v else {
        return String::new();
    };
    let mut out = String::new();
    for e in entries {
        match &e.node.v {
            Val::Arr(items) if is_list(&e.node) => {
                out += &format!("{} = [\n", key(&e.key));
                for it in items {
                    out += &format!("  {},\n", value(it));
                }
                out += "]\n";
            }
            _ => out += &format!("{} = {}\n", key(&e.key), value(&e.node)),
        }
    }
    out
}

/// A bare key when it may be one, else a quoted key.
fn key(k: &str) -> String {
    let bare = !k.is_empty()
        && k.chars()
            .all(|c| c.is_ascii_alphanumeric() || c == '_' || c == '-');
    if bare {
        k.to_string()
    } else {
        quote(k)
    }
}

/// A TOML basic string (TOML 1.0 §String: `"` and `\` escaped, control
/// characters as \uXXXX).
fn quote(s: &str) -> String {
    let mut o = String::from("\"");
    for c in s.chars() {
        match c {
            '"' => o += "\\\"",
            '\\' => o += "\\\\",
            '\n' => o += "\\n",
            '\t' => o += "\\t",
            c if (c as u32) < 0x20 || c as u32 == 0x7f => o += &format!("\\u{:04X}", c as u32),
            c => o.push(c),
        }
    }
    o + "\""
}

/// One value on one line.
fn value(n: &Node) -> String {
    match &n.v {
        Val::Str(s) => quote(s),
        Val::Int(i) => i.to_string(),
        // Rust's shortest round-trip form; always with a '.' or an exponent,
        // as TOML floats need.
        Val::Float(f) => format!("{f:?}"),
        Val::Bool(b) => b.to_string(),
        Val::Date(d) => d.clone(),
        Val::Arr(a) => format!("[{}]", a.iter().map(value).collect::<Vec<_>>().join(", ")),
        Val::Table(t) => format!(
            "{{ {} }}",
            t.iter()
                .map(|e| format!("{} = {}", key(&e.key), value(&e.node)))
                .collect::<Vec<_>>()
                .join(", ")
        ),
    }
}

/// Small accessors for editing a tree.
pub trait NodeExt {
    fn get(&self, key: &str) -> Option<&Node>;
    fn get_mut(&mut self, key: &str) -> Option<&mut Node>;
    /// The child `key` of a table, created as an empty table when absent.
    fn entry(&mut self, key: &str) -> &mut Node;
    fn set(&mut self, key: &str, v: Node);
    fn remove(&mut self, key: &str);
    fn as_str(&self) -> Option<&str>;
}

impl NodeExt for Node {
    fn get(&self, key: &str) -> Option<&Node> {
        match &self.v {
            Val::Table(t) => t.iter().find(|e| e.key == key).map(|e| &e.node),
            _ => None,
        }
    }
    fn get_mut(&mut self, key: &str) -> Option<&mut Node> {
        match &mut self.v {
            Val::Table(t) => t.iter_mut().find(|e| e.key == key).map(|e| &mut e.node),
            _ => None,
        }
    }
    fn entry(&mut self, key: &str) -> &mut Node {
        if self.get(key).is_none() {
            self.set(key, node(Val::Table(vec![])));
        }
        self.get_mut(key).expect("just set")
    }
    fn set(&mut self, key: &str, v: Node) {
        if let Some(slot) = self.get_mut(key) {
            *slot = v;
        } else if let Val::Table(t) = &mut self.v {
            t.push(Entry {
                key: key.to_string(),
                key_src: Src::default(),
                node: v,
            });
        }
    }
    fn remove(&mut self, key: &str) {
        if let Val::Table(t) = &mut self.v {
            t.retain(|e| e.key != key);
        }
    }
    fn as_str(&self) -> Option<&str> {
        match &self.v {
            Val::Str(s) => Some(s),
            _ => None,
        }
    }
}
