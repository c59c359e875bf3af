import json

import numpy as np
import pytest

from instgen.errors import FormatError
from instgen.io import FORMAT_VERSION, dumps_instance, load_instance, save_instance
from instgen.make import make_instance


def test_round_trip_is_bit_exact(tmp_path):
    inst = make_instance("chimera:2", "gaussian", "gaussian", seed=7)
    p = save_instance(inst, tmp_path / "a.json", provenance={"seed": 7})
    back = load_instance(p)
    assert back.J.tobytes() == inst.J.tobytes() and back.h.tobytes() == inst.h.tobytes()
    assert back.labels == inst.labels and back.graph == inst.graph
    assert back.metadata["provenance"]["seed"] == 7
    assert back.metadata["provenance"]["tool_version"]


def test_tuple_labels_and_planted_survive(tmp_path):
    from instgen.instance import Instance

    inst = Instance(edges=[[0, 1]], J=[-1.0], labels=[(0, 1), (0, 2)], planted=[1, -1])
    back = load_instance(save_instance(inst, tmp_path / "t.json"))
    assert back.labels == ((0, 1), (0, 2)) and back.planted.tolist() == [1, -1]


def _doc():
    return json.loads(dumps_instance(make_instance("chimera:1", "pm1", seed=1)))


def _mutations():
    def setk(k, v):
        def f(d):
            d[k] = v
            return d
        return f

    return {
        "newer version": setk("format_version", FORMAT_VERSION + 1),
        "no version": lambda d: {k: v for k, v in d.items() if k != "format_version"},
        "wrong format": setk("format", "something-else"),
        "J too short": lambda d: {**d, "J": d["J"][:-1]},
        "labels collide": lambda d: {**d, "labels": [0] * len(d["labels"])},
        "edge out of range": lambda d: {**d, "edges": [[0, 99]] + d["edges"][1:]},
        "self loop": lambda d: {**d, "edges": [[1, 1]] + d["edges"][1:]},
        "duplicate edge": lambda d: {**d, "edges": [d["edges"][1]] + d["edges"][1:]},
        "string coupling": lambda d: {**d, "J": ["x"] + d["J"][1:]},
        "negative n": setk("n", -1),
        "bad planted": lambda d: {**d, "planted": [0] * d["n"]},
        "metadata not object": setk("metadata", [1]),
        "edges not pairs": lambda d: {**d, "edges": [[0, 1, 2]] + d["edges"][1:]},
        "top level list": lambda d: [d],
    }


@pytest.mark.parametrize("name", sorted(_mutations()))
def test_bad_files_are_refused_with_a_clear_message(tmp_path, name):
    p = tmp_path / "bad.json"
    p.write_text(json.dumps(_mutations()[name](_doc())))
    with pytest.raises(FormatError):
        load_instance(p)


def test_truncated_and_nan_files(tmp_path):
    text = dumps_instance(make_instance("chimera:1", "pm1", seed=1))
    p = tmp_path / "cut.json"
    p.write_text(text[: len(text) // 2])
    with pytest.raises(FormatError, match="truncated"):
        load_instance(p)
    p.write_text(text.replace('"J":[', '"J":[NaN,', 1))
    with pytest.raises(FormatError):
        load_instance(p)
    with pytest.raises(FormatError, match="no such file"):
        load_instance(tmp_path / "missing.json")
    p.write_bytes(b"\xff\xfe\x00")
    with pytest.raises(FormatError):
        load_instance(p)


def test_atomic_save_keeps_old_file_when_writing_fails(tmp_path, monkeypatch):
    import os

    inst = make_instance("chimera:1", "pm1", seed=1)
    p = save_instance(inst, tmp_path / "keep.json")
    before = p.read_bytes()

    def boom(*a, **k):
        raise OSError("disk full")

    monkeypatch.setattr(os, "replace", boom)
    with pytest.raises(OSError):
        save_instance(make_instance("chimera:1", "pm1", seed=2), p)
    assert p.read_bytes() == before
    assert [x.name for x in tmp_path.iterdir()] == ["keep.json"]


def test_an_earlier_files_unverified_optimum_reads_as_not_proven(tmp_path):
    # Files written before the status words were unified say "unverified"; they read as "not proven".
    from instgen.records import Certificate

    inst = make_instance("chimera:1", "pm1", seed=1)
    doc = json.loads(dumps_instance(inst))
    state = [1] * inst.n
    doc["metadata"]["certificate"] = {"energy": float(inst.energy(np.array(state))), "state": state,
                                      "method": "anneal", "status": "unverified"}
    p = tmp_path / "old.json"
    p.write_text(json.dumps(doc))
    cert = Certificate.from_dict(load_instance(p).metadata["certificate"])
    assert cert.status == "not proven" and not cert.certified
