"""Tests of the code itself (DEVELOPERS.md, "Conventions in the code").

* every public field of every scenario section is documented, carries the
  unit its name promises, and appears in the generated scenario reference;
* every public function, class and method of the package has a docstring;
* physics modules keep plotting, the command line and file formats out of
  their imports (DEVELOPERS.md: "Physics modules never import matplotlib,
  the CLI or file formats").
"""

import ast
import importlib
import inspect
import pkgutil
import re
from pathlib import Path

import pytest

import simulator
from simulator import schema
from simulator.scenario import Scenario

PACKAGE_DIR = Path(simulator.__file__).parent

# Unit suffix of a key → unit symbol(s) its metadata must give (docs/physics.md §1).
SUFFIX_UNITS = {
    "_a_per_sqrt_hz": ("A/√Hz",), "_rad2_per_hz": ("rad²/Hz",), "_per_hz": ("1/Hz",),
    "_hz": ("Hz",), "_w": ("W",), "_m": ("m",),
    "_kg": ("kg",), "_k": ("K",), "_s": ("s",), "_v": ("V",), "_rad": ("rad",),
    "_ohm": ("Ω", "V/A"),
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

PHYSICS_MODULES = ["operating_point", "model", "statespace", "steady_state",
                   "weak_coupling", "physics", "scenario", "schema", "inspection"]
FORBIDDEN = ("matplotlib", "simulator.cli", "h5py", "xarray", "netCDF4", "h5netcdf")


@pytest.mark.parametrize("name", PHYSICS_MODULES)
def test_physics_modules_do_not_import_the_edges(name):
    tree = ast.parse((PACKAGE_DIR / f"{name}.py").read_text(encoding="utf-8"))
    imported = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            imported |= {a.name for a in node.names}
        elif isinstance(node, ast.ImportFrom) and node.module:
            imported.add(node.module)
            imported |= {f"{node.module}.{a.name}" for a in node.names}
    bad = sorted(m for m in imported for f in FORBIDDEN if m == f or m.startswith(f + "."))
    assert not bad, f"simulator.{name} imports {bad}"
