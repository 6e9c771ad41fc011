"""The package reads one way: layers, no import circles, constants in one place.

The layer order is the one of docs/design.md §3.1, written out below. Every import of every
module of ``ionochem`` is read with :mod:`ast` (those inside functions too, relative ones
resolved), so a lazy import cannot hide an upward dependency or a circle. The reference is
the design document's order, not the code: the test fails when a module imports from a
higher layer, when modules import each other in a circle, or when a module other than
``ionochem/constants.py`` defines a physical constant (a module- or class-level assignment of
a number equal to one of the CODATA 2018 values listed below, Tiesinga et al. 2021, Rev.
Mod. Phys. 93, 025010, or another constant of ``constants.py``).

Known exceptions live in the allow-lists below, each with the issue that removes it; an
entry that no longer occurs fails too, so the lists only shrink.
"""

from __future__ import annotations

import ast
import math
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
PACKAGE = ROOT / "ionochem"

#: docs/design.md §3.1, lowest first. A module belongs to the first entry whose prefix
#: matches its dotted name (longest prefix wins); a prefix ending in "." takes a package.
LAYERS = (
    ("base", ("ionochem", "ionochem.constants", "ionochem.errors", "ionochem.species")),
    ("low io", ("ionochem.io", "ionochem.io.paths", "ionochem.io.csvtable", "ionochem.io.tables",
                "ionochem.io.plausibility", "ionochem.io.checks", "ionochem.io.observations",
                "ionochem.io.netcdf", "ionochem.io.sweep_file")),
    ("scenario", ("ionochem.io.scenario", "ionochem.io.scenario.")),
    ("domain", ("ionochem.mechanism", "ionochem.mechanism.", "ionochem.environment",
                "ionochem.environment.")),
    ("solve", ("ionochem.solve", "ionochem.solve.")),
    ("system", ("ionochem.system", "ionochem.system.", "ionochem.io.dataset",
                "ionochem.io.diagnostics", "ionochem.io.level_outputs")),
    ("model", ("ionochem.model",)),
    ("analysis", ("ionochem.analysis", "ionochem.analysis.", "ionochem.rates",
                  "ionochem.rates.", "ionochem.runner")),
    ("plot", ("ionochem.plot", "ionochem.plot.")),
    ("cli", ("ionochem.cli", "ionochem.cli.", "ionochem.__main__")),
)

#: Upward imports still in files owned elsewhere: (importer, imported) -> the owner's issue.
ALLOWED_UPWARD = {
    # The contract method Model.sensitivity() (docs/design.md §4) hands over to the
    # analysis, imported when called.
    ("ionochem.model", "ionochem.analysis.sensitivity"): "contract (docs/design.md §4)",
}

#: Import circles still in files owned elsewhere: frozenset of the modules -> owner's issue.
ALLOWED_CIRCLES: dict[frozenset, str] = {
    # issue 25 split the sweep's execution out of analysis/sweep.py, which re-exports it for
    # its callers; sweep_run reaches back for the points at call time. Untangle by importing
    # the execution from sweep_run in the callers.
    frozenset({"ionochem.analysis.sweep", "ionochem.analysis.sweep_run"}): "issue 25",
}

#: Physical constants still defined outside constants.py: (module, name) -> owner's issue.
ALLOWED_CONSTANTS: dict[tuple, str] = {}

#: Values of physical constants (CODATA 2018 and the other entries of constants.py), in the
#: units a module might write them in. A module-level number within REL_TOL of one of them
#: is a definition of that constant.
KNOWN_CONSTANTS = {
    "Boltzmann constant, J K-1": 1.380649e-23,
    "Boltzmann constant, eV K-1": 8.617333262e-5,
    "Boltzmann constant, erg K-1": 1.380649e-16,
    "atomic mass constant, kg": 1.66053906660e-27,
    "atomic mass constant, g": 1.66053906660e-24,
    "electron mass, kg": 9.1093837015e-31,
    "electron mass, g": 9.1093837015e-28,
    "electron mass, u": 5.48579909065e-4,
    "proton mass, kg": 1.67262192369e-27,
    "speed of light, m s-1": 299792458.0,
    "speed of light, cm s-1": 2.99792458e10,
    "speed of light, km s-1": 299792.458,
    "Planck constant, J s": 6.62607015e-34,
    "Planck constant, eV s": 4.135667696e-15,
    "elementary charge, C": 1.602176634e-19,
    "elementary charge, esu": 4.80320471e-10,
    "Avogadro constant, mol-1": 6.02214076e23,
    "molar gas constant, J mol-1 K-1": 8.314462618,
    "h c, eV angstrom": 12398.419843320026,
    "h c, eV nm": 1239.8419843320026,
    "h c / e, eV cm": 1.239841984e-4,
    "eV in K": 11604.51812,
    "Newtonian constant of gravitation": 6.67430e-11,
    "standard gravity, m s-2": 9.80665,
    "Earth radius, km": 6371.0,
    "Earth radius, m": 6.371e6,
    "Earth radius, cm": 6.371e8,
    "astronomical unit, m": 1.495978707e11,
    "astronomical unit, km": 1.495978707e8,
    "vacuum permittivity, F m-1": 8.8541878128e-12,
    "vacuum permeability, N A-2": 1.25663706212e-6,
}
REL_TOL = 3e-3


def _modules():
    """Dotted name -> path of every module of the package."""
    out = {}
    for path in sorted(PACKAGE.rglob("*.py")):
        parts = list(path.relative_to(ROOT).with_suffix("").parts)
        if parts[-1] == "__init__":
            parts.pop()
        out[".".join(parts)] = path
    return out


MODULES = _modules()


def _lazy_names():
    """The public names ``ionochem`` imports on first use (its ``_LAZY`` table)."""
    tree = ast.parse((PACKAGE / "__init__.py").read_text())
    for node in tree.body:
        if isinstance(node, ast.Assign) and any(
                isinstance(t, ast.Name) and t.id == "_LAZY" for t in node.targets):
            return ast.literal_eval(node.value)
    return {}


LAZY = _lazy_names()


def _resolve(module, name, importer, is_package, level):
    """The project module an import statement reaches, or None outside the project."""
    if level:
        base = importer.split(".")
        if not is_package:
            base = base[:-1]
        base = base[:len(base) - level + 1]
        module = ".".join(base + ([module] if module else []))
    if not module or not (module == "ionochem" or module.startswith("ionochem.")):
        return None
    if name is not None and f"{module}.{name}" in MODULES:
        return f"{module}.{name}"
    if module == "ionochem" and name in LAZY:
        return LAZY[name]
    while module not in MODULES and "." in module:
        module = module.rsplit(".", 1)[0]
    return module


def imports_of(module):
    """Project modules imported anywhere in ``module`` (inside functions too), with lines."""
    path = MODULES[module]
    tree = ast.parse(path.read_text(), filename=str(path))
    is_package = path.name == "__init__.py"
    found = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            for alias in node.names:
                target = _resolve(alias.name, None, module, is_package, 0)
                if target:
                    found.append((target, node.lineno))
        elif isinstance(node, ast.ImportFrom):
            for alias in node.names:
                target = _resolve(node.module, alias.name, module, is_package, node.level)
                if target:
                    found.append((target, node.lineno))
    return [(t, line) for t, line in found if t != module]


def layer_of(module):
    """Index of ``module``'s layer in LAYERS (longest matching prefix)."""
    best, best_len = None, -1
    for i, (_, prefixes) in enumerate(LAYERS):
        for p in prefixes:
            hit = module.startswith(p) if p.endswith(".") else module == p
            if hit and len(p) > best_len:
                best, best_len = i, len(p)
    if best is None:
        raise AssertionError(f"{module} has no layer: add it to LAYERS and docs/design.md §3.1")
    return best


def upward_imports():
    """[(importer, imported, line)] where the imported module is in a higher layer."""
    out = []
    for m in MODULES:
        for target, line in imports_of(m):
            if layer_of(target) > layer_of(m):
                out.append((m, target, line))
    return out


def circles(graph):
    """Strongly connected components with more than one module (Tarjan, iterative)."""
    index, low, on_stack, stack, out = {}, {}, set(), [], []
    counter = [0]
    for root in graph:
        if root in index:
            continue
        work = [(root, iter(sorted(graph[root])))]
        index[root] = low[root] = counter[0]
        counter[0] += 1
        stack.append(root)
        on_stack.add(root)
        while work:
            node, children = work[-1]
            for child in children:
                if child not in index:
                    index[child] = low[child] = counter[0]
                    counter[0] += 1
                    stack.append(child)
                    on_stack.add(child)
                    work.append((child, iter(sorted(graph.get(child, ())))))
                    break
                if child in on_stack:
                    low[node] = min(low[node], index[child])
            else:
                work.pop()
                if work:
                    low[work[-1][0]] = min(low[work[-1][0]], low[node])
                if low[node] == index[node]:
                    comp = set()
                    while True:
                        w = stack.pop()
                        on_stack.discard(w)
                        comp.add(w)
                        if w == node:
                            break
                    if len(comp) > 1:
                        out.append(frozenset(comp))
    return out


def import_graph():
    return {m: {t for t, _ in imports_of(m)} for m in MODULES}


def _number(node):
    """The value of a numeric literal (optionally negated), else None."""
    if isinstance(node, ast.UnaryOp) and isinstance(node.op, (ast.USub, ast.UAdd)):
        v = _number(node.operand)
        return None if v is None else (-v if isinstance(node.op, ast.USub) else v)
    if isinstance(node, ast.Constant) and type(node.value) in (int, float):
        return float(node.value)
    return None


def constant_definitions(module):
    """[(name, value, what, line)] of module- and class-level numbers equal to a constant."""
    tree = ast.parse(MODULES[module].read_text())
    bodies = [tree.body] + [n.body for n in tree.body if isinstance(n, ast.ClassDef)]
    out = []
    for body in bodies:
        for node in body:
            if isinstance(node, ast.Assign):
                targets, value = node.targets, node.value
            elif isinstance(node, ast.AnnAssign) and node.value is not None:
                targets, value = [node.target], node.value
            else:
                continue
            v = _number(value)
            if v is None or v == 0:
                continue
            for what, ref in KNOWN_CONSTANTS.items():
                if math.isclose(abs(v), ref, rel_tol=REL_TOL):
                    for t in targets:
                        if isinstance(t, ast.Name):
                            out.append((t.id, v, what, node.lineno))
    return out


def test_every_module_has_a_layer():
    """docs/design.md §3.1 places every module of the package."""
    for m in MODULES:
        layer_of(m)


def test_no_module_imports_from_a_higher_layer():
    """The layer order of docs/design.md §3.1: imports go down or sideways, never up."""
    found = upward_imports()
    bad = [f"{MODULES[m].relative_to(ROOT)}:{line}: {m} ({LAYERS[layer_of(m)][0]}) imports "
           f"{t} ({LAYERS[layer_of(t)][0]})"
           for m, t, line in found if (m, t) not in ALLOWED_UPWARD]
    assert not bad, "imports from a higher layer:\n" + "\n".join(bad)
    stale = set(ALLOWED_UPWARD) - {(m, t) for m, t, _ in found}
    assert not stale, f"allow-list entries that no longer occur (remove them): {sorted(stale)}"


def test_no_import_circles():
    """No two modules import each other, directly or through others (docs/design.md §3.1)."""
    found = circles(import_graph())
    bad = [sorted(c) for c in found if c not in ALLOWED_CIRCLES]
    assert not bad, f"import circles: {bad}"
    stale = set(ALLOWED_CIRCLES) - set(found)
    assert not stale, f"allow-list entries that no longer occur (remove them): {stale}"


def test_physical_constants_are_defined_only_in_constants_py():
    """CODATA 2018 values (Tiesinga et al. 2021) and Earth's radius are written once, in
    ionochem/constants.py (docs/style.md); every other module imports them."""
    found = {}
    for m in MODULES:
        if m == "ionochem.constants":
            continue
        for name, v, what, line in constant_definitions(m):
            found[(m, name)] = f"{MODULES[m].relative_to(ROOT)}:{line}: {name} = {v!r} ({what})"
    bad = [text for key, text in found.items() if key not in ALLOWED_CONSTANTS]
    assert not bad, "constants defined outside constants.py:\n" + "\n".join(bad)
    stale = set(ALLOWED_CONSTANTS) - set(found)
    assert not stale, f"allow-list entries that no longer occur (remove them): {sorted(stale)}"


def test_constants_py_holds_the_values_the_scan_looks_for():
    """The scan is not vacuous: constants.py itself defines values the scan recognises."""
    names = {name for name, *_ in constant_definitions("ionochem.constants")}
    assert {"K_B", "AMU_KG", "E_CHARGE_C", "HC_EV_A", "AVOGADRO", "EARTH_RADIUS_KM"} <= names


@pytest.mark.parametrize("code, expected", [
    ("def f():\n    from ionochem.cli import main\n", "ionochem.cli"),
    ("from . import sun\n", "ionochem.environment.sun"),
    ("from ionochem import Model\n", "ionochem.model"),
    ("import ionochem.plot.profiles as p\n", "ionochem.plot.profiles"),
])
def test_the_import_reader_sees_lazy_relative_and_facade_imports(tmp_path, monkeypatch, code,
                                                                  expected):
    """A planted import in a fake environment module is found and resolved (the reader
    behind the layer test cannot miss an import inside a function or a relative one)."""
    fake = tmp_path / "fake.py"
    fake.write_text(code)
    monkeypatch.setitem(MODULES, "ionochem.environment.fake", fake)
    assert expected in {t for t, _ in imports_of("ionochem.environment.fake")}


def test_circle_finder_finds_a_planted_circle():
    """Tarjan's components on a small graph: a → b → c → a is one circle, d alone is none."""
    graph = {"a": {"b"}, "b": {"c"}, "c": {"a", "d"}, "d": set()}
    assert circles(graph) == [frozenset("abc")]
