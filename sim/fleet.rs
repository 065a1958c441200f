//! Fleets: a population file resolved, home by home, into scenarios, and the
//! homes simulated in parallel into one folder where each table is its own
//! Hive-partitioned dataset (`meters/home=h00042/meters.parquet`, `truth/…`,
//! `events/…`; each home's `manifest.json` and `scenario.toml` under
//! `manifests/home=h00042/`), with a `homes.parquet` index and a
//! `fleet.json` summary beside them.
//!
//! Each home's scenario is resolved from (population seed, home index) alone,
//! so any shard of the fleet computes exactly its homes, and any home can be
//! rebuilt with `loadloom run manifests/home=h00042/scenario.toml`.

use crate::behaviour::dist::categorical;
use crate::rng::stream;
use crate::scenario::reader::{Reader, TableReader};
use crate::scenario::source::{parse_toml, Error, Node, Sources, Val};
use crate::scenario::{library, Scenario};
use crate::units::QuantityKind;
use rand::Rng;
use serde_json::{json, Value};
use solver_check::contract::FLEET_FORMAT;
use std::path::{Path, PathBuf};

/// A kind of home (`[[kind]]`), drawn with its weight.
#[derive(Clone, Debug)]
pub struct HomeKind {
    /// Its name (`na-house`); `[[owns]] kinds` refer to it.
    pub name: String,
    /// Its relative weight in the draw (any non-negative number).
    pub weight: f64,
    /// The `[home]` keys, written into each scenario as they are.
    pub home_toml: String,
    /// Its supply, read from its `[home]` keys.
    pub supply: crate::scenario::SupplyKind,
}

/// A library template owned by some homes (`[[owns]]`).
#[derive(Clone, Debug)]
pub struct Ownership {
    /// The library template's name (`kettle`).
    pub template: String,
    /// The share of homes that own it, 0 … 1.
    pub probability: f64,
    /// How many a home that owns it has: drawn uniformly from this range, inclusive.
    pub count: (u32, u32),
    /// Kinds that may own it (empty: all).
    pub kinds: Vec<String>,
    /// Wiring choices per kind (absent: the template's own wiring).
    pub wiring: Vec<(String, Vec<String>)>,
    /// Each home scales its power by a uniform factor within ±this share.
    pub power: f64,
    /// Each home scales every duration of its behaviour within ±this share.
    pub time: f64,
    /// Habits shifted by a uniform amount within ±`shift_h` hours.
    pub shift_h: f64,
}

/// An occupancy pattern (`[[occupancy]]`), drawn with its weight.
#[derive(Clone, Debug)]
pub struct Occupancy {
    /// Its name (`out-at-work`).
    pub name: String,
    /// Its relative weight in the draw.
    pub weight: f64,
    /// The `[home] away` value (weekday hours nobody is home), if any.
    pub away: Option<String>,
}

/// A population file: what a fleet's homes are drawn from.
#[derive(Clone, Debug)]
pub struct Population {
    /// The file it was read from.
    pub path: PathBuf,
    /// A human name for the fleet (`[fleet] label`).
    pub label: String,
    /// The fleet's seed: each home's scenario follows from it and the home's index.
    pub seed: u64,
    /// The `[run]` keys shared by every home, as written.
    pub run_toml: String,
    /// The `[meter]` keys shared by every home, as written.
    pub meter_toml: String,
    /// The kinds of home.
    pub kinds: Vec<HomeKind>,
    /// The templates homes may own.
    pub owns: Vec<Ownership>,
    /// The occupancy patterns (empty: nobody is ever away).
    pub occupancy: Vec<Occupancy>,
}

/// A TOML value written back as text (strings quoted; inline tables and arrays).
fn toml_text(n: &Node) -> String {
    match &n.v {
        Val::Str(s) => format!("{s:?}"),
        Val::Int(i) => i.to_string(),
        Val::Float(f) => format!("{f:?}"),
        Val::Bool(b) => b.to_string(),
        Val::Date(d) => format!("{d:?}"),
        Val::Arr(a) => format!(
            "[{}]",
            a.iter().map(toml_text).collect::<Vec<_>>().join(", ")
        ),
        Val::Table(t) => format!(
            "{{ {} }}",
            t.iter()
                .map(|e| format!("{} = {}", e.key, toml_text(&e.node)))
                .collect::<Vec<_>>()
                .join(", ")
        ),
    }
}

fn section(n: &Node) -> String {
    match &n.v {
        Val::Table(t) => t
            .iter()
            .map(|e| format!("{} = {}\n", e.key, toml_text(&e.node)))
            .collect(),
        _ => String::new(),
    }
}

/// Reads and checks a population file; every rule is checked before any home is made.
pub fn load(path: &Path) -> Result<Population, Error> {
    let text = crate::scenario::source::read_source(path, "population")?;
    let mut sources = Sources::default();
    let file = sources.add(path, text);
    let root = parse_toml(&sources, file)?;
    let ctx = Reader { sources: &sources };
    let top = ctx.table(&root, "")?;
    let (label, seed) = read_fleet_section(&ctx, &top)?;
    let run = read_run_section(&ctx, &top)?;
    let meter_toml = top.opt("meter").map(section).unwrap_or_default();
    let kinds = read_kinds(&ctx, &top)?;
    let owns = read_owns(&ctx, &top, &kinds)?;
    let occupancy = read_occupancy(&ctx, &top)?;
    let run_toml = section(run);
    top.finish()?;
    let pop = Population {
        path: path.to_path_buf(),
        label,
        seed,
        run_toml,
        meter_toml,
        kinds,
        owns,
        occupancy,
    };
    check_every_kind_hosts_owns(&ctx, &root, &pop)?;
    Ok(pop)
}

/// The `[fleet]` section: its label and seed.
fn read_fleet_section(ctx: &Reader, top: &TableReader) -> Result<(String, u64), Error> {
    let f = ctx.table(
        top.req("fleet", "the [fleet] section: label and seed")?,
        "fleet",
    )?;
    let label = f.string("label")?.unwrap_or("fleet").to_string();
    let seed = f
        .opt("seed")
        .map(|n| ctx.whole(n, "fleet.seed"))
        .transpose()?
        .unwrap_or(1);
    f.finish()?;
    Ok((label, seed))
}

/// The `[run]` section every home shares, checked; a seed there is refused
/// because each home's seed derives from the fleet's.
fn read_run_section<'n>(ctx: &Reader, top: &TableReader<'n, '_, '_>) -> Result<&'n Node, Error> {
    let run = top.req(
        "run",
        "the [run] section every home shares: start, length, step",
    )?;
    let run_t = ctx.table(run, "run")?;
    if run_t.has("seed") {
        return Err(ctx.err(
            run,
            "run.seed",
            "a home's seed comes from the fleet's seed and its index",
            "set [fleet] seed instead",
        ));
    }
    let _ = (run_t.opt("start"), run_t.opt("length"), run_t.opt("step"));
    run_t.finish()?;
    Ok(run)
}

/// The `[[kind]]` entries, in order.
fn read_kinds(ctx: &Reader, top: &TableReader) -> Result<Vec<HomeKind>, Error> {
    let kinds_node = top.req(
        "kind",
        "one [[kind]] per home type: name, weight and its [home] keys",
    )?;
    ctx.array(kinds_node, "kind")?
        .iter()
        .enumerate()
        .map(|(i, n)| read_kind(ctx, n, i))
        .collect()
}

/// One `[[kind]]`: its name, weight and supply; its other keys are kept as
/// `[home]` keys for each scenario.
fn read_kind(ctx: &Reader, n: &Node, i: usize) -> Result<HomeKind, Error> {
    let path = format!("kind[{i}]");
    let t = ctx.table(n, &path)?;
    let name = t
        .string("name")?
        .ok_or_else(|| ctx.err(n, &path, "missing key `name`", "add name = \"house\""))?
        .to_string();
    let weight = positive_weight(ctx, &t, "its share of the fleet, e.g. 3")?;
    let supply = read_supply(ctx, &t)?;
    let mut home = String::new();
    if let Val::Table(entries) = &n.v {
        for e in entries
            .iter()
            .filter(|e| e.key != "name" && e.key != "weight")
        {
            home += &format!("{} = {}\n", e.key, toml_text(&e.node));
        }
    }
    // The other keys are [home] keys; the scenario check of each home reads them.
    t.all_keys_known();
    t.finish()?;
    Ok(HomeKind {
        name,
        weight,
        home_toml: home,
        supply,
    })
}

/// The required `weight` of a table, which must be a finite number above zero.
fn positive_weight(ctx: &Reader, t: &TableReader, what: &str) -> Result<f64, Error> {
    let wn = t.req("weight", what)?;
    let weight = ctx.number(wn, &t.path_of("weight"))?;
    if !weight.is_finite() || weight <= 0.0 {
        return Err(ctx.err(
            wn,
            &t.path_of("weight"),
            "a weight must be greater than zero",
            "write weight = 1",
        ));
    }
    Ok(weight)
}

/// A kind's required `supply` key.
fn read_supply(ctx: &Reader, t: &TableReader) -> Result<crate::scenario::SupplyKind, Error> {
    let supply_node = t.req("supply", "split-phase, three-phase or single-phase")?;
    match ctx.string(supply_node, &t.path_of("supply"))? {
        "split-phase" => Ok(crate::scenario::SupplyKind::SplitPhase),
        "three-phase" => Ok(crate::scenario::SupplyKind::ThreePhase),
        "single-phase" => Ok(crate::scenario::SupplyKind::SinglePhase),
        other => Err(ctx.err(
            supply_node,
            &t.path_of("supply"),
            format!("unknown supply \"{other}\""),
            "write \"split-phase\", \"three-phase\" or \"single-phase\"",
        )),
    }
}

/// The optional `[[owns]]` entries, in order.
fn read_owns(ctx: &Reader, top: &TableReader, kinds: &[HomeKind]) -> Result<Vec<Ownership>, Error> {
    match top.opt("owns") {
        None => Ok(Vec::new()),
        Some(list) => ctx
            .array(list, "owns")?
            .iter()
            .enumerate()
            .map(|(i, n)| read_ownership(ctx, n, i, kinds))
            .collect(),
    }
}

/// One `[[owns]]` entry, each key checked in the order it is read.
fn read_ownership(
    ctx: &Reader,
    n: &Node,
    i: usize,
    kinds: &[HomeKind],
) -> Result<Ownership, Error> {
    let path = format!("owns[{i}]");
    let t = ctx.table(n, &path)?;
    let template = read_template(ctx, &t)?;
    let pn = t.req("probability", "the share of homes that own it, 0 … 1")?;
    let probability = ctx.number(pn, &t.path_of("probability"))?;
    if !(0.0..=1.0).contains(&probability) {
        return Err(ctx.err(
            pn,
            &t.path_of("probability"),
            format!("probability {probability} is outside 0 … 1"),
            "write a probability such as 0.6",
        ));
    }
    let count = read_count(ctx, &t)?;
    let kind_names = read_kind_names(ctx, &t, kinds)?;
    let wiring = read_wiring(ctx, &t, kinds)?;
    let (shift_h, power, time) = read_variation(ctx, &t, n, &path)?;
    t.finish()?;
    Ok(Ownership {
        template,
        probability,
        count,
        kinds: kind_names,
        wiring,
        power,
        time,
        shift_h,
    })
}

/// The required `template`: a file in the `library` folder beside the
/// population, or a built-in template.
fn read_template(ctx: &Reader, t: &TableReader) -> Result<String, Error> {
    let tn = t.req("template", "a template of the library, e.g. \"fridge\"")?;
    let template = ctx.string(tn, &t.path_of("template"))?.to_string();
    let dir = ctx
        .sources
        .path(0)
        .parent()
        .map(Path::to_path_buf)
        .unwrap_or_default()
        .join("library");
    if !dir.join(format!("{template}.toml")).is_file() && library::builtin(&template).is_none() {
        return Err(ctx.err(
            tn,
            &t.path_of("template"),
            format!("no template named \"{template}\""),
            format!("templates built in: {}", library::names().join(", ")),
        ));
    }
    Ok(template)
}

/// The optional `count`: one number or a range `[least, most]` within 1 … 9;
/// one when absent.
fn read_count(ctx: &Reader, t: &TableReader) -> Result<(u32, u32), Error> {
    let Some(c) = t.opt("count") else {
        return Ok((1, 1));
    };
    match &c.v {
        Val::Int(k) if *k >= 1 => Ok((*k as u32, *k as u32)),
        Val::Arr(a) if a.len() == 2 => match (&a[0].v, &a[1].v) {
            (Val::Int(lo), Val::Int(hi)) if *lo >= 1 && hi >= lo && *hi <= 9 => {
                Ok((*lo as u32, *hi as u32))
            }
            _ => Err(ctx.err(
                c,
                &t.path_of("count"),
                "a count range is [least, most], 1 … 9",
                "write count = [1, 2]",
            )),
        },
        _ => Err(ctx.err(
            c,
            &t.path_of("count"),
            "expected a count or a range [least, most]",
            "write count = 2 or count = [1, 2]",
        )),
    }
}

/// The optional `kinds` the entry is limited to; each must name a `[[kind]]`.
fn read_kind_names(
    ctx: &Reader,
    t: &TableReader,
    kinds: &[HomeKind],
) -> Result<Vec<String>, Error> {
    let Some(list) = t.opt("kinds") else {
        return Ok(vec![]);
    };
    let kind_names: Vec<String> = ctx
        .array(list, &t.path_of("kinds"))?
        .iter()
        .map(|x| ctx.string(x, &t.path_of("kinds")).map(str::to_string))
        .collect::<Result<_, _>>()?;
    for k in &kind_names {
        if !kinds.iter().any(|x| &x.name == k) {
            return Err(ctx.err(
                list,
                &t.path_of("kinds"),
                format!("no home kind named \"{k}\""),
                format!(
                    "kinds: {}",
                    kinds
                        .iter()
                        .map(|x| x.name.as_str())
                        .collect::<Vec<_>>()
                        .join(", ")
                ),
            ));
        }
    }
    Ok(kind_names)
}

/// The optional `wiring` table: per home kind, the wiring choices allowed,
/// each checked against that kind's supply.
fn read_wiring(
    ctx: &Reader,
    t: &TableReader,
    kinds: &[HomeKind],
) -> Result<Vec<(String, Vec<String>)>, Error> {
    let mut wiring = Vec::new();
    let Some(w) = t.opt("wiring") else {
        return Ok(wiring);
    };
    let wt = ctx.table(w, &t.path_of("wiring"))?;
    wt.all_keys_known();
    for e in wt.entries() {
        let kind = kinds.iter().find(|x| x.name == e.key).ok_or_else(|| {
            ctx.err(
                &e.node,
                &format!("{}.{}", t.path_of("wiring"), e.key),
                format!("no home kind named \"{}\"", e.key),
                "name a [[kind]]",
            )
        })?;
        let mut choices = Vec::new();
        for c in ctx.array(&e.node, &e.key)? {
            let p = format!("{}.{}", t.path_of("wiring"), e.key);
            crate::scenario::values::parse_wiring(ctx, c, &p, kind.supply)?;
            choices.push(ctx.string(c, &p)?.to_string());
        }
        wiring.push((e.key.clone(), choices));
    }
    wt.finish()?;
    Ok(wiring)
}

/// The optional variations of a template: `shift` of habits (hours, at most
/// 12) and the `power` and `time` fractions (at most ±50 %).
fn read_variation(
    ctx: &Reader,
    t: &TableReader,
    n: &Node,
    path: &str,
) -> Result<(f64, f64, f64), Error> {
    let shift_h = t
        .non_negative("shift", QuantityKind::Duration)?
        .unwrap_or(0.0)
        / 3600.0;
    if shift_h > 12.0 {
        return Err(ctx.err(
            t.opt("shift").unwrap(),
            &t.path_of("shift"),
            "habits shifted by more than 12 hours",
            "write e.g. shift = \"1 h\"",
        ));
    }
    let power = t
        .non_negative("power", QuantityKind::Fraction)?
        .unwrap_or(0.0);
    let time = t
        .non_negative("time", QuantityKind::Fraction)?
        .unwrap_or(0.0);
    if power > 0.5 || time > 0.5 {
        return Err(ctx.err(
            n,
            path,
            "variation above ±50 % of a template",
            "write e.g. power = \"10 %\", time = \"15 %\"",
        ));
    }
    Ok((shift_h, power, time))
}

/// The optional `[[occupancy]]` entries, in order.
fn read_occupancy(ctx: &Reader, top: &TableReader) -> Result<Vec<Occupancy>, Error> {
    let mut occupancy = Vec::new();
    if let Some(list) = top.opt("occupancy") {
        for (i, n) in ctx.array(list, "occupancy")?.iter().enumerate() {
            let path = format!("occupancy[{i}]");
            let t = ctx.table(n, &path)?;
            let name = t.string("name")?.unwrap_or("occupancy").to_string();
            let weight = positive_weight(ctx, &t, "its share of the homes, e.g. 2")?;
            let away = t.string("away")?.map(str::to_string);
            t.finish()?;
            occupancy.push(Occupancy { name, weight, away });
        }
    }
    Ok(occupancy)
}

/// A population that cannot produce a valid home fails here, before any
/// home is written: home 0 of every kind with every template it may own.
fn check_every_kind_hosts_owns(ctx: &Reader, root: &Node, pop: &Population) -> Result<(), Error> {
    for (k, kind) in pop.kinds.iter().enumerate() {
        let text = pop.scenario_text_all(k);
        crate::scenario::load_str(&pop.home_path(0), text).map_err(|e| {
            let mut e = population_place(ctx, root, k, &pop.home_path(0), e);
            e.message = format!(
                "home kind \"{}\" cannot host the population's appliances: {}",
                kind.name, e.message
            );
            e
        })?;
    }
    Ok(())
}

/// The entry `key` of a table node, or item `index` of an array node.
fn child<'n>(n: &'n Node, key: &str, index: Option<usize>) -> Option<&'n Node> {
    match (&n.v, index) {
        (Val::Table(entries), _) => entries.iter().find(|e| e.key == key).map(|e| &e.node),
        (Val::Arr(items), Some(i)) => items.get(i),
        _ => None,
    }
}

/// An error in the scenario generated for home kind `k` (a file that does
/// not exist, `generated`), moved to the population's own line that wrote
/// the offending key: `[run]` and `[meter]` keys to those sections, `[home]`
/// keys to the kind, an appliance (`a{j}`) to its `[[owns]]` entry.
fn population_place(ctx: &Reader, root: &Node, k: usize, generated: &Path, e: Error) -> Error {
    if e.file != generated {
        return e; // an error inside a template names the template's own file
    }
    let mut parts = e.path.split(['.', '[', ']']).filter(|p| !p.is_empty());
    let (head, key) = (parts.next().unwrap_or(""), parts.next().unwrap_or(""));
    let kind = child(root, "kind", None).and_then(|n| child(n, "", Some(k)));
    let (node, path) = match head {
        "run" | "meter" => match child(root, head, None) {
            Some(sec) => match child(sec, key, None) {
                Some(n) => (Some(n), format!("{head}.{key}")),
                None => (Some(sec), head.to_string()),
            },
            None => (kind, format!("kind[{k}]")),
        },
        "appliance" => {
            let j = key.strip_prefix('a').and_then(|j| j.parse().ok());
            match child(root, "owns", None).and_then(|n| child(n, "", j)) {
                Some(n) => (Some(n), format!("owns[{}]", j.unwrap_or(0))),
                None => (kind, format!("kind[{k}]")),
            }
        }
        _ => match kind.and_then(|n| child(n, key, None)) {
            Some(n) => (Some(n), format!("kind[{k}].{key}")),
            None => (kind, format!("kind[{k}]")),
        },
    };
    match node {
        Some(n) => ctx.err(n, &path, e.message.clone(), e.help.clone()),
        None => e,
    }
}

impl Population {
    fn home_path(&self, i: u64) -> PathBuf {
        let stem = self
            .path
            .file_stem()
            .map(|s| s.to_string_lossy().to_string())
            .unwrap_or_default();
        self.path.with_file_name(format!("{stem}.home-{i:05}.toml"))
    }

    /// The population's own template folder (`library/` beside it), as an
    /// absolute path, if it has one: written into each home's scenario so
    /// the home rebuilds alone from wherever its `scenario.toml` lies.
    fn library(&self) -> Option<PathBuf> {
        let dir = self.path.parent().unwrap_or(Path::new(".")).join("library");
        dir.is_dir()
            .then(|| std::path::absolute(&dir).unwrap_or(dir))
    }

    fn header(&self, kind: &HomeKind, away: Option<&str>, i: u64, seed: u64) -> String {
        let away = away.map(|a| format!("away = {a:?}\n")).unwrap_or_default();
        let library = self
            .library()
            .map(|d| format!("library = {:?}\n\n", d.to_string_lossy()))
            .unwrap_or_default();
        format!(
            "{library}[home]\nlabel = {:?}\n{}{away}\n[run]\n{}seed = {seed}\n\n[meter]\n{}\n",
            format!("{} home {i:05}", self.label),
            kind.home_toml,
            self.run_toml,
            self.meter_toml
        )
    }

    /// Every template a kind may own, once, unvaried (the up-front check).
    fn scenario_text_all(&self, k: usize) -> String {
        let kind = &self.kinds[k];
        let mut t = self.header(
            kind,
            self.occupancy.iter().find_map(|o| o.away.as_deref()),
            0,
            1,
        );
        for (j, o) in self.owns.iter().enumerate() {
            if !o.kinds.is_empty() && !o.kinds.contains(&kind.name) {
                continue;
            }
            t += &format!(
                "[[appliance]]\nid = \"a{j}\"\ntemplate = {:?}\n",
                o.template
            );
            if let Some((_, w)) = o.wiring.iter().find(|(n, _)| *n == kind.name) {
                t += &format!("wiring = {:?}\n", w[0]);
            }
        }
        if !t.contains("[[appliance]]") {
            t += "[[appliance]]\nid = \"none\"\nwiring = \"L1-N\"\nbehaviour = \"steady\"\nstates = [{ power = \"0 W\" }]\n";
        }
        t
    }

    /// The scenario of home `i`, from (population seed, home index) alone.
    pub fn home(&self, i: u64) -> Result<(Scenario, String), Error> {
        let id = format!("home-{i:05}");
        let mut rng = stream(self.seed, &id, "population");
        let weights: Vec<f64> = self.kinds.iter().map(|k| k.weight).collect();
        let k = categorical(&weights, &mut rng);
        let kind = &self.kinds[k];
        // 63 bits: a TOML integer is signed.
        let seed: u64 = stream(self.seed, &id, "seed").random::<u64>() >> 1;
        let occ = if self.occupancy.is_empty() {
            None
        } else {
            let w: Vec<f64> = self.occupancy.iter().map(|o| o.weight).collect();
            Some(&self.occupancy[categorical(&w, &mut stream(self.seed, &id, "occupancy"))])
        };
        let mut t = self.header(kind, occ.and_then(|o| o.away.as_deref()), i, seed);
        let mut n_apps = 0;
        for o in &self.owns {
            // Every template draws the same numbers whether or not the kind
            // may own it, so one template's change leaves the others alone.
            let u: f64 = rng.random();
            let count = rng.random_range(o.count.0..=o.count.1);
            let allowed = o.kinds.is_empty() || o.kinds.contains(&kind.name);
            for c in 0..o.count.1 {
                let w: f64 = rng.random();
                let ps: f64 = rng.random_range(-1.0..=1.0);
                let ts: f64 = rng.random_range(-1.0..=1.0);
                let hs: f64 = rng.random_range(-1.0..=1.0);
                if !allowed || u >= o.probability || c >= count {
                    continue;
                }
                let app_id = if c == 0 {
                    o.template.clone()
                } else {
                    format!("{}_{}", o.template, c + 1)
                };
                t += &format!(
                    "\n[[appliance]]\nid = {app_id:?}\ntemplate = {:?}\n",
                    o.template
                );
                if let Some((_, choices)) = o.wiring.iter().find(|(n, _)| *n == kind.name) {
                    t += &format!(
                        "wiring = {:?}\n",
                        choices[((w * choices.len() as f64) as usize).min(choices.len() - 1)]
                    );
                }
                if o.power > 0.0 {
                    t += &format!("power_scale = {:.4}\n", 1.0 + o.power * ps);
                }
                if o.time > 0.0 {
                    t += &format!("time_scale = {:.4}\n", 1.0 + o.time * ts);
                }
                if o.shift_h > 0.0 {
                    t += &format!("habit_shift = {:.3}\n", o.shift_h * hs);
                }
                n_apps += 1;
            }
        }
        if n_apps == 0 {
            // A home owns at least its standby: nothing at all is no home.
            t += "\n[[appliance]]\nid = \"standby\"\ntemplate = \"standby\"\n";
        }
        let mut s = crate::scenario::load_str(&self.home_path(i), t.clone())?;
        s.name = home_key(i);
        // Messages name the population, not the generated text (no such file).
        s.home.source_at = format!("{} (home kind \"{}\")", self.path.display(), kind.name);
        let occ_name = occ
            .map(|o| format!(", occupancy \"{}\"", o.name))
            .unwrap_or_default();
        s.source_toml = Some(format!(
            "# Home {i} of the population {} (kind \"{}\"{occ_name}), resolved by loadloom.\n{t}",
            self.path.display(),
            kind.name
        ));
        Ok((s, kind.name.clone()))
    }
}

/// Which homes this run makes: all, or shard I of N (homes with index % N == I).
#[derive(Clone, Copy, Debug)]
pub struct Shard {
    /// This shard's number, 0 … count − 1.
    pub index: u64,
    /// How many shards the fleet is split into.
    pub count: u64,
}

impl Shard {
    /// `I/N`, or `auto` from a Slurm job array (SLURM_ARRAY_TASK_ID,
    /// SLURM_ARRAY_TASK_COUNT, SLURM_ARRAY_TASK_MIN) or a Kubernetes Indexed
    /// Job (JOB_COMPLETION_INDEX, with the count in LOADLOOM_SHARDS).
    pub fn parse(text: &str, env: &dyn Fn(&str) -> Option<String>) -> Result<Shard, Error> {
        let bad = |m: &str| {
            let help = "give --shard I/N with I from 0 to N − 1, e.g. 0/4, or auto inside a Slurm job array or a Kubernetes Indexed Job";
            Error::option(&format!("--shard {text}"), m, help)
        };
        let num = |s: &str| {
            s.trim()
                .parse::<u64>()
                .map_err(|_| bad(&format!("\"{s}\" is not a whole number")))
        };
        let (i, n) = if text == "auto" {
            if let Some(id) = env("SLURM_ARRAY_TASK_ID") {
                let min = env("SLURM_ARRAY_TASK_MIN")
                    .map(|m| num(&m))
                    .transpose()?
                    .unwrap_or(0);
                let count = env("SLURM_ARRAY_TASK_COUNT").ok_or_else(|| {
                    bad("SLURM_ARRAY_TASK_ID is set but SLURM_ARRAY_TASK_COUNT is not")
                })?;
                (
                    num(&id)?
                        .checked_sub(min)
                        .ok_or_else(|| bad("SLURM_ARRAY_TASK_ID is below SLURM_ARRAY_TASK_MIN"))?,
                    num(&count)?,
                )
            } else if let Some(id) = env("JOB_COMPLETION_INDEX") {
                let count = env("LOADLOOM_SHARDS").ok_or_else(|| bad("JOB_COMPLETION_INDEX is set: give the number of shards in LOADLOOM_SHARDS (the Job's completions)"))?;
                (num(&id)?, num(&count)?)
            } else {
                return Err(bad("--shard auto found neither a Slurm array (SLURM_ARRAY_TASK_ID) nor a Kubernetes Indexed Job (JOB_COMPLETION_INDEX)"));
            }
        } else {
            let (a, b) = text
                .split_once('/')
                .ok_or_else(|| bad("expected I/N, e.g. 0/4, or auto"))?;
            (num(a)?, num(b)?)
        };
        if n == 0 || i >= n {
            return Err(bad(&format!(
                "shard {i} of {n} does not exist: I runs from 0 to N − 1"
            )));
        }
        Ok(Shard { index: i, count: n })
    }
}

/// The key of home `i` in every table and in `homes.parquet`: `h00042`.
/// Not a number, so every reader's partition inference keeps it a string
/// (`home=00042` would be read as the integer 42 by pyarrow, pandas,
/// polars, duckdb and Spark, and no longer join the index).
pub fn home_key(i: u64) -> String {
    format!("h{i:05}")
}

/// The tables of a fleet, each a folder of Hive partitions by home.
pub const TABLES: [&str; 3] = ["meters", "truth", "events"];

/// Where home `i`'s files go, relative to the fleet folder.
fn layout(i: u64) -> crate::dataset::Layout {
    let part = |table: &str| Path::new(table).join(format!("home={}", home_key(i)));
    crate::dataset::Layout {
        form: crate::dataset::schema::Form::Fleet,
        meters: part(TABLES[0]),
        truth: part(TABLES[1]),
        events: part(TABLES[2]),
        manifest: part("manifests"),
    }
}

/// The folder of home `i`'s `manifest.json` and `scenario.toml`.
fn manifest_dir(out: &Path, i: u64) -> PathBuf {
    out.join(layout(i).manifest)
}

/// Whether every file home `i`'s manifest lists has the size and sha256
/// the manifest gives it (paths relative to the fleet folder).
fn files_match(out: &Path, i: u64) -> bool {
    let Ok(text) = std::fs::read_to_string(manifest_dir(out, i).join("manifest.json")) else {
        return false;
    };
    let Ok(m) = serde_json::from_str::<Value>(&text) else {
        return false;
    };
    let Some(files) = m["files"].as_object().filter(|f| f.len() == TABLES.len()) else {
        return false;
    };
    files.iter().all(|(name, f)| {
        let path = out.join(name);
        std::fs::metadata(&path).is_ok_and(|md| Some(md.len()) == f["bytes"].as_u64())
            && crate::dataset::manifest::sha256_file(&path).ok().as_deref() == f["sha256"].as_str()
    })
}

/// Whether home `i` is written completely: its files match its manifest,
/// and its `scenario.toml` is the one the population gives home `i` (a
/// damaged or missing one makes the home be redone).
pub fn is_complete(pop: &Population, out: &Path, i: u64) -> bool {
    files_match(out, i)
        && pop.home(i).is_ok_and(|(s, _)| {
            std::fs::read_to_string(manifest_dir(out, i).join("scenario.toml")).ok()
                == s.source_toml
        })
}

/// Resolves and writes home `i`; a scenario error or a voltage solve with
/// no plausible answer is bad input, any other failure a failed run.
fn make_home(pop: &Population, out: &Path, i: u64) -> Result<(), Error> {
    let (s, _) = pop.home(i)?;
    let written = write_home(&s, out, i);
    written.map_err(|e| {
        let diverged = e
            .get_ref()
            .and_then(|x| x.downcast_ref::<crate::electrical::settle::Diverged>())
            .is_some();
        let (message, help) = if diverged {
            (
                format!("home {i}: its simulation stopped"),
                "see the cause: the population's source impedance or loads need changing",
            )
        } else {
            (
                format!("home {i}: writing its dataset failed"),
                "check free space and permissions; the home is redone on the next run",
            )
        };
        let error = Error::file(&manifest_dir(out, i), message, help).caused_by(&e);
        if diverged {
            error
        } else {
            error.failed()
        }
    })
}

/// Writes home `i` into a partial folder of its own, then moves its parts
/// into the tables: its manifest's folder first out (a home without it is
/// incomplete and redone on the next run), then in again last.
fn write_home(s: &Scenario, out: &Path, i: u64) -> std::io::Result<()> {
    use crate::dataset::folder::PartialDir;
    let tmp = PartialDir::create(out.join(format!(".{}.partial-{}", s.name, std::process::id())))?;
    let layout = layout(i);
    let format = crate::dataset::Format::Parquet;
    crate::pipeline::write_into(s, tmp.path(), format, &layout, &mut |_| {})?;
    let parts = [
        &layout.manifest,
        &layout.meters,
        &layout.truth,
        &layout.events,
    ];
    for part in parts {
        let dest = out.join(part);
        if std::fs::symlink_metadata(&dest).is_ok() {
            std::fs::remove_dir_all(&dest)?;
        }
    }
    for part in parts.into_iter().rev() {
        let dest = out.join(part);
        std::fs::create_dir_all(dest.parent().unwrap_or(out))?;
        std::fs::rename(tmp.path().join(part), dest)?;
    }
    Ok(()) // `tmp`, now empty folders, is removed as it drops
}

/// What a fleet run did.
pub struct FleetRun {
    /// Homes written by this run.
    pub made: u64,
    /// Homes already complete from an earlier run, left as they were.
    pub skipped: u64,
    /// Whether the fleet's index was written (every home of the fleet is there).
    pub index_written: bool,
}

/// Makes the homes of `shard` among `homes`, `jobs` at a time; skips homes
/// already complete; writes the index when every home of the fleet is there.
/// The error's status says whether it was bad input (2) or a run that
/// failed (1).
pub fn run(
    pop: &Population,
    homes: u64,
    out: &Path,
    jobs: usize,
    shard: Shard,
    progress: &(dyn Fn(u64, u64) + Sync),
) -> Result<FleetRun, Error> {
    std::fs::create_dir_all(out).map_err(|e| {
        let help = "give --out a folder that can be created";
        Error::file(out, "cannot create the fleet folder", help)
            .caused_by(&e)
            .failed()
    })?;
    // Partial folders of an interrupted run are redone; those of another
    // shard still running in the same folder are its own.
    crate::dataset::folder::sweep_stale(out);
    let mine: Vec<u64> = (0..homes)
        .filter(|i| i % shard.count == shard.index)
        .collect();
    let todo: Vec<u64> = mine
        .iter()
        .copied()
        .filter(|&i| !is_complete(pop, out, i))
        .collect();
    let skipped = (mine.len() - todo.len()) as u64;
    let next = std::sync::atomic::AtomicUsize::new(0);
    let done = std::sync::atomic::AtomicU64::new(0);
    let failure: std::sync::Mutex<Option<Error>> = std::sync::Mutex::new(None);
    std::thread::scope(|sc| {
        for _ in 0..jobs.max(1) {
            sc.spawn(|| loop {
                let k = next.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
                if k >= todo.len() || failure.lock().unwrap().is_some() {
                    break;
                }
                let i = todo[k];
                if let Err(e) = make_home(pop, out, i) {
                    *failure.lock().unwrap() = Some(e);
                    break;
                }
                progress(
                    done.fetch_add(1, std::sync::atomic::Ordering::Relaxed) + 1,
                    todo.len() as u64,
                );
            });
        }
    });
    if let Some(e) = failure.into_inner().unwrap() {
        return Err(e);
    }
    let all = (0..homes).all(|i| manifest_dir(out, i).join("manifest.json").is_file());
    if all {
        write_index(pop, homes, out)?;
    }
    Ok(FleetRun {
        made: todo.len() as u64,
        skipped,
        index_written: all,
    })
}

/// `homes.parquet` (one row per home, from the homes' manifests) and `fleet.json`.
fn write_index(pop: &Population, homes: u64, out: &Path) -> Result<(), Error> {
    use arrow_array::{ArrayRef, Float64Array, Int64Array, RecordBatch, StringArray};
    use arrow_schema::{DataType, Field, Schema};
    use std::sync::Arc;
    let (mut ids, mut kinds, mut supplies, mut apps, mut counts, mut kwh, mut rows) =
        (vec![], vec![], vec![], vec![], vec![], vec![], vec![]);
    let mut zones = vec![];
    let mut owned: std::collections::BTreeMap<String, u64> = Default::default();
    for i in 0..homes {
        let file = manifest_dir(out, i).join("manifest.json");
        let text = std::fs::read_to_string(&file).map_err(|e| failed(&file, &e))?;
        let m: Value = serde_json::from_str(&text).map_err(|e| failed(&file, &e))?;
        let list: Vec<String> = m["appliances"]
            .as_array()
            .map(|a| {
                a.iter()
                    .filter_map(|x| x["id"].as_str().map(str::to_string))
                    .collect()
            })
            .unwrap_or_default();
        let mut templates: Vec<String> = m["appliances"]
            .as_array()
            .map(|a| {
                a.iter()
                    .filter_map(|x| x["template"].as_str().map(str::to_string))
                    .collect()
            })
            .unwrap_or_default();
        templates.dedup();
        for t in templates {
            *owned.entry(t).or_default() += 1;
        }
        ids.push(home_key(i));
        zones.push(m["time"]["timezone"].as_str().unwrap_or("").to_string());
        let (_, kind) = pop.home(i)?;
        kinds.push(kind);
        supplies.push(m["supply"]["kind"].as_str().unwrap_or("").to_string());
        counts.push(list.len() as i64);
        apps.push(list.join(","));
        kwh.push(m["summary"]["energy_kwh"].as_f64().unwrap_or(0.0));
        let meters = layout(i).meters.join("meters.parquet");
        rows.push(
            m["files"][meters.to_string_lossy().as_ref()]["rows"]
                .as_i64()
                .unwrap_or(0),
        );
    }
    let schema = Arc::new(Schema::new(vec![
        Field::new("home", DataType::Utf8, false),
        Field::new("kind", DataType::Utf8, false),
        Field::new("supply", DataType::Utf8, false),
        Field::new("timezone", DataType::Utf8, false),
        Field::new("appliances", DataType::Int64, false),
        Field::new("appliance_ids", DataType::Utf8, false),
        Field::new("energy_kwh", DataType::Float64, false),
        Field::new("meter_rows", DataType::Int64, false),
    ]));
    let cols: Vec<ArrayRef> = vec![
        Arc::new(StringArray::from(ids)),
        Arc::new(StringArray::from(kinds.clone())),
        Arc::new(StringArray::from(supplies)),
        Arc::new(StringArray::from(zones)),
        Arc::new(Int64Array::from(counts)),
        Arc::new(StringArray::from(apps)),
        Arc::new(Float64Array::from(kwh.clone())),
        Arc::new(Int64Array::from(rows)),
    ];
    let index = out.join("homes.parquet");
    let batch = RecordBatch::try_new(schema.clone(), cols).map_err(|e| failed(&index, &e))?;
    let mut bytes = Vec::new();
    let mut w = parquet::arrow::ArrowWriter::try_new(&mut bytes, schema, None)
        .map_err(|e| failed(&index, &e))?;
    w.write(&batch).map_err(|e| failed(&index, &e))?;
    w.close().map_err(|e| failed(&index, &e))?;
    // Never through a link planted in the output folder.
    crate::dataset::folder::write_file(&index, &bytes).map_err(|e| failed(&index, &e))?;
    write_summary(pop, homes, out, &kinds, &owned, &kwh)
}

/// The error of writing the fleet index's `file`.
fn failed(file: &Path, e: &dyn std::error::Error) -> Error {
    let help = "check free space and permissions; run the fleet again to write the index";
    Error::file(file, "writing the fleet index failed", help)
        .caused_by(e)
        .failed()
}

/// `fleet.json`: the population, the homes of each kind, how many homes own
/// each template, the fleet's energy and where its tables are.
fn write_summary(
    pop: &Population,
    homes: u64,
    out: &Path,
    kinds: &[String],
    owned: &std::collections::BTreeMap<String, u64>,
    kwh: &[f64],
) -> Result<(), Error> {
    let kind_counts: serde_json::Map<String, Value> = pop
        .kinds
        .iter()
        .map(|k| {
            (
                k.name.clone(),
                json!(kinds.iter().filter(|x| **x == k.name).count()),
            )
        })
        .collect();
    let summary = json!({
        "format": FLEET_FORMAT,
        "population": pop.path.display().to_string(),
        "label": pop.label,
        "seed": pop.seed,
        "homes": homes,
        "kinds": kind_counts,
        "ownership": owned.iter().map(|(t, n)| (t.clone(), json!({ "homes": n, "share": *n as f64 / homes as f64 }))).collect::<serde_json::Map<_, _>>(),
        "energy_kwh": kwh.iter().sum::<f64>(),
        "tables": TABLES.iter().map(|t| (t.to_string(), json!(format!("{t}/home=*/{t}.parquet")))).collect::<serde_json::Map<_, _>>(),
        "layout": "meters/, truth/ (long: a row per interval and appliance), events/: each Hive-partitioned by home (home=h00042), times in UTC; homes.parquet: one row per home with its time zone; manifests/home=h00042/: each home's manifest.json and scenario.toml",
    });
    let file = out.join("fleet.json");
    let text = serde_json::to_string_pretty(&summary).map_err(|e| failed(&file, &e))? + "\n";
    crate::dataset::folder::write_file(&file, text.as_bytes()).map_err(|e| failed(&file, &e))
}
