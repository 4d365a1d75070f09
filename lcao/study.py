"""Study files: a whole piece of work in one reviewable TOML file (``lcao run study.toml``).

The file is parsed with ``tomllib`` (never evaluated), and every key and type
is checked before anything is computed: an unknown key is an error naming the
key and the allowed ones. See the README for an annotated example.

Top level::

    title = "..."            # text, optional
    out = "results"          # output folder, relative to the study file (default: <file stem>-results)
    store = "store.sqlite"   # results store, relative to the study file (default: <out>/lcao-store.sqlite)
    [defaults]               # optional: levels, points, from, to, d_shells, well_level, all_electron,
                             # counterpoise, branch
    [cluster]                # optional: batch jobs through dask-jobqueue: kind (slurm, pbs), cores, memory,
                             # walltime, queue, account, jobs, directives (extra job-script lines)
    [[group]]                # one or more: name and either species, or elements (+ charges; + electrons),
                             # optionally levels, points, from, to, d_shells, well_level,
                             # all_electron, counterpoise, branch, multiplicity
"""

from __future__ import annotations

import os
import tomllib
from dataclasses import dataclass

from .errors import InputError

TOP_KEYS = {"title": str, "out": str, "store": str, "defaults": dict, "group": list, "cluster": dict}
CLUSTER_KEYS = {"kind": str, "cores": int, "memory": str, "walltime": str, "queue": str, "account": str, "jobs": int,
                "directives": list}
SETTING_KEYS = {"levels": list, "points": int, "from": (int, float), "to": (int, float), "d_shells": str,
                "well_level": str, "all_electron": bool, "counterpoise": bool, "branch": str}
GROUP_KEYS = {"name": str, "species": list, "electrons": int, "elements": list, "charges": (str, list), "multiplicity": dict, **SETTING_KEYS}


class StudyError(InputError):
    """A study file that cannot be read or has a wrong key or type."""


@dataclass(frozen=True)
class Group:
    name: str
    members: tuple


@dataclass(frozen=True)
class Study:
    path: str
    title: str
    out: str
    store: str
    groups: tuple[Group, ...]
    cluster: dict | None = None


def _type_name(t) -> str:
    if isinstance(t, tuple):
        return " or ".join(_type_name(x) for x in t)
    return {str: "text", int: "whole number", float: "number", list: "list", dict: "table"}.get(t, t.__name__)


def _check_keys(table: dict, allowed: dict, where: str) -> None:
    for key, value in table.items():
        if key not in allowed:
            raise StudyError(f"{where}: unknown key {key!r}; allowed: {', '.join(sorted(allowed))}")
        want = allowed[key]
        ok = isinstance(value, want) and not (isinstance(value, bool) and want in (int, (int, float)))
        if not ok:
            raise StudyError(f"{where}: {key} must be {_type_name(want)}, got {type(value).__name__} {value!r}")


def load_study(path) -> Study:
    """Read and validate a study file; raises StudyError naming the problem."""
    from .levels import parse_level
    from .scan.grid import range_grid
    from .series import by_electron_count, every_pair, members_from, parse_charge_range, parse_elements
    from .species import parse_species

    path = os.fspath(path)
    try:
        with open(path, "rb") as fh:
            data = tomllib.load(fh)
    except FileNotFoundError:
        raise StudyError(f"study file {path} does not exist") from None
    except tomllib.TOMLDecodeError as exc:
        raise StudyError(f"study file {path} is not valid TOML: {exc}") from None
    except OSError as exc:
        raise StudyError(f"cannot read study file {path}: {exc.strerror}") from None
    _check_keys(data, TOP_KEYS, path)
    defaults = data.get("defaults", {})
    _check_keys(defaults, SETTING_KEYS, f"{path} [defaults]")
    groups_raw = data.get("group", [])
    if not groups_raw:
        raise StudyError(f"{path}: no [[group]] tables; a study needs at least one")
    base = os.path.dirname(os.path.abspath(path))
    stem = os.path.splitext(os.path.basename(path))[0]
    out = os.path.join(base, data.get("out", f"{stem}-results"))
    store = os.path.join(base, data["store"]) if "store" in data else os.path.join(out, "lcao-store.sqlite")
    groups = []
    names = set()
    for k, g in enumerate(groups_raw):
        where = f"{path} [[group]] {k + 1}"
        if not isinstance(g, dict):
            raise StudyError(f"{where}: must be a table")
        _check_keys(g, GROUP_KEYS, where)
        name = g.get("name")
        if not name:
            raise StudyError(f"{where}: needs a name")
        if name in names:
            raise StudyError(f"{where}: the name {name!r} is used twice")
        names.add(name)
        where = f"{path} group {name!r}"
        s = {**defaults, **{key: g[key] for key in SETTING_KEYS if key in g}}
        level_texts = s.get("levels") or ["HF/6-31G"]
        cart = None
        if "d_shells" in s:
            if s["d_shells"] not in ("cartesian", "spherical"):
                raise StudyError(f"{where}: d_shells must be 'cartesian' or 'spherical', got {s['d_shells']!r}")
            cart = s["d_shells"] == "cartesian"
        fc = False if s.get("all_electron") else None
        try:
            levels = [parse_level(t, cart, fc) for t in level_texts]
            well = parse_level(s["well_level"], cart, fc) if s.get("well_level") else None
        except InputError as exc:
            raise StudyError(f"{where}: {exc}") from None
        branch = s.get("branch", "lowest")
        if branch not in ("lowest", "symmetric"):
            raise StudyError(f"{where}: branch must be 'lowest' or 'symmetric', got {branch!r}")
        grid = None
        if ("from" in s) != ("to" in s):
            raise StudyError(f"{where}: give both from and to (angstrom), or neither")
        try:
            if "from" in s:
                grid = range_grid(s["from"], s["to"], s.get("points", 30))
            if "species" in g and "electrons" in g:
                raise StudyError(f"{where}: give species or electrons, not both")
            if "species" in g:
                species = [parse_species(t) for t in g["species"]]
            elif "electrons" in g or "elements" in g:
                if "elements" not in g:
                    raise StudyError(f"{where}: electrons needs an elements list")
                ch = g.get("charges", "0..0")
                lo_hi = parse_charge_range(ch) if isinstance(ch, str) else tuple(ch)
                if len(lo_hi) != 2:
                    raise StudyError(f"{where}: charges must be LOW..HIGH or [low, high]")
                pool = parse_elements(",".join(g["elements"]))
                species = (by_electron_count(g["electrons"], pool, lo_hi) if "electrons" in g
                           else every_pair(pool, lo_hi))  # a survey by rule: every pair of the pool
            else:
                raise StudyError(f"{where}: needs species, or elements (with electrons for an isoelectronic series)")
            mults = g.get("multiplicity", {})
            members = []
            for sp in species:
                m = mults.get(sp.label)
                if m is not None:
                    sp.check_multiplicity(m)
                members += members_from([sp], levels, grid, m, None if grid else s.get("points"), well,
                                        bool(s.get("counterpoise", False)), branch)
            unknown = set(mults) - {sp.label for sp in species}
            if unknown:
                raise StudyError(f"{where}: multiplicity given for {', '.join(sorted(unknown))}, which is not in the group")
        except StudyError:
            raise
        except InputError as exc:
            raise StudyError(f"{where}: {exc}") from None
        groups.append(Group(name, tuple(members)))
    return Study(path, data.get("title", ""), out, store, tuple(groups), _cluster(data.get("cluster"), path))


def _cluster(table: dict | None, path: str) -> dict | None:
    """The [cluster] table, checked: kind slurm or pbs, cores, memory and walltime required."""
    if table is None:
        return None
    where = f"{path} [cluster]"
    _check_keys(table, CLUSTER_KEYS, where)
    if table.get("kind") not in ("slurm", "pbs"):
        raise StudyError(f"{where}: kind must be 'slurm' or 'pbs', got {table.get('kind')!r}")
    for key in ("cores", "memory", "walltime"):
        if key not in table:
            raise StudyError(f"{where}: needs {key} (e.g. cores = 8, memory = \"16GB\", walltime = \"02:00:00\")")
    if table["cores"] < 1 or table.get("jobs", 1) < 1:
        raise StudyError(f"{where}: cores and jobs must be at least 1")
    if not all(isinstance(d, str) for d in table.get("directives", [])):
        raise StudyError(f"{where}: directives must be a list of text lines")
    return dict(table)
