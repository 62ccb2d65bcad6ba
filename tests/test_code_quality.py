"""Tests of the code itself (DEVELOPERS.md, "Conventions in the code").

* every public field of every scenario section is documented, carries the
  unit its name promises, and appears in the generated scenario reference;
* every public function, class and method of the package has a docstring;
* physics modules (every module but the listed edges: command line, plots,
  reports, file formats, workflows) keep plotting, the command line, file
  formats, terminal display and HTML out of their imports (DEVELOPERS.md:
  "Physics modules never import matplotlib, the CLI or file formats");
* the package's import graph has no cycles (today's are expected failures).
"""

import ast
import importlib
import inspect
import pkgutil
import re
from pathlib import Path

import pytest

import simulator
from simulator.scenario import schema
from simulator.scenario.loader import Scenario

PACKAGE_DIR = Path(simulator.__file__).parent

# Unit suffix of a key → unit symbol(s) its metadata must give (docs/physics.md §1).
SUFFIX_UNITS = {
    "_a_per_sqrt_hz": ("A/√Hz",), "_rad2_per_hz": ("rad²/Hz",), "_per_hz": ("1/Hz",),
    "_hz": ("Hz",), "_w": ("W",), "_m": ("m",),
    "_kg": ("kg",), "_k": ("K",), "_s": ("s",), "_v": ("V",), "_rad": ("rad",),
    "_ohm": ("Ω", "V/A"), "_db": ("dB",),
}


def section_fields(cls=Scenario, path=""):
    """(section path, section class, field) for every scalar key, recursively."""
    out = []
    for f in schema.public_fields(cls):
        kind, tp, _ = schema.field_kind(cls, f.name)
        if kind == "scalar":
            out.append((path, cls, f))
        else:
            out += section_fields(tp, f"{path}.{f.name}" if path else f.name)
    return out


FIELDS = section_fields()


def test_schema_walk_finds_the_foundation_keys():
    found = {f"{p}.{f.name}" for p, _, f in FIELDS}
    assert {"drive.power_w", "cavity.external_linewidth_hz", "mechanics.coupling_hz",
            "mechanics.bath_temperature_k", "detection.efficiency"} <= found


@pytest.mark.parametrize("section, cls, field", FIELDS,
                         ids=[f"{p}.{f.name}" for p, _, f in FIELDS])
def test_every_scenario_key_is_documented(section, cls, field):
    doc = field.metadata.get("doc", "")
    assert doc.strip(), f"{section}.{field.name} has no doc"
    assert doc.strip().lower() != field.name.replace("_", " ")
    for suffix in sorted(SUFFIX_UNITS, key=len, reverse=True):
        if field.name.endswith(suffix):
            assert field.metadata.get("unit") in SUFFIX_UNITS[suffix], (
                f"{section}.{field.name} ends in {suffix} but its unit is "
                f"{field.metadata.get('unit')!r}")
            break
    else:
        assert not field.metadata.get("unit"), (
            f"{section}.{field.name} has unit {field.metadata['unit']!r} but no unit "
            "suffix in its name")


def test_every_section_is_documented():
    for f in schema.public_fields(Scenario):
        assert f.metadata.get("doc", "").strip(), f"section {f.name} has no doc"


def test_reference_table_covers_every_key():
    text = schema.reference_markdown(Scenario)
    chunks = re.split(r"\n(?=## )", text)
    by_section = {}
    for chunk in chunks:
        match = re.match(r"## `\[{1,2}([A-Za-z_.]+)\]{1,2}`", chunk)
        if match:
            by_section[match.group(1)] = chunk
    for section, _, field in FIELDS:
        assert section in by_section, f"no section [{section}] in the reference"
        assert f"| `{field.name}` |" in by_section[section], (
            f"{section}.{field.name} is missing from the reference table")
        if field.metadata.get("unit"):
            row = next(line for line in by_section[section].splitlines()
                       if line.startswith(f"| `{field.name}` |"))
            assert field.metadata["unit"] in row


# -- docstrings -------------------------------------------------------------------

def package_modules():
    names = []
    for info in pkgutil.walk_packages([str(PACKAGE_DIR)], prefix="simulator."):
        if info.name.split(".")[-1] != "__main__":
            names.append(info.name)
    return sorted(names)


MODULES = package_modules()


def public_members(module):
    """Public functions, classes and methods defined in ``module``."""
    for name, obj in vars(module).items():
        if name.startswith("_"):
            continue
        if inspect.isfunction(obj) and obj.__module__ == module.__name__:
            yield name, obj
        elif inspect.isclass(obj) and obj.__module__ == module.__name__:
            yield name, obj
            for attr, member in vars(obj).items():
                if attr.startswith("_"):
                    continue
                target = member.fget if isinstance(member, property) else member
                if isinstance(target, (staticmethod, classmethod)):
                    target = target.__func__
                if inspect.isfunction(target):
                    yield f"{name}.{attr}", target


@pytest.mark.parametrize("name", MODULES)
def test_every_public_function_has_a_docstring(name):
    module = importlib.import_module(name)
    assert (module.__doc__ or "").strip(), f"module {name} has no docstring"
    missing = [qual for qual, obj in public_members(module)
               if not (inspect.getdoc(obj) or "").strip()
               or (inspect.isclass(obj) and obj.__doc__ is None)]
    assert not missing, f"{name}: no docstring on {', '.join(missing)}"


# -- import discipline ------------------------------------------------------------
#
# The package reads as the pipeline (docs/architecture.md): scenario → model →
# linear and records → master and analysis; io and report at the edges;
# workflows and the command line on top. A module imports only from its own
# stage or the stages below it, and the physics stages never import the edges
# or the libraries that belong to them.

LAYERS = {  # package → rank; a module may import packages of the same or a lower rank
    "simulator.errors": 0,
    "simulator.data": 0,
    "simulator.scenario": 1,
    "simulator.model": 2,
    "simulator.linear": 3,
    "simulator.records": 4,
    "simulator.master": 5,
    "simulator.analysis": 5,
    "simulator.io": 6,
    "simulator.report": 6,
    "simulator.workflows": 7,
    "simulator.cli": 8,
    "simulator.__main__": 9,
    "simulator": 0,  # the package face: __version__ and lazy names, nothing imported at load
}
PHYSICS = ("simulator.scenario", "simulator.model", "simulator.linear", "simulator.records",
           "simulator.master", "simulator.analysis")

# What a physics module must not import, by why.
FORBIDDEN = {
    "plotting": ("matplotlib", "simulator.report"),
    "the command line": ("simulator.cli", "simulator.__main__"),
    "file formats": ("h5py", "xarray", "netCDF4", "h5netcdf", "simulator.io"),
    "terminal display": ("tqdm", "rich"),
    "HTML": ("html",),
    "workflows": ("simulator.workflows",),
}

# The one hand-off the design allows: a result type that saves itself by
# passing itself to io (the formats live there), imported when called.
ALLOWED_HANDOFFS = {
    ("simulator.linear.spectrum", "simulator.io.spectrumfile"):
        "Spectrum.save hands off to io.spectrumfile.save_spectrum",
}


def layer_of(module):
    """The package ``module`` belongs to, as a key of LAYERS."""
    parts = module.split(".")
    while parts and ".".join(parts) not in LAYERS:
        parts.pop()
    return ".".join(parts)


def module_files():
    """Dotted module name → source file, for every .py file of the package."""
    files = {}
    for path in sorted(PACKAGE_DIR.rglob("*.py")):
        parts = list(path.relative_to(PACKAGE_DIR.parent).with_suffix("").parts)
        if parts[-1] == "__init__":
            parts.pop()
        files[".".join(parts)] = path
    return files


MODULE_FILES = module_files()
PHYSICS_MODULES = sorted(m for m in MODULE_FILES if layer_of(m) in PHYSICS)


def imported_names(source, module):
    """Every name ``module``'s source imports, inside functions too.

    ``from a.b import c`` gives ``a.b`` and ``a.b.c`` (c may be a module);
    relative imports are resolved against ``module``'s package.
    """
    names = set()
    for node in ast.walk(ast.parse(source)):
        if isinstance(node, ast.Import):
            names |= {a.name for a in node.names}
        elif isinstance(node, ast.ImportFrom):
            base = node.module or ""
            if node.level:
                package = module.split(".")
                if not str(MODULE_FILES.get(module, "")).endswith("__init__.py"):
                    package = package[:-1]
                package = package[:len(package) - node.level + 1]
                base = ".".join(package + ([base] if base else []))
            names.add(base)
            names |= {f"{base}.{a.name}" for a in node.names}
    return names


def edge_imports(source, module):
    """(forbidden name, why) for every edge that ``source`` imports."""
    imported = imported_names(source, module)
    found = {(_module_of(m), why) for why, group in FORBIDDEN.items() for f in group
             for m in imported if m == f or m.startswith(f + ".")}
    # `from simulator.io import files` names the package too: report the module only
    return sorted((m, why) for m, why in found
                  if not any(o.startswith(m + ".") for o, _ in found))


def _module_of(name):
    """The module (not the name inside it) that an imported dotted name refers to."""
    parts = name.split(".")
    while len(parts) > 1 and ".".join(parts) not in MODULE_FILES:
        parts.pop()
    return ".".join(parts) if parts[0] == "simulator" else name.split(".")[0]


def test_every_module_has_a_layer():
    unplaced = sorted(m for m in MODULE_FILES if not layer_of(m))
    assert not unplaced, f"modules outside every layer of LAYERS: {unplaced}"
    assert len(PHYSICS_MODULES) >= 30 and "simulator.records.generate" in PHYSICS_MODULES


@pytest.mark.parametrize("name", PHYSICS_MODULES)
def test_physics_modules_do_not_import_the_edges(name):
    found = edge_imports(MODULE_FILES[name].read_text(encoding="utf-8"), name)
    bad = [f"{f} ({why})" for f, why in found if (name, f) not in ALLOWED_HANDOFFS]
    assert not bad, (f"{name} is a physics module but imports {', '.join(bad)}; move that "
                     "code to an edge (command line, report, io or workflows)")


@pytest.mark.parametrize("name", sorted(MODULE_FILES))
def test_imports_point_down_the_pipeline(name):
    rank = LAYERS[layer_of(name)]
    allowed = {edge for module, edge in ALLOWED_HANDOFFS if module == name}
    imported = {layer_of(m) for m in imported_names(MODULE_FILES[name].read_text(
        encoding="utf-8"), name) if m.split(".")[0] == "simulator"
        and not any(m == a or m.startswith(a + ".") or a.startswith(m + ".") for a in allowed)}
    upward = sorted(m for m in imported if m and LAYERS[m] > rank)
    assert not upward, (f"{name} (layer {layer_of(name)}) imports {', '.join(upward)}, "
                        "a later stage of the pipeline")


@pytest.mark.parametrize("name, edge", sorted(ALLOWED_HANDOFFS))
def test_every_allowed_handoff_is_still_there(name, edge):
    found = {f for f, _ in edge_imports(MODULE_FILES[name].read_text(encoding="utf-8"), name)}
    assert edge in found, f"{name} no longer imports {edge}: remove it from ALLOWED_HANDOFFS"


def test_the_import_check_can_fail():
    planted = ("import numpy as np\n"
               "def draw():\n"
               "    import matplotlib.pyplot as plt\n"
               "    from simulator.cli.parser import main\n"
               "    from simulator.io import recordfile\n"
               "    from tqdm import tqdm\n")
    found = [f for f, _ in edge_imports(planted, "simulator.planted")]
    assert found == ["matplotlib", "simulator.cli.parser", "simulator.io.recordfile", "tqdm"]
    assert edge_imports("from ..report import html\n", "simulator.linear.planted") == [
        ("simulator.report.html", "plotting")]


# -- import cycles ------------------------------------------------------------------
#
# A module graph without cycles can be read, tested and split from the bottom
# up; any cycle fails.

def import_graph(files):
    """Module → set of package modules it imports (inside functions too)."""
    def resolve(name):
        parts = name.split(".")
        while parts and ".".join(parts) not in files:
            parts.pop()
        return ".".join(parts) or None

    graph = {}
    for name, source in files.items():
        targets = {resolve(m) for m in imported_names(source, name)
                   if m.split(".")[0] == "simulator"}
        graph[name] = targets - {None, name}
    return graph


def import_cycles(graph):
    """The strongly connected components of more than one module, sorted.

    Tarjan's algorithm (Tarjan, SIAM J. Comput. 1, 146 (1972)), iterative
    so that a deep package cannot exhaust the recursion limit.
    """
    index, low, stack, on_stack, cycles = {}, {}, [], set(), []
    for root in sorted(graph):
        if root in index:
            continue
        work = [(root, iter(sorted(graph[root])))]
        index[root] = low[root] = len(index)
        stack.append(root)
        on_stack.add(root)
        while work:
            node, children = work[-1]
            child = next(children, None)
            if child is not None:
                if child not in index:
                    index[child] = low[child] = len(index)
                    stack.append(child)
                    on_stack.add(child)
                    work.append((child, iter(sorted(graph.get(child, ())))))
                elif child in on_stack:
                    low[node] = min(low[node], index[child])
                continue
            work.pop()
            if work:
                low[work[-1][0]] = min(low[work[-1][0]], low[node])
            if low[node] == index[node]:
                component = set()
                while True:
                    member = stack.pop()
                    on_stack.discard(member)
                    component.add(member)
                    if member == node:
                        break
                if len(component) > 1:
                    cycles.append(sorted(component))
    return sorted(cycles)


def package_graph():
    return import_graph({name: path.read_text(encoding="utf-8")
                         for name, path in MODULE_FILES.items()})


def test_import_graph_has_no_cycle():
    cycles = import_cycles(package_graph())
    assert not cycles, f"import cycles: {cycles}"


def test_the_cycle_finder_can_fail():
    graph = {"a": {"b"}, "b": {"c"}, "c": {"a", "d"}, "d": set(), "e": {"e"}}
    assert import_cycles(graph) == [["a", "b", "c"]]
    assert import_cycles({"a": {"b"}, "b": {"c"}, "c": set()}) == []
    files = {"simulator.x": "def f():\n    from simulator.y import g\n",
             "simulator.y": "import simulator.x\n"}
    assert import_cycles(import_graph(files)) == [["simulator.x", "simulator.y"]]
