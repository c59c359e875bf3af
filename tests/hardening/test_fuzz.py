"""Fuzzing the two readers a stranger's file meets first: the instance loader and the preset parser.

Property: whatever they are given, they either return a valid value or raise one
of instgen's own errors (an :class:`~instgen.errors.InstgenError`), which the
command line turns into one line and exit code 2.  Any other exception is a
crash and fails the test with the input that caused it.  What they accept must
also be usable: an accepted instance saves and loads back bit for bit, an
accepted preset survives its own TOML round trip.

Runs are derandomised (the same examples every time, so CI does not flicker)
and keep no example database.
"""

from __future__ import annotations

import copy
import json
import shutil
import tempfile
import tomllib
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, example, given, settings
from hypothesis import strategies as st

from instgen.errors import InstgenError
from instgen.io import dumps_instance, instance_from_dict, instance_to_dict, load_instance, loads_instance
from instgen.make import make_instance
from instgen.preset import SCHEMA, load_preset, override, to_toml, validate

def fuzz(examples):
    return settings(max_examples=examples, deadline=None, derandomize=True, database=None,
                    suppress_health_check=[HealthCheck.too_slow])

#: One folder for the files the examples write (hypothesis and function-scoped fixtures do not mix).
SCRATCH = Path(tempfile.mkdtemp(prefix="instgen-fuzz-"))

@pytest.fixture(scope="module", autouse=True)
def _remove_scratch():
    yield
    shutil.rmtree(SCRATCH, ignore_errors=True)


GOOD_TEXT = dumps_instance(make_instance("chimera:1", "int:2", "pm1", seed=3))
GOOD = json.loads(GOOD_TEXT)
FIELDS = sorted(GOOD) + ["certificate", "rules", "scores", "tags", "construction", "offset"]


def ours(fn, *args):
    """Call ``fn``; our own errors are a fine answer, anything else propagates as a crash."""
    try:
        return fn(*args)
    except InstgenError as exc:
        assert str(exc), "an error without a message"
        return None


# --------------------------------------------------------------- JSON values
leaves = st.one_of(
    st.none(), st.booleans(),
    st.integers(-3, 40), st.integers(-2**70, 2**70), st.sampled_from([2**31 - 1, 2**31, 2**32 + 1, -1, 0]),
    st.floats(allow_nan=False, allow_infinity=False), st.sampled_from([1e308, -1e308, 5e-324, 1e100, 0.5]),
    st.text(max_size=10), st.sampled_from(["pm1", "int:3", "gaussian", "none", "levels:1,nan", "os:system",
                                           "proven", "planted", "chimera:1", "loops"]),
)
values = st.recursive(leaves, lambda inner: st.lists(inner, max_size=6)
                      | st.dictionaries(st.sampled_from(FIELDS) | st.text(max_size=6), inner, max_size=4),
                      max_leaves=10)


@st.composite
def mutated_documents(draw):
    """A valid instance document with a few fields replaced, removed or reshaped."""
    doc = copy.deepcopy(GOOD)
    for _ in range(draw(st.integers(1, 3))):
        where = draw(st.sampled_from(["top", "metadata", "element"]))
        key = draw(st.sampled_from(FIELDS))
        if where == "top":
            if draw(st.booleans()) and key in doc:
                del doc[key]
            else:
                doc[key] = draw(values)
        elif where == "metadata":
            if not isinstance(doc.get("metadata"), dict):
                doc["metadata"] = {}
            doc["metadata"][key] = draw(values)
        else:  # one element of a list-valued field
            field = draw(st.sampled_from(["labels", "edges", "J", "h", "planted"]))
            seq = doc.get(field)
            if isinstance(seq, list) and seq:
                seq[draw(st.integers(0, len(seq) - 1))] = draw(values)
            else:
                doc[field] = draw(st.lists(values, max_size=10))
    return doc


def _check_accepted(inst):
    """An accepted instance is usable: energies are finite, its text can be printed or stored as UTF-8,
    and it round-trips through a file bit for bit."""
    state = np.ones(inst.n, dtype=np.int8)
    assert np.isfinite(inst.energy(state))
    json.dumps(instance_to_dict(inst), ensure_ascii=False, default=str).encode("utf-8")
    text = ours(dumps_instance, inst)
    if text is not None:
        back = loads_instance(text)
        assert back.J.tobytes() == inst.J.tobytes() and back.h.tobytes() == inst.h.tobytes()
        assert back.labels == inst.labels and back.edges.tobytes() == inst.edges.tobytes()


@fuzz(200)
@given(mutated_documents())
def test_loader_on_mutated_documents(doc):
    inst = ours(instance_from_dict, doc)
    if inst is not None:
        _check_accepted(inst)


@fuzz(100)
@given(st.dictionaries(st.sampled_from(FIELDS) | st.text(max_size=6), values, max_size=12), st.booleans())
def test_loader_on_arbitrary_documents(doc, looks_right):
    if looks_right:  # half the time it claims to be an instance file, so the checks beyond the header run
        doc["format"] = "instgen-instance"
        doc.setdefault("format_version", 1)
    inst = ours(instance_from_dict, doc)
    if inst is not None:
        _check_accepted(inst)


@st.composite
def mutated_texts(draw):
    """The text of a valid file, cut, spliced or sprinkled with other characters."""
    text = GOOD_TEXT
    kind = draw(st.sampled_from(["cut", "insert", "delete", "replace", "swap-token"]))
    i = draw(st.integers(0, len(text)))
    if kind == "cut":
        return text[:i]
    if kind == "insert":
        return text[:i] + draw(st.text(min_size=1, max_size=5)) + text[i:]
    if kind == "delete":
        return text[:i] + text[i + draw(st.integers(1, 20)):]
    if kind == "replace":
        return text[:i] + draw(st.sampled_from(["NaN", "Infinity", "-Infinity", "1e999", "null", "[]", "{}", '""',
                                               "true", "-0", "9" * 40])) + text[i + 1:]
    tokens = ['"n":8', '"format_version":1', '"planted":null', '"graph":"chimera:1"', '"labels":[']
    token = draw(st.sampled_from(tokens))
    return text.replace(token, token.replace("8", "80").replace("1", "2").replace("null", "[1]").replace("[", "[[", 1))


@fuzz(200)
@given(mutated_texts() | st.text(max_size=200))
@example(GOOD_TEXT.replace('"graph":"chimera:1"', '"graph":"\\ud800"'))  # a lone surrogate cannot be printed
@example(GOOD_TEXT.replace('"metadata":{', '"metadata":{"note":1e999,'))  # infinity cannot be written back
def test_loader_on_text(text):
    inst = ours(loads_instance, text, "fuzzed")
    if inst is not None:
        _check_accepted(inst)


@fuzz(100)
@given(st.binary(max_size=300) | mutated_texts().map(lambda t: t.encode("utf-8", "surrogatepass")))
def test_loader_on_bytes_from_a_file(data):
    path = SCRATCH / "fuzzed.json"
    path.write_bytes(data)
    inst = ours(load_instance, path)
    if inst is not None:
        _check_accepted(inst)


# -------------------------------------------------------------------- presets
BASE_PRESET = {
    "graph": {"spec": "chimera:1"},
    "fitness": {"sweeps": [5, 50], "reads": 8, "confirm_reads": 16},
    "search": {"population": 4, "generations": 1, "elites": 1, "workers": 1},
    "library": {"baseline": 0},
}
TABLES = sorted(SCHEMA)
KEYS = sorted({k for t in SCHEMA.values() for k in t})

toml_leaves = st.one_of(
    st.booleans(), st.integers(-5, 50), st.integers(-2**63, 2**63 - 1),
    st.floats(allow_nan=True, allow_infinity=True), st.text(max_size=12), st.datetimes(), st.dates(),
    st.sampled_from(["chimera:1", "chimera:4000", "complete:3", "square:3,periodic", "chimera:1;dead-nodes=8",
                     "pm1", "int:3", "levels:0.5,1", "uniform:-1e308,1e308", "gaussian:inf", "none", "sa", "exact",
                     "tts", "composite", "loops", "terms", "tiles", "auto", "mip", "os:system", "", "[", "geometric"]),
)
toml_values = st.recursive(toml_leaves, lambda inner: st.lists(inner, max_size=5)
                           | st.dictionaries(st.text(max_size=8) | st.sampled_from(KEYS), inner, max_size=3),
                           max_leaves=6)


@st.composite
def mutated_presets(draw):
    raw = copy.deepcopy(BASE_PRESET)
    for _ in range(draw(st.integers(1, 4))):
        table = draw(st.sampled_from(TABLES) | st.text(max_size=6))
        if draw(st.integers(0, 9)) == 0:
            raw[table] = draw(toml_values)  # a value where a table belongs
            continue
        key = draw(st.sampled_from(sorted(SCHEMA.get(table, {})) or KEYS) | st.sampled_from(KEYS))
        if not isinstance(raw.get(table), dict):
            raw[table] = {}
        raw[table][key] = draw(toml_values)
    return raw


def _check_preset(cfg):
    """An accepted preset is complete and survives writing it out and reading it back."""
    assert set(cfg) == set(SCHEMA)
    text = ours(to_toml, cfg)
    if text is not None:
        assert validate(tomllib.loads(text)) == cfg


@fuzz(150)
@given(mutated_presets())
def test_preset_validation_on_mutated_presets(raw):
    cfg = ours(validate, raw)
    if cfg is not None:
        _check_preset(cfg)


@fuzz(80)
@given(st.dictionaries(st.text(max_size=8) | st.sampled_from(TABLES), toml_values, max_size=5))
@example({"\n": []})  # found by this test: a table name with a line break made a two-line error
def test_preset_validation_on_arbitrary_tables(raw):
    cfg = ours(validate, raw)
    if cfg is not None:
        _check_preset(cfg)


@st.composite
def preset_texts(draw):
    """TOML text: a written preset with lines dropped, doubled, cut or replaced; or any text at all."""
    if draw(st.integers(0, 4)) == 0:
        return draw(st.text(max_size=200))
    raw = draw(mutated_presets())
    lines = []
    for table, body in raw.items():
        if isinstance(body, dict):
            lines.append(f"[{json.dumps(table)}]")
            lines += [f"{json.dumps(k)} = {_toml(v)}" for k, v in body.items()]
    for _ in range(draw(st.integers(0, 2))):
        if not lines:
            break
        i = draw(st.integers(0, len(lines) - 1))
        action = draw(st.sampled_from(["drop", "double", "cut", "replace"]))
        if action == "drop":
            del lines[i]
        elif action == "double":
            lines.insert(i, lines[i])
        elif action == "cut":
            lines[i] = lines[i][: draw(st.integers(0, len(lines[i])))]
        else:
            lines[i] = draw(st.text(max_size=30))
    return "\n".join(lines) + "\n"


def _toml(v):
    """A value as TOML (our own small writer, so the fuzzer can reach what to_toml never writes)."""
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, float):
        return "nan" if v != v else ("inf" if v == float("inf") else "-inf" if v == -float("inf") else repr(v))
    if isinstance(v, int):
        return str(v)
    if isinstance(v, str):
        return json.dumps(v)
    if isinstance(v, list):
        return "[" + ", ".join(_toml(x) for x in v) + "]"
    if isinstance(v, dict):
        return "{" + ", ".join(f"{json.dumps(str(k))} = {_toml(x)}" for k, x in v.items()) + "}"
    return v.isoformat()  # dates and datetimes


@fuzz(120)
@given(preset_texts())
def test_preset_files(text):
    path = SCRATCH / "fuzzed.toml"
    path.write_text(text, encoding="utf-8", errors="surrogatepass")
    cfg = ours(load_preset, path)
    if cfg is not None:
        _check_preset(cfg)


@fuzz(100)
@given(st.sampled_from(KEYS), st.text(max_size=30) | toml_values.map(_toml))
@example("name", "\U00010000")  # found by this test: written as a surrogate pair, which TOML refuses
@example("description", "a\x7fb")  # DEL must be escaped in TOML
def test_command_line_overrides(key, text):
    cfg = validate(BASE_PRESET)
    table = next((t for t in TABLES if key in SCHEMA[t]), "search")
    out = ours(override, cfg, [f"{table}.{key}={text}"])
    if out is not None:
        _check_preset(out)


def test_the_mutations_reach_deep_checks():
    """The fuzzers are only worth their time if valid inputs pass: the unmutated ones are accepted."""
    _check_accepted(instance_from_dict(copy.deepcopy(GOOD)))
    _check_preset(validate(copy.deepcopy(BASE_PRESET)))
    path = SCRATCH / "base.toml"
    path.write_text(to_toml(validate(BASE_PRESET)))
    _check_preset(load_preset(path))
