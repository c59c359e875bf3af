"""The library store: filing, merging, finding, removing and checking entries."""

import json
import sqlite3

import dimod
import numpy as np
import pytest
from libcases import exact_certificate, permuted, small_certified, unfrustrated, with_certificate

from instgen.errors import InputError, LibraryError
from instgen.instance import random_gauge
from instgen.io import load_instance, save_instance
from instgen.library import Library
from instgen.library import schema
from instgen.make import make_instance
from instgen.records import Certificate, Score


@pytest.fixture
def lib(tmp_path):
    with Library.open(tmp_path / "lib", create=True) as library:
        yield library


def score(metric, value, solver="sa", **kw):
    return Score(metric, value, solver=solver, reads=100, seeds=[1, 2], **kw).to_dict()


def test_new_then_duplicate_in_other_gauge_and_order_merges(lib):
    inst = make_instance("chimera:1", "gaussian", seed=1)
    first = lib.add(inst.replace(metadata={**inst.metadata, "scores": [score("tts", 50.0)]}), tags=["a"])
    assert first.new
    other = permuted(inst.gauge(random_gauge(inst.n, seed=2)), seed=3)
    other = with_certificate(other, exact_certificate(other), scores=[score("tts", 80.0, solver="pt")])
    again = lib.add(other, tags=["b"])
    assert not again.new and again.fingerprint == first.fingerprint
    assert "certificate (proven)" in again.changes and "1 new score" in again.changes
    assert len(lib) == 1
    e = lib.get(first.id)
    assert e.certified and e.tags == ["a", "b"] and e.sightings == 2
    assert [s.value for s in e.scores] == [50.0, 80.0]
    # the carried certificate is a ground state of the stored instance, as dimod's
    # ExactSolver finds independently
    stored = e.instance()
    exact = dimod.ExactSolver().sample(stored.to_bqm()).first.energy
    assert e.certificate.energy == pytest.approx(exact, abs=1e-9)
    assert stored.energy(e.certificate.state) == pytest.approx(exact, abs=1e-9)
    assert e.certificate.ground_states == 2  # no fields: s and -s (common practice: Z2 symmetry)


def test_the_same_score_filed_twice_is_stored_once(lib):
    inst = small_certified(1, scores=[score("tts", 10.0)])
    lib.add(inst)
    r = lib.add(inst)
    assert r.changes == [] and len(lib.get(r.id).scores) == 1


def test_every_entry_field_is_kept(lib):
    inst = small_certified(5, fields=True)
    prov = {"preset_hash": "ab12", "run_id": "run-7", "generation": 12, "parents": ["x", "y"], "seed": 99}
    s = Score("success_probability", 0.25, ci=(0.2, 0.3), solver="sa", schedule={"sweeps": 1000},
              reads=400, seeds=[3, 4], extra={"tool_version": "0.1.0"})
    inst = inst.replace(metadata={**inst.metadata, "scores": [s.to_dict()], "provenance": prov})
    r = lib.add(inst, tags=["chip-test"])
    e = lib.get(r.fingerprint[:6])
    rules = inst.metadata["rules"]
    assert (e.graph, e.n, e.m, e.has_fields) == ("chimera:1", 8, 16, True)
    assert (e.couplings, e.fields, e.rules) == (rules["couplings"], rules["fields"], rules)
    assert e.certificate.method == "enumeration" and e.certificate.ground_states == 1
    assert {k: e.provenance[k] for k in prov} == prov
    got = e.scores[0]
    assert (got.metric, got.ci, got.schedule, got.reads, got.seeds) == ("success_probability", (0.2, 0.3),
                                                                        {"sweeps": 1000}, 400, [3, 4])
    assert e.added and e.created and e.tags == ["chip-test"]
    # the stored instance comes back with the library's metadata, through our own file format
    back = e.instance()
    assert back.metadata["certificate"]["energy"] == e.certificate.energy
    assert back.metadata["scores"][0]["metric"] == "success_probability"


def test_unbounded_scores_are_filed_and_survive_a_round_trip(lib, tmp_path):
    # a time-to-solution with no success: a lower bound whose interval is open-ended
    bound = Score("tts", 983.8, ci=(983.8, float("inf")), kind="lower bound", solver="sa",
                  extra={"per_sweeps": [{"tts_ci": [983.8, float("inf")]}]})
    unknown = Score("tts", float("inf"), solver="pt")  # an infinite value is written as null
    inst = small_certified(6, scores=[bound.to_dict(), unknown.to_dict()])
    r = lib.add(inst)
    e = lib.get(r.id)
    assert e.scores[0].value == 983.8 and e.scores[0].ci == (983.8, None)
    assert np.isnan(e.latest("tts", "pt").value)
    assert lib.list(metric="tts", solver="pt", min_value=0) == []  # unknown matches no threshold
    assert [x.id for x in lib.list(metric="tts", solver="sa", min_value=900)] == [r.id]
    (path,) = lib.export([r.id], "json", tmp_path / "out")
    strict = json.loads(path.read_text(), parse_constant=lambda c: pytest.fail(f"non-standard JSON {c}"))
    assert strict["metadata"]["scores"][0]["ci"] == [983.8, None]
    again = lib.add(load_instance(path))  # the same measurements, read back from the file
    assert not again.new and again.changes == [] and len(lib.get(r.id).scores) == 2


def test_entries_without_proof_are_marked(lib):
    r1 = lib.add(make_instance("chimera:1", "gaussian", seed=3))
    inst = make_instance("chimera:1", "gaussian", seed=4)
    best = exact_certificate(inst)
    best.status = "not proven"
    r2 = lib.add(with_certificate(inst, best))
    assert not lib.get(r1.id).certified and "no certificate" in lib.get(r1.id).optimum_text
    assert not lib.get(r2.id).certified and "not proven" in lib.get(r2.id).optimum_text
    assert lib.list(certified=True) == []
    # a later proof upgrades the entry
    r3 = lib.add(with_certificate(inst, exact_certificate(inst)))
    assert r3.changes == ["certificate upgraded from not proven to proven"] and lib.get(r2.id).certified


def test_planted_state_counts_as_certificate(lib):
    inst = unfrustrated("chimera:2", seed=1)
    planted = inst.replace(planted=np.asarray(inst.metadata["certificate"]["state"]),
                           metadata={k: v for k, v in inst.metadata.items() if k != "certificate"})
    e = lib.get(lib.add(planted).id)
    assert e.certificate.status == "planted" and e.certificate.energy == -np.abs(inst.J).sum()


def test_contradicting_or_self_contradicting_certificates_are_refused(lib):
    inst = small_certified(2)
    lib.add(inst)
    wrong = exact_certificate(inst)
    wrong.energy += 1.0
    with pytest.raises(InputError, match="contradicts itself"):
        lib.add(with_certificate(inst, wrong))
    # a "proven" optimum above the stored proven one (its state is a real, worse state)
    worse = Certificate(energy=inst.energy(np.ones(8)), state=np.ones(8), method="x", status="proven")
    before = lib.get(lib.list()[0].id).certificate.energy
    with pytest.raises(InputError, match="contradicts the library"):
        lib.add(with_certificate(inst, worse))
    assert lib.get(lib.list()[0].id).certificate.energy == before


def test_bad_arguments_are_refused(lib):
    inst = small_certified(1)
    with pytest.raises(InputError, match="not one string"):
        lib.add(inst, tags="abc")
    with pytest.raises(InputError, match="non-empty"):
        lib.add(inst, tags=[""])
    with pytest.raises(InputError, match="malformed"):
        lib.add(inst.replace(metadata={"scores": [{"metric": "tts"}]}))
    assert len(lib) == 0


def test_damaged_index_rows_are_a_library_error(lib):
    r = lib.add(small_certified(1))
    lib._con.execute("UPDATE entries SET provenance = '{not json' WHERE fingerprint = ?", (r.fingerprint,))
    with pytest.raises(LibraryError, match="damaged"):
        lib.list()


def test_list_filters_and_sorting(lib):
    ids = {}
    for k, graph in enumerate(["chimera:1", "chimera:2", "square:3x3"]):
        inst = unfrustrated(graph, seed=k) if graph != "square:3x3" else make_instance(graph, seed=k)
        inst = inst.replace(metadata={**inst.metadata, "scores": [score("tts", 10.0 ** (k + 1))]})
        ids[graph] = lib.add(inst, tags=["even"] if k % 2 == 0 else []).id
    assert [e.graph for e in lib.list(graph="chimera")] == ["chimera:1", "chimera:2"]
    assert [e.graph for e in lib.list(graph="chimera:2", certified=True)] == ["chimera:2"]
    assert [e.graph for e in lib.list(certified=False)] == ["square:3x3"]
    assert [e.n for e in lib.list(min_n=9, max_n=9)] == [9]
    assert [e.graph for e in lib.list(metric="tts", min_value=50)] == ["chimera:2", "square:3x3"]
    assert [e.graph for e in lib.list(metric="tts", max_value=50, solver="sa")] == ["chimera:1"]
    assert lib.list(metric="tts", solver="other") == []
    assert [e.graph for e in lib.list(tags=["even"])] == ["chimera:1", "square:3x3"]
    assert [e.graph for e in lib.list(metric="tts", sort="value", reverse=True)] == [
        "square:3x3", "chimera:2", "chimera:1"]
    assert [e.n for e in lib.list(sort="n")] == [8, 9, 32]
    assert lib.list(sort="energy")[-1].graph == "square:3x3"  # no optimum: listed last
    with pytest.raises(InputError):
        lib.list(sort="value")
    with pytest.raises(InputError):
        lib.list(sort="colour")


def test_ids_resolve_by_unique_prefix(lib):
    fps = [lib.add(make_instance("chimera:1", "gaussian", seed=s)).fingerprint for s in range(3)]
    assert lib.resolve(fps[0][:10]) == fps[0]
    assert lib.resolve(fps[0].upper()) == fps[0]
    # a second (hand-made) row sharing the first 8 characters makes that prefix ambiguous
    twin = fps[0][:8] + ("0" if fps[0][8] != "0" else "1") + fps[0][9:]
    lib._con.execute("INSERT INTO entries (fingerprint, file, sha256, graph, n, m, has_fields, provenance,"
                     " added, updated) VALUES (?, 'entries/x.json', '', '', 0, 0, 0, '{}', 'now', 'now')", (twin,))
    with pytest.raises(LibraryError, match="more than one"):
        lib.get(fps[0][:8])
    assert lib.resolve(fps[0][:9]) == fps[0]
    with pytest.raises(LibraryError, match="no entry"):
        lib.get("0000000000")
    with pytest.raises(LibraryError, match="hex"):
        lib.get("xyz!")
    with pytest.raises(LibraryError, match="4 hex"):
        lib.get(fps[0][:3])


def test_remove(lib):
    r = lib.add(small_certified(3, scores=[score("tts", 1.0)]), tags=["t"])
    path = lib.get(r.id).path
    assert lib.remove(r.id) == r.fingerprint
    assert len(lib) == 0 and not path.exists()
    assert lib._con.execute("SELECT COUNT(*) FROM scores").fetchone()[0] == 0
    with pytest.raises(LibraryError):
        lib.remove(r.id)


def test_verify_passes_then_catches_tampering(lib):
    ids = [lib.add(small_certified(s)).id for s in range(3)]
    assert lib.verify().ok
    # tamper 1: a coupling changed inside a (still valid) instance file
    e = lib.get(ids[0])
    doc = json.loads(e.path.read_text())
    doc["J"][0] = -doc["J"][0]
    e.path.write_text(json.dumps(doc))
    # tamper 2: a file deleted
    lib.get(ids[1]).path.unlink()
    # tamper 3: the stored optimum edited in the index
    lib._con.execute("UPDATE entries SET cert_energy = cert_energy - 1 WHERE fingerprint = ?",
                     (lib.get(ids[2]).fingerprint,))
    report = lib.verify()
    assert not report.ok
    text = "\n".join(report.problems)
    assert f"entry {ids[0]}: file" in text and "checksum" in text and "different instance" in text
    assert f"entry {ids[1]}: file" in text and "missing" in text
    assert f"entry {ids[2]}: stored optimum" in text
    with pytest.raises(LibraryError, match="checksum"):
        lib.get(ids[0]).instance()


def test_stray_files_are_notes_and_tidy_removes_them(lib):
    lib.add(small_certified(1))
    stray = lib.root / "entries" / ("f" * 64 + ".json")
    save_instance(make_instance("chimera:1", seed=1), stray)
    report = lib.verify()
    assert report.ok and "belong to no entry" in report.notes[0]
    assert lib.verify(tidy=True).ok and not stray.exists()
    assert lib.verify().notes == []


def test_open_refuses_missing_damaged_and_newer(tmp_path):
    with pytest.raises(LibraryError, match="no library"):
        Library.open(tmp_path / "none")
    assert not (tmp_path / "none").exists()
    (tmp_path / "plain").mkdir()
    (tmp_path / "plain" / "notes.txt").write_text("mine")
    with pytest.raises(LibraryError, match="not an instgen library"):
        Library.open(tmp_path / "plain", create=True)
    assert [p.name for p in (tmp_path / "plain").iterdir()] == ["notes.txt"]
    (tmp_path / "junk").mkdir()
    (tmp_path / "junk" / "index.sqlite").write_bytes(b"this is not a database" * 10)
    with pytest.raises(LibraryError, match="damaged"):
        Library.open(tmp_path / "junk")
    Library.open(tmp_path / "new", create=True).close()
    con = sqlite3.connect(tmp_path / "new" / "index.sqlite")
    con.execute("UPDATE meta SET value = '99' WHERE key = 'schema_version'")
    con.commit()
    con.close()
    with pytest.raises(LibraryError, match="newer"):
        Library.open(tmp_path / "new")


def test_older_schema_is_migrated_and_recorded(tmp_path, monkeypatch):
    with Library.open(tmp_path / "lib", create=True) as lib:
        r = lib.add(small_certified(1))

    def add_column(con):
        con.execute("ALTER TABLE entries ADD COLUMN note TEXT")

    monkeypatch.setattr(schema, "SCHEMA_VERSION", schema.SCHEMA_VERSION + 1)
    monkeypatch.setitem(schema.MIGRATIONS, schema.SCHEMA_VERSION - 1, add_column)
    with Library.open(tmp_path / "lib") as lib:
        assert lib.get(r.id).certified
        cols = [row[1] for row in lib._con.execute("PRAGMA table_info(entries)")]
        done = [tuple(row) for row in lib._con.execute("SELECT version, note FROM migrations")]
        assert "note" in cols and done[-1] == (schema.SCHEMA_VERSION, f"upgraded from {schema.SCHEMA_VERSION - 1}")
        assert lib.verify().ok


def test_index_is_in_wal_mode(lib):
    # SQLite's own answer to the journal-mode pragma
    assert lib._con.execute("PRAGMA journal_mode").fetchone()[0] == "wal"


def test_export_refuses_to_overwrite(lib, tmp_path):
    r = lib.add(small_certified(1))
    out = tmp_path / "out"
    files = lib.export([r.id], ["json", "qubo-mtx"], out)
    assert load_instance(files[0]).n == 8
    before = files[1].read_bytes()
    with pytest.raises(InputError, match="already exists"):
        lib.export([r.id], ["qubo-mtx"], out)
    assert files[1].read_bytes() == before
