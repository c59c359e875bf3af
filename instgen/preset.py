"""Breeding presets: TOML files read with tomllib, validated key by key.

A preset has seven tables; every key has a default, so a preset only says what
differs.  An unknown table, key or value is an :class:`ConfigError` naming the
key and the valid choices.  Command-line flags override preset values with
:func:`override` using dotted keys (``search.generations=5``).

See ``presets/*.toml`` for annotated examples and :data:`SCHEMA` for every key.
"""

from __future__ import annotations

import copy
import hashlib
import json
import math
import tomllib
from pathlib import Path

from .errors import ConfigError, InstgenError
from .io import encodable

FORMAT_VERSION = 1

_INF = math.inf

# Each key: (type or tuple of types, default, check) where check(value) returns an
# error string or None.  None as default means "not set".


def _pos(v):
    return None if v > 0 else "must be positive"


def _nonneg(v):
    return None if v >= 0 else "must be zero or more"


def _prob(v):
    return None if 0 <= v <= 1 else "must lie in [0, 1]"


def _upto(hi):
    def check(v):
        return None if 0 < v <= hi else f"must be positive and at most {hi:g}"
    return check


def _count(lo, hi):
    def check(v):
        return None if lo <= v <= hi else f"must lie between {lo} and {hi}"
    return check


def _sweep_list(v):
    if not v or any(not isinstance(x, int) or isinstance(x, bool) or x < 1 for x in v):
        return "must be a non-empty list of positive whole numbers"
    if len(v) > 30 or max(v) > 10**7:
        return "must hold at most 30 sweep counts of at most 10,000,000"
    return None


def _pair(v):
    if len(v) != 2 or any(not isinstance(x, (int, float)) or isinstance(x, bool) or not 0 < x < _INF for x in v):
        return "must be two positive finite numbers [hot, cold]"
    return None


def _cold_list(v):
    if len(v) > 8 or any(isinstance(x, bool) or not isinstance(x, (int, float)) or not 0 < x < _INF for x in v):
        return "must be a list of at most 8 positive numbers (beta_cold x coupling scale)"
    return None


def _str_list(v):
    return None if all(isinstance(x, str) for x in v) else "must be a list of strings"


def _tag_list(v):
    return None if all(isinstance(x, str) and x.strip() for x in v) else "must be a list of non-empty strings"


def _nonempty(v):
    return None if v.strip() else "must not be empty"


SCHEMA: dict[str, dict[str, tuple]] = {
    "run": {
        "name": (str, "run", None),
        "seed": (int, 0, _nonneg),
        "out": (str, "outputs/run", _nonempty),
        "format_version": (int, FORMAT_VERSION, _pos),
        "description": (str, "", None),
    },
    "graph": {
        "spec": (str, "chimera:2", None),
    },
    "couplings": {
        "alphabet": (str, "pm1", None),
        "fields": (str, "none", None),
        "range": ((int, float), None, _pos),
        "field_range": ((int, float), None, _pos),
        "precision": ((int, float), None, _pos),
    },
    "planting": {
        "method": (str, "none", None),
        "density": ((int, float), 0.3, _upto(100)),
        "min_length": (int, 4, _count(3, 10_000)),
        "cap": ((int, float), None, _pos),
        "alpha": ((int, float), 0.5, _upto(100)),
        "mix": (list, None, None),
        "terms": (dict, None, None),
        "patch_size": (int, 8, _count(2, 16)),
    },
    "fitness": {
        "metric": (str, "tts", None),
        "weights": (dict, None, None),
        "sampler": (str, "sa", None),
        "sweeps": (list, [10, 100, 1000], _sweep_list),
        "short_sweeps": (int, 10, _pos),
        "long_sweeps": (int, 1000, _pos),
        "reads": (int, 64, _count(1, 100_000)),
        "beta_range": (list, None, _pair),
        "interpolation": (str, "geometric", None),
        "reference": (str, "auto", None),
        "confirm_reads": (int, 256, _count(1, 1_000_000)),
        "solvers": (list, [], _str_list),
        "search_solvers": (list, [], _str_list),
        "noise_sigma": ((int, float), 0.0, _nonneg),
        "noise_copies": (int, 0, _count(0, 1000)),
        "pin_budget": ((int, float), 2e9, _upto(1e15)),
        "pin_max_sweeps": (int, 1_000_000, _count(1, 10**7)),
        "pin_successes": (int, 10, _count(1, 10_000)),
        "cold_ends": (list, [], _cold_list),
    },
    "search": {
        "population": (int, 16, _count(2, 100_000)),
        "generations": (int, 10, _count(1, 10_000_000)),
        "elites": (int, 2, _nonneg),
        "tournament": (int, 3, _count(1, 1000)),
        "crossover_rate": ((int, float), 0.5, _prob),
        "mutation_rate": ((int, float), 0.05, _prob),
        "operators": (dict, None, None),
        "time_budget": ((int, float), None, _pos),
        "target": ((int, float), None, None),
        "stall": (int, None, _pos),
        "confirm_top": (int, 2, _count(0, 1000)),
        "winners": (int, 8, _count(1, 100_000)),
        "workers": (int, 0, _nonneg),
        "immigrants": ((int, float), 0.1, _prob),
    },
    "library": {
        "path": (str, "", None),
        "certify": (str, "auto", None),
        "time_limit": ((int, float), 60.0, _pos),
        "baseline": (int, 8, _count(0, 10_000)),
        "tags": (list, [], _tag_list),
    },
}

#: Keys that were renamed, and the key that replaced them (an old preset is told, not silently ignored).
RENAMED = {("run", "output"): "[run] out", ("search", "hall_of_fame"): "[search] winners",
           ("library", "count"): "[search] winners"}

REFERENCES = ("auto", "planted", "certified", "confirm-certified", "best-found")

#: Keys that may also be written as text, e.g. precision = "1/3" (read with couplings.parse_number).
NUMBER_TEXT = {("couplings", "range"), ("couplings", "field_range"), ("couplings", "precision")}


def defaults() -> dict:
    return {table: {k: copy.deepcopy(v[1]) for k, v in keys.items()} for table, keys in SCHEMA.items()}


def _check_value(table, key, value):
    types, _default, check = SCHEMA[table][key]
    where = f"[{table}] {key}"
    if value is None:
        return None
    if (table, key) in NUMBER_TEXT and isinstance(value, str):
        from .couplings import parse_number

        try:
            value = parse_number(value, where)
        except InstgenError as exc:
            raise ConfigError(str(exc)) from None
    if isinstance(value, bool) or not isinstance(value, types):
        words = {int: "whole number", float: "number", str: "string", list: "list", dict: "table"}
        names = words[types] if isinstance(types, type) else "number"
        raise ConfigError(f"{where} must be a {names}, got {value!r}")
    if isinstance(value, str) and not value.isprintable() and not encodable(value):
        raise ConfigError(f"{where} is not valid text (it holds a lone surrogate), got {value!r}")
    if isinstance(value, float) and (math.isnan(value) or (math.isinf(value) and key != "target")):
        raise ConfigError(f"{where} must be a finite number, got {value!r}")
    if check is not None:
        problem = check(value)
        if problem:
            raise ConfigError(f"{where} {problem}, got {value!r}")
    return value


def _check_names(cfg):
    """Values that must name something registered: checked against the registries."""
    from .certify import CHOICES
    from .couplings import CouplingRules
    from .graphs import check_size
    from .samplers import SAMPLERS

    try:
        check_size(cfg["graph"]["spec"])
        c = cfg["couplings"]
        CouplingRules.make(c["alphabet"], c["fields"], c["range"], c["field_range"], c["precision"])
    except InstgenError as exc:
        raise ConfigError(f"[graph]/[couplings]: {exc}") from None
    f = cfg["fitness"]
    for key, names in (("sampler", [f["sampler"]]), ("solvers", f["solvers"])):
        for name in names:
            if name not in SAMPLERS:
                raise ConfigError(f"[fitness] {key}: unknown sampler {name!r}; choose one of: {', '.join(SAMPLERS.names())}")
    if f["reference"] not in REFERENCES:
        raise ConfigError(f"[fitness] reference must be one of: {', '.join(REFERENCES)}; got {f['reference']!r}")
    if f["interpolation"] not in ("geometric", "linear"):
        raise ConfigError(f"[fitness] interpolation must be geometric or linear, got {f['interpolation']!r}")
    if f["short_sweeps"] >= f["long_sweeps"]:
        raise ConfigError("[fitness] short_sweeps must be smaller than long_sweeps")
    s = cfg["search"]
    if s["elites"] >= s["population"]:
        raise ConfigError(f"[search] elites ({s['elites']}) must be fewer than the population ({s['population']})")
    if cfg["library"]["certify"] not in CHOICES:
        raise ConfigError(f"[library] certify must be one of: {', '.join(CHOICES)}; got {cfg['library']['certify']!r}")
    if cfg["run"]["format_version"] > FORMAT_VERSION:
        raise ConfigError(f"[run] format_version {cfg['run']['format_version']} is newer than this instgen reads "
                          f"({FORMAT_VERSION}); upgrade instgen")


def validate(raw: dict, where: str = "preset") -> dict:
    """Fill defaults and check every table, key and value; returns a new dict."""
    if not isinstance(raw, dict):
        raise ConfigError(f"{where}: expected tables of settings")
    cfg = defaults()
    for table, values in raw.items():
        if table not in SCHEMA:
            raise ConfigError(f"{where}: unknown table [{table}]; valid tables: {', '.join(SCHEMA)}")
        if not isinstance(values, dict):
            raise ConfigError(f"{where}: [{table}] must be a table of settings")
        for key, value in values.items():
            if (table, key) in RENAMED:
                raise ConfigError(f"{where}: [{table}] {key} is now {RENAMED[table, key]}")
            if key not in SCHEMA[table]:
                raise ConfigError(f"{where}: unknown key {key!r} in [{table}]; valid keys: {', '.join(SCHEMA[table])}")
            cfg[table][key] = _check_value(table, key, value)
    from .evolve.operators import check_operator_rates
    from .fitness import check_fitness

    _check_names(cfg)
    try:
        check_fitness(cfg["fitness"])
        check_operator_rates(cfg["search"]["operators"], cfg)
        _check_planting(cfg)
    except InstgenError as exc:
        raise ConfigError(str(exc)) from None
    return cfg


def _check_planting(cfg):
    method = cfg["planting"]["method"]
    terms = cfg["planting"]["terms"]
    if terms is not None and method != "terms":
        raise ConfigError(f"[planting] terms applies to method = \"terms\", not {method!r}")
    if method == "none":
        return
    from .planted import PLANTED

    PLANTED.get(method)
    if terms is not None:
        from .make import topology
        from .planted.terms import check_shapes, parse_kinds

        try:
            check_shapes(topology(cfg["graph"]["spec"]), parse_kinds(terms))
        except InstgenError as exc:
            raise ConfigError(f"[planting] terms: {exc}") from None


def load_preset(path) -> dict:
    """Read and validate a preset file."""
    path = Path(path)
    try:
        raw = tomllib.loads(path.read_text())
    except FileNotFoundError:
        raise ConfigError(f"{path}: no such preset file (see presets/ for examples)") from None
    except IsADirectoryError:
        raise ConfigError(f"{path} is a folder, not a preset file") from None
    except UnicodeDecodeError:
        raise ConfigError(f"{path} is not a text file") from None
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(f"{path}: not valid TOML: {exc}") from None
    except RecursionError:
        raise ConfigError(f"{path}: nested too deeply to be a preset") from None
    except OSError as exc:
        raise ConfigError(f"{path}: cannot read the preset ({exc.strerror or exc})") from None
    return validate(raw, str(path))


def _parse_override_value(text: str):
    try:
        return tomllib.loads(f"v = {text}")["v"]
    except tomllib.TOMLDecodeError:
        return text  # a bare word is a string
    except RecursionError:
        raise ConfigError(f"the override value {text[:40]!r}... is nested too deeply") from None


def override(cfg: dict, assignments) -> dict:
    """Apply ``table.key=value`` overrides (values in TOML syntax) and re-validate."""
    raw = copy.deepcopy(cfg)
    for item in assignments:
        key, eq, text = item.partition("=")
        table, dot, name = key.strip().partition(".")
        if not eq or not dot:
            raise ConfigError(f"override {item!r} must look like table.key=value, e.g. search.generations=5")
        raw.setdefault(table, {})[name] = _parse_override_value(text.strip())
    return validate(raw, "overrides")


def with_output(cfg: dict, out) -> dict:
    """``cfg`` with its run folder moved to ``out``; a ``[library] path`` that lies inside the
    preset's own ``[run] out`` folder moves along, to the same place inside ``out``.

    >>> cfg = validate({"run": {"out": "outputs/demo"}, "library": {"path": "outputs/demo/library"}})
    >>> with_output(cfg, "A/run")["library"]["path"]
    'A/run/library'
    >>> with_output(validate({"library": {"path": "shared/lib"}}), "A/run")["library"]["path"]
    'shared/lib'
    """
    import os

    new = copy.deepcopy(cfg)
    new["run"]["out"] = str(out)
    library = cfg["library"]["path"]
    if library:
        try:
            inner = Path(os.path.abspath(library)).relative_to(os.path.abspath(cfg["run"]["out"]))
        except ValueError:  # elsewhere: a library shared between runs stays where the preset says
            inner = None
        if inner is not None:
            new["library"]["path"] = str(Path(out) / inner)
    return validate(new, "--out")


def preset_hash(cfg: dict) -> str:
    """A short hash of the resolved preset (what decides the run's results)."""
    blob = json.dumps(cfg, sort_keys=True, default=str).encode()
    return hashlib.sha256(blob).hexdigest()[:16]


def to_toml(cfg: dict) -> str:
    """Write a resolved preset back as TOML (unset values are left out)."""
    lines = []
    for table, values in cfg.items():
        lines.append(f"[{table}]")
        for key, value in values.items():
            if value is None:
                continue
            lines.append(f"{key} = {_toml_value(value)}")
        lines.append("")
    return "\n".join(lines)


def _toml_value(v):
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, str):
        return _toml_string(v)
    if isinstance(v, float):
        return "inf" if v == _INF else ("-inf" if v == -_INF else repr(v))
    if isinstance(v, int):
        return str(v)
    if isinstance(v, list):
        return "[" + ", ".join(_toml_value(x) for x in v) + "]"
    if isinstance(v, dict):
        return "{ " + ", ".join(f"{_toml_string(str(k))} = {_toml_value(x)}" for k, x in v.items()) + " }"
    raise ConfigError(f"cannot write {v!r} to TOML")


def _toml_string(text: str) -> str:
    """A TOML basic string: JSON's escapes, but characters beyond U+FFFF written as themselves
    (JSON would write surrogate pairs, which TOML refuses) and DEL escaped (TOML refuses it raw)."""
    return json.dumps(text, ensure_ascii=False).replace("\x7f", "\\u007f")
