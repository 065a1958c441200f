"""No import cycles between sibling modules, at every level of both crates.

For each parent module, an edge A -> B joins two of its child modules when
any file inside A names anything inside B (a `use` path or a path in code
starting with `crate::`, `super::`, `self::` or a child module's name;
comments and strings are left out). A strongly connected component of more
than one child is a cycle: the modules of that level would no longer depend
one way. A mod.rs using its own children while they use the mod.rs's items
(re-exports, shared types) is a parent-child link, not counted.
The module tree is read from the `mod NAME;` declarations, starting at the
crate roots. A text scan, not a Rust parser: a path written inside a macro
definition counts where the macro is defined, and a `#[path]` module would
go unseen (the crates have none).
"""
import pathlib
import re
from collections import defaultdict

ROOT = pathlib.Path(__file__).resolve().parents[2]
CRATES = ["sim/lib.rs", "solver-check/src/lib.rs", "sim/main.rs"]


def strip(text):
    """The code without comments, string and char literals."""
    text = re.sub(r"/\*.*?\*/", " ", text, flags=re.S)
    text = re.sub(r'r(#*)".*?"\1', '""', text, flags=re.S)
    text = re.sub(r'"(?:\\.|[^"\\])*"', '""', text)
    text = re.sub(r"'(?:\\.|[^'\\])'", "''", text)
    return re.sub(r"//[^\n]*", "", text)


def module_files(root):
    """{module path (tuple): code} following `mod NAME;` from a crate root."""
    out = {}

    def walk(f, path):
        code = strip(f.read_text())
        out[path] = code
        base = f.parent if f.name in ("lib.rs", "main.rs", "mod.rs") else f.parent / f.stem
        for name in re.findall(r"(?m)^\s*(?:pub(?:\([^)]*\))?\s+)?mod\s+(\w+)\s*;", code):
            child = base / f"{name}.rs"
            if not child.exists():
                child = base / name / "mod.rs"
            walk(child, path + (name,))

    walk(root, ())
    return out


def flatten(tree, prefix=""):
    """`a::{b, c::{d}}` -> ["a::b", "a::c::d"]."""
    if "{" not in tree:
        return [prefix + tree]
    i = tree.index("{")
    head, body = tree[:i], tree[i + 1 : tree.rindex("}")]
    parts, depth, cur = [], 0, ""
    for ch in body:
        depth += (ch == "{") - (ch == "}")
        if ch == "," and depth == 0:
            parts.append(cur)
            cur = ""
        else:
            cur += ch
    parts.append(cur)
    return [p for part in parts if part for p in flatten(part, prefix + head)]


def targets(mod, code, modules, children):
    """The modules that the code of module `mod` names."""
    paths = [p for m in re.findall(r"\buse\s+([^;]+);", code) for p in flatten(re.sub(r"\s", "", m))]
    paths += re.findall(r"\b(?:crate|super|self)(?:::\w+)+", code)
    for c in children[mod]:
        paths += re.findall(r"\b%s(?:::\w+)+" % c, code)
    out = set()
    for p in paths:
        segs = p.split("::")
        if segs[0] == "crate":
            cur, segs = (), segs[1:]
        elif segs[0] in ("super", "self") or segs[0] in children[mod]:
            cur = mod
            while segs and segs[0] in ("super", "self"):
                cur = cur[:-1] if segs[0] == "super" else cur
                segs = segs[1:]
        else:
            continue
        for s in segs:
            if cur + (s,) not in modules:
                break
            cur = cur + (s,)
        out.add(cur)
    return out


def strongly_connected(nodes, edges):
    """Tarjan's strongly connected components."""
    index, low, stack, on, comps = {}, {}, [], set(), []

    def visit(v):
        index[v] = low[v] = len(index)
        stack.append(v)
        on.add(v)
        for w in edges[v]:
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            comp = []
            while not comp or comp[-1] != v:
                comp.append(stack.pop())
                on.discard(comp[-1])
            comps.append(sorted(comp))

    for v in sorted(nodes):
        if v not in index:
            visit(v)
    return comps


def sibling_cycles(root):
    """[(parent, [children in one cycle], edges among them)] of a crate."""
    files = module_files(root)
    children = defaultdict(set)
    for m in files:
        if m:
            children[m[:-1]].add(m[-1])
    named = {m: targets(m, code, files, children) for m, code in files.items()}
    found = []
    for parent in sorted(children):
        n = len(parent)
        edges = defaultdict(set)
        for src, tgts in named.items():
            if src[:n] == parent and len(src) > n:
                for t in tgts:
                    if t[:n] == parent and len(t) > n and t[n] != src[n]:
                        edges[src[n]].add(t[n])
        for comp in strongly_connected(children[parent], edges):
            if len(comp) > 1:
                links = sorted(f"{a} -> {b}" for a in comp for b in edges[a] if b in comp)
                found.append(("::".join(parent) or "crate", comp, links))
    return found


def test_no_cycles_between_sibling_modules():
    for crate in CRATES:
        assert sibling_cycles(ROOT / crate) == [], crate


def test_a_cycle_is_found(tmp_path):
    """The check can fail: a crate whose `a` and `b` name each other, and
    whose `c` names `a` only."""
    (tmp_path / "lib.rs").write_text("mod a;\nmod b;\nmod c;\n")
    (tmp_path / "a.rs").write_text("use crate::b::Thing;\n// crate::c::Other in a comment\n")
    (tmp_path / "b.rs").write_text("pub struct Thing;\nfn f() { super::a::g(); }\n")
    (tmp_path / "c.rs").write_text('use super::{a::g, b};\nconst S: &str = "crate::c";\n')
    assert sibling_cycles(tmp_path / "lib.rs") == [("crate", ["a", "b"], ["a -> b", "b -> a"])]
