"""The packages of clinic/ are layered and import one way; no modules import each other in a circle.

Layers, lowest first. A module may import its own package and anything in a lower layer;
packages that share a layer are peers and do not import each other unless ``PEER_IMPORTS``
lists the module that may.

    0  records               values (GA and UTC text), schema, the one validation layer
    1  care                  the care engine (pure)
    2  config, care_inputs,  installation settings; the engine's inputs built from them;
       supply, accounts      anti-D supply forecasting (pure, reads plans); staff accounts,
                             roles and their permissions (config reads the roles)
    3  store, signing,       the record store; facility keys, trust list, COSE;
       printing              the one PDF path (WeasyPrint)
    4  card, reports         patient-held cards; district bundles and reports
    5  web, cli              the Flask app; the command line (cli imports web only for `serve`)

seed_demo is above all of them: clinic imports it only where ``ABOVE_IMPORTS`` says.

Imports are read with the stdlib ``ast`` module, so every one counts: at module level, inside
functions (the lazy ones), under ``if TYPE_CHECKING:``, and ``importlib.import_module("...")``
with a literal name. An import names the module it binds (``from clinic.web import stock`` is
clinic.web.stock); the parent package that Python also runs first is not an edge, or every
``__init__`` that imports its own modules would be a cycle with each of them.
"""
from __future__ import annotations

import ast
from dataclasses import dataclass
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]

LAYERS: dict[str, int] = {
    "records": 0,
    "care": 1,
    "config": 2, "care_inputs": 2, "supply": 2, "accounts": 2,
    "store": 3, "signing": 3, "printing": 3,
    "card": 4, "reports": 4,
    "web": 5, "cli": 5,
}
LAYER_NAMES = " < ".join(", ".join(u for u, r in LAYERS.items() if r == rank)
                         for rank in sorted(set(LAYERS.values())))
# (importing package, imported peer): the only modules that may make that import.
PEER_IMPORTS: dict[tuple[str, str], set[str]] = {
    ("cli", "web"): {"clinic.cli.web_cmds"},     # `rhledger serve` / `rhledger demo` start the web app
    ("config", "accounts"): {"clinic.config"},   # the roles an older config.toml account may hold
}
# Project packages beside clinic/ that sit above it: the only modules of clinic that may import them.
ABOVE_IMPORTS: dict[str, set[str]] = {
    "seed_demo": {"clinic.cli.web_cmds"},        # `rhledger demo` builds the invented demo data
    "tests": set(),
    "bench": set(),
    "scripts": set(),
}


@dataclass(frozen=True)
class Edge:
    source: str       # importing module, e.g. clinic.web.helpers
    target: str       # imported module, e.g. clinic.web.clock, or seed_demo.scenario
    path: str         # importing file, relative to the root
    line: int

    def where(self) -> str:
        return f"{self.path}:{self.line}"


def module_names(root: Path) -> dict[str, Path]:
    """Every module under root/clinic, by dotted name (a package by its __init__.py)."""
    out = {}
    for p in sorted((root / "clinic").rglob("*.py")):
        parts = list(p.relative_to(root).with_suffix("").parts)
        if parts[-1] == "__init__":
            parts.pop()
        out[".".join(parts)] = p
    return out


def _literal_import_module(node: ast.Call) -> str | None:
    f = node.func
    named = (isinstance(f, ast.Attribute) and f.attr == "import_module") or \
            (isinstance(f, ast.Name) and f.id in ("import_module", "__import__"))
    if named and node.args and isinstance(node.args[0], ast.Constant) and isinstance(node.args[0].value, str):
        return node.args[0].value
    return None


def imports_of(name: str, path: Path, root: Path, modules: dict[str, Path]) -> list[Edge]:
    """The imports in one file of the project's own packages (clinic and those in ABOVE_IMPORTS)."""
    tree = ast.parse(path.read_text(encoding="utf-8"), str(path))
    rel = path.relative_to(root).as_posix()
    package = name.split(".") if path.name == "__init__.py" else name.split(".")[:-1]
    ours = {"clinic", *ABOVE_IMPORTS}
    found: list[tuple[str, int]] = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            found += [(a.name, node.lineno) for a in node.names]
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = package[:len(package) - (node.level - 1)]
                mod = ".".join(base + ([node.module] if node.module else []))
            else:
                mod = node.module or ""
            for a in node.names:
                sub = f"{mod}.{a.name}"
                found.append((sub if sub in modules else mod, node.lineno))
        elif isinstance(node, ast.Call):
            lit = _literal_import_module(node)
            if lit:
                found.append((lit, node.lineno))
    # ``from x import a, b`` is one edge, not one per name.
    return list(dict.fromkeys(Edge(name, t, rel, line) for t, line in found
                              if t.split(".")[0] in ours and t != name))


def scan(root: Path) -> tuple[dict[str, Path], list[Edge]]:
    modules = module_names(root)
    edges = [e for name, p in modules.items() for e in imports_of(name, p, root, modules)]
    return modules, edges


def unit_of(module: str) -> str | None:
    """The layered package of a clinic module ("care" for clinic.care.plan); None for clinic itself."""
    parts = module.split(".")
    return parts[1] if len(parts) > 1 else None


def layer_problems(modules: dict[str, Path], edges: list[Edge]) -> list[str]:
    """Every import that runs up the layers, across peers, or to a module that does not exist."""
    out = []
    for name, p in modules.items():
        unit = unit_of(name)
        if unit is not None and unit not in LAYERS:
            out.append(f"{p.name} ({name}): package {unit!r} has no layer; add it to LAYERS in tests/test_layers.py")
    for e in edges:
        top = e.target.split(".")[0]
        if top != "clinic":
            if e.source not in ABOVE_IMPORTS.get(top, set()):
                out.append(f"{e.where()}: {e.source} imports {e.target}, but {top} sits above clinic/ "
                           f"(rule: clinic imports {top} only from {sorted(ABOVE_IMPORTS.get(top)) or 'nowhere'})")
            continue
        if e.target not in modules:
            out.append(f"{e.where()}: {e.source} imports {e.target}, which is not a module of clinic/")
            continue
        src, dst = unit_of(e.source), unit_of(e.target)
        if dst is None or src == dst or src not in LAYERS or dst not in LAYERS:
            if src is None and dst is not None:
                out.append(f"{e.where()}: the clinic package itself imports {e.target} (rule: clinic/__init__.py "
                           f"imports nothing of ours)")
            continue
        if LAYERS[dst] > LAYERS[src]:
            out.append(f"{e.where()}: {e.source} ({src}, layer {LAYERS[src]}) imports {e.target} "
                       f"({dst}, layer {LAYERS[dst]}): an import may not run up the layers ({LAYER_NAMES})")
        elif LAYERS[dst] == LAYERS[src] and e.source not in PEER_IMPORTS.get((src, dst), set()):
            allowed = sorted(PEER_IMPORTS.get((src, dst), set()))
            out.append(f"{e.where()}: {e.source} imports {e.target}: {src} and {dst} are peers in layer "
                       f"{LAYERS[src]} and do not import each other"
                       + (f" (rule: only {', '.join(allowed)} may)" if allowed else ""))
    return out


def cycles(edges: list[Edge]) -> list[list[Edge]]:
    """One cycle (as the edges that make it) through each group of clinic modules that import each
    other in a circle (the strongly connected components of the module graph)."""
    graph: dict[str, dict[str, Edge]] = {}
    for e in edges:
        if e.target.split(".")[0] == "clinic":
            graph.setdefault(e.source, {}).setdefault(e.target, e)
            graph.setdefault(e.target, {})
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    groups: list[list[str]] = []

    def strongconnect(v: str) -> None:     # Tarjan; the module graph is small and shallow
        index[v] = low[v] = len(index)
        stack.append(v)
        on_stack.add(v)
        for w in sorted(graph[v]):
            if w not in index:
                strongconnect(w)
                low[v] = min(low[v], low[w])
            elif w in on_stack:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            group = []
            while True:
                w = stack.pop()
                on_stack.discard(w)
                group.append(w)
                if w == v:
                    break
            if len(group) > 1:
                groups.append(sorted(group))

    for v in sorted(graph):
        if v not in index:
            strongconnect(v)
    out = []
    for group in groups:
        members = set(group)
        start = group[0]
        # Shortest way back to start inside the group (breadth first), so the path shown is short.
        prev: dict[str, Edge] = {}
        frontier = [start]
        while frontier and start not in prev:
            nxt = []
            for v in frontier:
                for w, e in sorted(graph[v].items()):
                    if w in members and w not in prev:
                        prev[w] = e
                        nxt.append(w)
            frontier = nxt
        path, v = [], start
        while True:
            e = prev[v]
            path.append(e)
            v = e.source
            if v == start:
                break
        out.append(path[::-1])
    return out


def cycle_text(cycle: list[Edge]) -> str:
    hops = "\n".join(f"    {e.where()}: {e.source} imports {e.target}" for e in cycle)
    return f"import cycle {' -> '.join([e.source for e in cycle] + [cycle[0].source])}:\n{hops}"


# ---- the project ---------------------------------------------------------------------

def test_the_scan_sees_the_project():
    modules, edges = scan(ROOT)
    assert {unit_of(m) for m in modules} - {None} == set(LAYERS)
    pairs = {(e.source, e.target) for e in edges}
    # A module-level, a function-level and a package-level import that are known to exist.
    assert ("clinic.records.validate", "clinic.records.values") in pairs
    assert ("clinic.web", "clinic.web.api") in pairs
    assert ("clinic.care", "clinic.care.plan") in pairs


def test_no_import_cycles_between_modules():
    _, edges = scan(ROOT)
    found = cycles(edges)
    assert not found, "modules of clinic/ import each other in a circle; move the shared piece into a " \
                      "module both can import:\n" + "\n".join(cycle_text(c) for c in found)


def test_imports_point_down_the_layers():
    modules, edges = scan(ROOT)
    problems = layer_problems(modules, edges)
    assert not problems, "imports against the layers of clinic/:\n" + "\n".join(problems)


# ---- the checker itself (so the tests above cannot pass by seeing nothing) ------------

def _tree(root: Path, files: dict[str, str]) -> Path:
    for rel, text in files.items():
        p = root / rel
        p.parent.mkdir(parents=True, exist_ok=True)
        p.write_text(text, encoding="utf-8")
    return root


def test_checker_finds_cycles_and_imports_against_the_layers(tmp_path):
    root = _tree(tmp_path, {
        "clinic/__init__.py": "",
        "clinic/records/__init__.py": "",
        "clinic/records/a.py": "def f():\n    from clinic.care import b\n    return b\n",
        "clinic/care/__init__.py": "",
        "clinic/care/b.py": "from typing import TYPE_CHECKING\n\nif TYPE_CHECKING:\n    from clinic.care.c import X\n",
        "clinic/care/c.py": "import clinic.care.b\nfrom clinic.records.a import f\nX = 1\n",
        "clinic/card/__init__.py": "",
        "clinic/card/d.py": "from clinic.reports import e\n",
        "clinic/reports/__init__.py": "",
        "clinic/reports/e.py": "import importlib\nm = importlib.import_module('clinic.cli.g')\n",
        "clinic/cli/__init__.py": "",
        "clinic/cli/g.py": "from clinic.web import h\nimport seed_demo.scenario\nfrom . import k\n",
        "clinic/cli/k.py": "",
        "clinic/web/__init__.py": "",
        "clinic/web/h.py": "import clinic.records.nothing_here\n",
    })
    modules, edges = scan(root)
    assert ("clinic.cli.g", "clinic.cli.k") in {(e.source, e.target) for e in edges}   # relative import

    found = cycles(edges)
    assert [[e.source for e in c] for c in found] == [["clinic.care.b", "clinic.care.c"]]
    text = cycle_text(found[0])
    assert "clinic/care/b.py:4: clinic.care.b imports clinic.care.c" in text
    assert "clinic/care/c.py:1: clinic.care.c imports clinic.care.b" in text

    problems = layer_problems(modules, edges)
    expected = [
        "clinic/records/a.py:2: clinic.records.a (records, layer 0) imports clinic.care.b (care, layer 1)",
        "clinic/card/d.py:1: clinic.card.d imports clinic.reports.e: card and reports are peers",
        "clinic/reports/e.py:2: clinic.reports.e (reports, layer 4) imports clinic.cli.g (cli, layer 5)",
        "clinic/cli/g.py:1: clinic.cli.g imports clinic.web.h: cli and web are peers in layer 5 and do not "
        "import each other (rule: only clinic.cli.web_cmds may)",
        "clinic/cli/g.py:2: clinic.cli.g imports seed_demo.scenario, but seed_demo sits above clinic/",
        "clinic/web/h.py:1: clinic.web.h imports clinic.records.nothing_here, which is not a module",
    ]
    for want in expected:
        assert any(p.startswith(want) for p in problems), (want, problems)
    assert len(problems) == len(expected), problems


def test_checker_accepts_what_the_rules_allow(tmp_path):
    root = _tree(tmp_path, {
        "clinic/__init__.py": "",
        "clinic/records/__init__.py": "",
        "clinic/records/a.py": "",
        "clinic/care/__init__.py": "from clinic.care import b\n",
        "clinic/care/b.py": "from clinic.records.a import *\n",
        "clinic/cli/__init__.py": "",
        "clinic/cli/web_cmds.py": ("def run():\n    from clinic.web import create_app\n"
                                   "    from seed_demo.scenario import x\n"),
        "clinic/web/__init__.py": "from clinic.care.b import y\n",
    })
    modules, edges = scan(root)
    assert cycles(edges) == []
    assert layer_problems(modules, edges) == []
