"""Parameter paths: ``"mechanics[0].frequency_hz"`` and the keys they name.

A path is section and key names joined by dots, with ``[index]`` after an
array of tables. These helpers split a path, list every path of a scenario,
find the objects a path runs through, and set a key in plain scenario data;
:class:`simulator.scenario.loader.Scenario` uses them for ``get``, ``replace`` and
the checks of swept paths.
"""

import re

from simulator.errors import ScenarioError
from simulator.scenario import schema


def objects_along(scenario, parts):
    """The objects from the scenario down to the owner of a plain key, or ``None``.

    ``None`` when the path leaves the sections (a missing optional section, a
    bad index, a structured value such as the sweep's parameters): the full
    reload then reports it.
    """
    chain = [scenario]
    for depth, (name, index) in enumerate(parts):
        node = chain[-1]
        fields = {f.name: f for f in schema.public_fields(type(node))}
        if name not in fields:
            return None
        kind, _, _ = schema.field_kind(type(node), name)
        if depth == len(parts) - 1:
            plain = kind == "scalar" and index is None and not fields[name].metadata.get("parser")
            return chain if plain else None
        child = getattr(node, name)
        if kind == "sections" and index is not None and index < len(child):
            child = child[index]
        elif kind != "section" or index is not None or child is None:
            return None
        chain.append(child)
    return None


def assign(data, owner, parts, value, path, source):
    """Set ``value`` at ``parts`` in plain ``data`` (of the object ``owner``), in place.

    Setting one key of an exclusive pair removes the other.
    """
    *parents, (leaf, leaf_index) = parts
    node = data
    for name, index in parents:
        if name not in node:
            node[name] = {}
        try:
            node = node[name] if index is None else node[name][index]
        except (KeyError, IndexError, TypeError):
            raise ScenarioError(f"no parameter at path {path!r}", source=source,
                                key=path) from None
    if leaf_index is not None or not isinstance(node, dict):
        raise ScenarioError(f"path {path!r} does not name a single parameter",
                            source=source, key=path)
    node[leaf] = value
    for name, index in parents:
        owner = getattr(owner, name, None)
        owner = owner[index] if index is not None and owner is not None else owner
    for group in schema.alternative_groups(type(owner)):
        if leaf in group:
            for other in group:
                if other != leaf:
                    node.pop(other, None)


def join(parts):
    """Path tokens from ``(name, index)`` pairs: ``("mechanics", 0)`` → ``"mechanics[0]"``."""
    return [name if index is None else f"{name}[{index}]" for name, index in parts]


PATH_PART = re.compile(r"^([A-Za-z_][A-Za-z0-9_]*)(?:\[(\d+)\])?$")


def split_path(path, source):
    """``(name, index)`` pairs of a path (index ``None`` for a plain name); bad syntax raises."""
    parts = []
    for token in str(path).split("."):
        match = PATH_PART.match(token)
        if not match:
            raise ScenarioError(
                f"malformed parameter path {path!r}; expected names joined by dots, "
                "with [index] after an array of tables, e.g. 'mechanics[0].frequency_hz'",
                source=source, key=str(path))
        index = match.group(2)
        parts.append((match.group(1), None if index is None else int(index)))
    return parts


def leaf_type(cls, path, source):
    """Scalar type (``float``, ``int``, ``str``, ``bool``) of the key at ``path``."""
    for name, _ in split_path(path, source):
        _, cls, _ = schema.field_kind(cls, name)
    return cls


def leaf_paths(cls, prefix):
    """Paths of the scalar keys of section ``cls`` at ``prefix``, nested tables included."""
    paths = []
    for sub in schema.public_fields(cls):
        kind, inner, _ = schema.field_kind(cls, sub.name)
        if kind == "section":
            paths += leaf_paths(inner, f"{prefix}.{sub.name}")
        else:
            paths.append(f"{prefix}.{sub.name}")
    return paths


def resolve_names(scenario, path):
    """``path`` with an entry of an array of tables named by its ``name``: ``"tones.probe.power_w"``
    → ``"tones[1].power_w"`` (also ``mechanics.drum.…``, ``cavity_modes.idler.…``).

    Paths with indices, and names that are not arrays of tables, come back unchanged; an
    unknown entry name raises :class:`ScenarioError` listing the names there are.
    """
    parts = split_path(path, scenario.source)
    out, node, k = [], scenario, 0
    while k < len(parts):
        name, index = parts[k]
        if node is None or name not in {f.name for f in schema.public_fields(type(node))}:
            break  # past the sections: the rest as given (a dBm twin, or the usual error)
        kind, _, _ = schema.field_kind(type(node), name)
        child = getattr(node, name)
        if kind == "sections" and index is None and k + 1 < len(parts):
            names = [getattr(item, "name", None) for item in child]
            entry, entry_index = parts[k + 1]
            if entry not in names or entry_index is not None:
                if entry in fields_of(child):
                    return path  # a key asked of the array itself: the usual error follows
                raise ScenarioError(
                    f"path {path!r}: no entry named {entry!r} in [[{name}]]; expected one of "
                    f"{', '.join(repr(n) for n in names if n is not None) or 'none'} "
                    f"(or an index, {name}[0])", source=scenario.source, key=path)
            index = names.index(entry)
            k += 1
        out.append((name, index))
        if kind == "sections" and index is not None and index < len(child):
            node = child[index]
        elif kind == "section":
            node = child
        else:
            node = None
        k += 1
    return ".".join(join(out + parts[k:]))


def fields_of(items):
    """Field names of the entries of an array of tables (empty when it has none)."""
    return {f.name for f in schema.public_fields(type(items[0]))} if items else set()
