"""Finding the sweep or the map inside a container of named arrays (HDF5, .mat, netCDF).

A container is described by the shapes of its numeric arrays, keyed by their
full names (``'scan/field'`` in HDF5, ``'scan.B_mT'`` in a MATLAB struct).
The group (HDF5 group, MATLAB struct) whose arrays are recognised by name is
chosen; several such groups, or none, are refused with a list of what the file
holds and the options that select it.
"""

from __future__ import annotations

from ..errors import InputError
from .limits import clip
from .maps import map_role
from .sweep import ic_branch_hint, is_field_name
from .units import split_header

#: Arrays named in a message before "and N more".
LISTED = 12


def split_name(name: str, sep: str) -> tuple[str, str]:
    """``('scan', 'field')`` for ``'scan/field'`` (``sep='/'``); the root group is ``''``."""
    group, _, leaf = name.strip(sep).rpartition(sep)
    return group, leaf


def listing(shapes: dict, limit: int = LISTED) -> str:
    """``'B_mT' (201,), 'scan/V' (201, 401)`` and how many more."""
    items = [f"{clip(name)} {tuple(shape)}" for name, shape in shapes.items()]
    more = f" and {len(items) - limit} more" if len(items) > limit else ""
    return ", ".join(items[:limit]) + more


def role_of(leaf: str, coil: bool) -> str | None:
    name = split_header(leaf)[0]
    if is_field_name(name, coil=coil):
        return "field"
    if ic_branch_hint(name) is not None:
        return "ic"
    return map_role(name)


def _vector_length(shape) -> int | None:
    shape = tuple(int(s) for s in shape)
    if len(shape) == 1:
        return shape[0]
    if len(shape) == 2 and min(shape) == 1:  # MATLAB keeps vectors as 1 x n or n x 1
        return max(shape)
    return None


def find_group(shapes: dict, *, sep: str, source: str, settings, kind: str, what: str,
               option_names: tuple[str, str] = ("dataset", "path")) -> tuple[str, str, list]:
    """The group holding a sweep or a map, its kind, and the names of its arrays.

    Parameters
    ----------
    shapes : dict
        Full name to shape of every numeric array in the container.
    kind : {"auto", "sweep", "map"}
        As asked by the caller; ``"auto"`` takes a map when the chosen group
        holds a 2-D voltage or dV/dI array.
    what : str
        The container in words for messages (``'the HDF5 file'``).

    Returns
    -------
    group, kind, names
        ``kind`` is ``"sweep"`` or ``"map"``; ``names`` are full names of the
        group's arrays (vectors for a sweep, everything for a map).
    """
    coil = settings.coil_T_per_A is not None
    groups: dict[str, dict] = {}
    for name, shape in shapes.items():
        group, leaf = split_name(name, sep)
        groups.setdefault(group, {})[name] = (leaf, tuple(shape))
    found = []
    for group, members in groups.items():
        roles = {}
        for name, (leaf, shape) in members.items():
            role = role_of(leaf, coil)
            if role is not None:
                roles.setdefault(role, []).append((name, shape))
        is_map = "field" in roles and "bias" in roles and any(
            len(s) == 2 and min(s) > 1 for r in ("voltage", "dvdi") for _, s in roles.get(r, ()))
        is_sweep = "field" in roles and "ic" in roles
        if is_map and kind != "sweep":  # as at an HDF5 root: a 2-D map makes it a map
            found.append((group, "map"))
        elif is_sweep and kind != "map":
            found.append((group, "sweep"))
    if len(found) == 1:
        group, chosen = found[0]
        members = groups[group]
        if chosen == "sweep":
            field_len = next(_vector_length(s) for _, (leaf, s) in members.items()
                             if role_of(leaf, coil) == "field")
            names = [n for n, (_, s) in members.items() if _vector_length(s) == field_len]
        else:
            names = list(members)
        return group, chosen, names
    example = _example(found, groups, sep, coil)
    if found:
        places = ", ".join(repr(g or sep) for g, _ in found)
        raise InputError(f"{source}: several groups of {what} hold a sweep or a map ({places}); "
                         f"choose one by naming its {option_names[0]}s, e.g. {example}")
    if not shapes:
        raise InputError(f"{source}: {what} holds no numeric {option_names[0]}s")
    raise InputError(f"{source}: no field and critical-current (or bias and voltage) "
                     f"{option_names[0]}s recognised in {what}; it holds {listing(shapes)}; "
                     f"name them by {option_names[1]}, e.g. {example}")


def _example(found, groups, sep, coil) -> str:
    """An example of the options with names from this file."""
    group = found[0][0] if found else next(iter(groups), "")
    names = list(groups.get(group, {}))
    field = next((n for n in names if role_of(groups[group][n][0], coil) == "field"),
                 names[0] if names else "field")
    ic = next((n for n in names if role_of(groups[group][n][0], coil) == "ic"),
              names[1] if len(names) > 1 else "ic")
    return f"--field-col {field} --ic-col {ic}"


def _normal(name: str, sep: str) -> str:
    """A name as the container spells it: MATLAB struct fields take '/' or '.'."""
    return (name.replace("/", ".") if sep == "." else name).strip(sep)


def vector(values):
    """A 1-D float array from a vector stored as (n,), (1, n) or (n, 1)."""
    import numpy as np

    values = np.asarray(values)
    return values.reshape(-1).astype(float, copy=False)


def from_named_arrays(arrays: dict, *, source: str, sha256, settings, kind: str, sep: str,
                      what: str, units: dict | None = None, metadata: dict | None = None,
                      option_names: tuple[str, str] = ("variable", "name"),
                      layout: dict | None = None):
    """A Sweep or an IVMap from a container's numeric arrays, keyed by full name.

    Names given in the settings (``field_col``, ``ic_cols``, ``bias_col``,
    ``signal_col``; ``/`` and ``.`` both separate groups) select arrays;
    otherwise the group is found by :func:`find_group`.
    """
    import dataclasses

    from .maps import choose_kind, from_arrays, pick_column
    from .sweep import build_sweep

    units = units or {}
    layout = dict(layout or {})
    shapes = {name: tuple(a.shape) for name, a in arrays.items()}
    given = {role: getattr(settings, role) for role in ("field_col", "bias_col", "signal_col")}
    given_ic = tuple(settings.ic_cols)
    explicit = [n for n in (*given.values(), *given_ic) if n]
    if explicit:
        full = {}
        for name in explicit:
            key = _normal(name, sep)
            if key not in arrays:
                raise InputError(f"{source}: no {option_names[0]} named {clip(name)} in {what}; it "
                                 f"holds {listing(shapes)}")
            full[name] = key
        group = split_name(full[explicit[0]], sep)[0]
        chosen = choose_kind(kind, settings, bool(given["bias_col"] or given["signal_col"]))
        names = [n for n in arrays if split_name(n, sep)[0] == group] + list(full.values())
        names = list(dict.fromkeys(names))
    else:
        group, chosen, names = find_group(shapes, sep=sep, source=source, settings=settings,
                                          kind=kind, what=what, option_names=option_names)
    if group:
        layout["group"] = group
    leaves = [split_name(n, sep)[1] for n in names]
    keys = leaves if len(set(leaves)) == len(leaves) else names
    local = dict(zip(names, keys, strict=True))

    def rename(name):
        if not name:
            return name
        return local.get(_normal(name, sep), name)

    local_settings = dataclasses.replace(
        settings, field_col=rename(settings.field_col), bias_col=rename(settings.bias_col),
        signal_col=rename(settings.signal_col), ic_cols=tuple(rename(c) for c in given_ic))
    local_units = {local[n]: u for n, u in units.items() if n in local}
    if chosen == "map":
        roles = {}
        for role, explicit_name in (("field", local_settings.field_col),
                                    ("bias", local_settings.bias_col),
                                    ("signal", local_settings.signal_col)):
            roles[role] = pick_column(keys, role, explicit_name, source,
                                      f"{role} {option_names[0]}")
        by_key = {local[n]: arrays[n] for n in names}
        field = vector(by_key[roles["field"]])
        bias = by_key[roles["bias"]]
        bias = vector(bias) if _vector_length(bias.shape) else bias
        named = {key: local_units.get(key) or split_header(key)[1] for key in roles.values()}
        named = {key: unit for key, unit in named.items() if unit}
        return from_arrays(field, bias, by_key[roles["signal"]], named, roles,
                           source=source, sha256=sha256, metadata=metadata or {},
                           settings=local_settings)
    columns = {local[n]: vector(arrays[n]) for n in names if _vector_length(shapes[n])}
    if explicit:  # the other vectors of the group count only when as long as the named one
        length = _vector_length(shapes[_normal(explicit[0], sep)])
        columns = {k: v for k, v in columns.items()
                   if v.size == length or k in local_settings.ic_cols
                   or k == local_settings.field_col}
    if len({c.size for c in columns.values()}) > 1:
        raise InputError(f"{source}: the {option_names[0]}s have different lengths "
                         f"({', '.join(f'{k}: {v.size}' for k, v in columns.items())})")
    return build_sweep(columns, source=source, sha256=sha256, settings=local_settings,
                       units=local_units, metadata=metadata, where=option_names[0],
                       layout=layout)
