"""The benchmark library: a folder with an SQLite index and one file per instance.

Layout::

    LIBRARY/
      index.sqlite          the index (WAL mode; see instgen.library.schema)
      entries/<fp>.json     one instance file per entry, named by its fingerprint

An entry's file is written once, when the instance is first filed, and never
changed afterwards; its SHA-256 is kept in the index.  Everything learned later
(more scores, tags, a better certificate) goes into the index, and
:meth:`Entry.instance` puts it back into the instance's metadata.

Crash safety: ``add`` takes the write lock (``BEGIN IMMEDIATE``), writes the
file atomically, then inserts the row and commits.  A process killed before
the commit leaves at most a file that no entry names, which ``verify`` reports
as a note (and ``verify(tidy=True)`` removes); it never leaves an entry
without its file.  ``remove`` commits first and deletes the file afterwards,
with the same outcome.  Several processes may add at once: writers queue on
SQLite's lock (busy timeout :data:`~instgen.library.schema.BUSY_TIMEOUT`).
"""

from __future__ import annotations

import contextlib
import dataclasses
import hashlib
import json
import os
import sqlite3
from pathlib import Path

from .. import __version__
from ..errors import InputError, LibraryError
from ..instance import Instance
from ..io import atomic_write, dumps_instance, encodable
from ..records import Certificate, Score
from . import schema
from .entry import (CERTIFIED, SHORT_ID, Entry, certificate_of, clean_tags, decode_state,
                    encode_state, energy_tolerance, json_safe, known, score_from_record, score_key,
                    scores_of)
from .fingerprint import FINGERPRINT_VERSION, canonical_form, carry_state

INDEX_NAME = "index.sqlite"
ENTRIES_DIR = "entries"
#: Environment variable naming the default library folder (else ./library).
ENV_VAR = "INSTGEN_LIBRARY"
SORT_KEYS = ("added", "id", "graph", "n", "m", "energy", "value")
_HEX = set("0123456789abcdef")


def _check_new_location(root: Path) -> None:
    own = {ENTRIES_DIR, INDEX_NAME, INDEX_NAME + "-wal", INDEX_NAME + "-shm", INDEX_NAME + "-journal"}
    if root.exists() and (not root.is_dir() or any(p.name not in own for p in root.iterdir())):
        raise LibraryError(f"{root} exists and is not an instgen library; choose a new or empty folder")


def default_location() -> Path:
    """``$INSTGEN_LIBRARY`` if set, else ``./library``."""
    return Path(os.environ.get(ENV_VAR) or "library")


@dataclasses.dataclass
class AddResult:
    """What :meth:`Library.add` did: a new entry, or what it merged into an old one."""

    fingerprint: str
    new: bool
    changes: list[str]

    @property
    def id(self) -> str:
        return self.fingerprint[:SHORT_ID]


@dataclasses.dataclass
class VerifyReport:
    """Outcome of a check: ``problems`` make it fail, ``notes`` are harmless."""

    checked: int
    problems: list[str]
    notes: list[str]

    @property
    def ok(self) -> bool:
        return not self.problems


class Library:
    """A benchmark library folder.  Open with :meth:`Library.open`.

    Examples
    --------
    >>> import tempfile
    >>> from instgen.make import make_instance
    >>> with Library.open(tempfile.mkdtemp() + "/lib", create=True) as lib:
    ...     first = lib.add(make_instance("chimera:1", seed=1), tags=["demo"])
    ...     again = lib.add(make_instance("chimera:1", seed=1))
    ...     (first.new, again.new, len(lib))
    (True, False, 1)
    """

    def __init__(self, root: Path, con: sqlite3.Connection):
        self.root = root
        self._con = con
        con.row_factory = sqlite3.Row

    # ------------------------------------------------------------- opening
    @classmethod
    def open(cls, path=None, create: bool = False) -> Library:
        """Open the library at ``path`` (default :func:`default_location`).

        With ``create`` a missing library is made (in a new or empty folder).
        Raises LibraryError for a missing, damaged or newer library.
        """
        root = Path(path) if path is not None else default_location()
        index = root / INDEX_NAME
        if index.exists() and not index.is_file():
            raise LibraryError(f"{index} is not a file; {root} is not an instgen library")
        if not index.exists():
            if not create:
                if root.is_dir():
                    raise LibraryError(f"{root} is not an instgen library (it has no {INDEX_NAME})")
                raise LibraryError(f"no library at {root}; `instgen library add FILE --library {root}` creates one")
            _check_new_location(root)
            try:
                (root / ENTRIES_DIR).mkdir(parents=True, exist_ok=True)
            except OSError as exc:
                raise LibraryError(f"cannot create a library at {root}: {exc.strerror or exc}") from None
        con = schema.connect(index, create=create)
        if create:  # also when the index exists: another process may be creating it right now
            try:
                schema.initialise(con, FINGERPRINT_VERSION)
            except BaseException:
                con.close()
                raise
        try:
            schema.upgrade(con, root)
            row = con.execute("SELECT value FROM meta WHERE key = 'fingerprint_version'").fetchone()
            if row is None or row[0] != str(FINGERPRINT_VERSION):
                raise LibraryError(f"{root} names its entries with fingerprint version {row and row[0]}, "
                                   f"this instgen uses version {FINGERPRINT_VERSION}")
            if not (root / ENTRIES_DIR).is_dir():
                raise LibraryError(f"{root} is damaged: its {ENTRIES_DIR}/ folder is missing")
        except sqlite3.DatabaseError as exc:
            con.close()
            raise LibraryError(f"{root} is damaged or not a library ({exc})") from None
        except BaseException:
            con.close()
            raise
        return cls(root, con)

    @classmethod
    def check_location(cls, path) -> None:
        """Raise LibraryError now for a folder ``open(path, create=True)`` would refuse; creates nothing.

        For work that files into a library only at its end (breeding), so a
        wrong folder is named before the work, not after it.
        """
        root = Path(path)
        if (root / INDEX_NAME).exists():
            cls.open(root).close()  # also checks the schema version and the fingerprint scheme
        else:
            _check_new_location(root)

    def close(self) -> None:
        self._con.close()

    def __enter__(self) -> Library:
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    def __len__(self) -> int:
        return self._con.execute("SELECT COUNT(*) FROM entries").fetchone()[0]

    def __repr__(self) -> str:
        return f"<Library {self.root}>"

    @contextlib.contextmanager
    def _transaction(self, write: bool):
        con = self._con
        if con.in_transaction:  # nested: part of the transaction already open
            yield con
            return
        try:
            con.execute("BEGIN IMMEDIATE" if write else "BEGIN")
        except sqlite3.OperationalError as exc:
            raise LibraryError(f"the library {self.root} is busy or locked ({exc}); try again") from None
        try:
            yield con
            con.execute("COMMIT")
        except sqlite3.DatabaseError as exc:
            if con.in_transaction:
                con.execute("ROLLBACK")
            raise LibraryError(f"the library index in {self.root} failed: {exc}") from None
        except BaseException:
            if con.in_transaction:
                con.execute("ROLLBACK")
            raise

    def _file(self, fp: str) -> Path:
        return self.root / ENTRIES_DIR / f"{fp}.json"

    # ----------------------------------------------------------------- add
    def add(self, instance: Instance, tags=(), provenance: dict | None = None) -> AddResult:
        """File an instance; merge into the existing entry when it is already there.

        The instance's ``metadata`` supplies the certificate (or its planted
        state counts as one), the scores, tags and provenance.  An instance
        already in the library (same fingerprint: same problem up to gauge and
        spin order) gains any new scores and tags, and a better certificate
        (carried into the stored gauge and checked); nothing is duplicated.

        Raises InputError for a self-contradicting certificate or one that
        contradicts the stored optimum; the library is then unchanged.
        """
        form = canonical_form(instance)
        fp = form.fingerprint
        cert = certificate_of(instance)
        scores = scores_of(instance)
        meta_tags, meta_prov = instance.metadata.get("tags", []), instance.metadata.get("provenance", {})
        if isinstance(meta_tags, str) or isinstance(tags, str):
            raise InputError("tags must be a list of strings, not one string")
        if not isinstance(meta_prov, dict) or not isinstance(provenance or {}, dict):
            raise InputError("provenance must be a mapping of names to values")
        tag_list = clean_tags(list(meta_tags) + list(tags))
        prov = {"tool_version": __version__, "created": schema.now(), **meta_prov,
                **(provenance or {})}
        if "seed" not in prov and isinstance(instance.metadata.get("seed"), int):
            prov["seed"] = instance.metadata["seed"]
        text = dumps_instance(instance.replace(metadata=json_safe(instance.metadata)), provenance=json_safe(prov))
        digest = hashlib.sha256(text.encode()).hexdigest()
        prov_json = json.dumps(json_safe(prov), sort_keys=True, default=str)
        now = schema.now()
        with self._transaction(write=True) as con:
            row = con.execute("SELECT * FROM entries WHERE fingerprint = ?", (fp,)).fetchone()
            if row is None:
                atomic_write(self._file(fp), text)
                rules = instance.metadata.get("rules")
                rules = json_safe(rules) if isinstance(rules, dict) else {}
                con.execute(
                    "INSERT INTO entries (fingerprint, file, sha256, graph, n, m, couplings, fields, has_fields,"
                    " rules, construction, provenance, created, added, updated)"
                    " VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
                    (fp, f"{ENTRIES_DIR}/{fp}.json", digest, instance.graph, instance.n, instance.m,
                     rules.get("couplings"), rules.get("fields"), int(instance.has_fields),
                     json.dumps(rules) if rules else None,
                     json.dumps(instance.metadata.get("construction"), default=str)
                     if instance.metadata.get("construction") is not None else None,
                     prov_json, prov.get("created"), now, now))
                if cert is not None:
                    self._store_certificate(con, fp, cert, now)
                changes = []
            else:
                changes = []
                if cert is not None:
                    note = self._merge_certificate(con, row, cert, instance, form, now)
                    if note:
                        changes.append(note)
            tool = prov.get("tool_version")
            added = sum(self._store_score(con, fp, s, tool, now) for s in scores)
            if added and row is not None:
                changes.append(f"{added} new score{'s' * (added != 1)}")
            new_tags = [t for t in tag_list if con.execute(
                "INSERT OR IGNORE INTO tags (fingerprint, tag) VALUES (?, ?)", (fp, t)).rowcount]
            if new_tags and row is not None:
                changes.append("tag" + "s" * (len(new_tags) != 1) + " " + ", ".join(new_tags))
            con.execute("INSERT INTO sightings (fingerprint, added, provenance) VALUES (?, ?, ?)", (fp, now, prov_json))
        return AddResult(fp, row is None, changes)

    @staticmethod
    def _store_certificate(con, fp: str, cert: Certificate, now: str) -> None:
        con.execute("UPDATE entries SET cert_status = ?, cert_energy = ?, cert_method = ?, cert_seconds = ?,"
                    " ground_states = ?, cert_state = ?, cert_details = ?, updated = ? WHERE fingerprint = ?",
                    (cert.status, float(cert.energy), cert.method, float(cert.seconds or 0.0),
                     cert.ground_states, encode_state(cert.state),
                     json.dumps(cert.details or {}, default=str), now, fp))

    @staticmethod
    def _store_score(con, fp: str, score: Score, tool: str | None, now: str) -> int:
        ci = score.ci or (None, None)
        tool = (score.extra or {}).get("tool_version", tool)
        return con.execute(
            "INSERT OR IGNORE INTO scores (fingerprint, key, metric, value, ci_low, ci_high, kind, solver, reads,"
            " tool_version, record, added) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
            (fp, score_key(score), score.metric, score.value, ci[0], ci[1], score.kind, score.solver,
             int(score.reads or 0), tool, json.dumps(score.to_dict(), default=str), now)).rowcount

    def _merge_certificate(self, con, row, cert: Certificate, instance, form, now) -> str | None:
        """Carry a newcomer's certificate into the stored entry when it says more."""
        stored = self._load_row_instance(row)
        state = carry_state(cert.state, form, canonical_form(stored))
        energy = stored.energy(state)
        tol = energy_tolerance(stored)
        old_status, old_energy = row["cert_status"], row["cert_energy"]
        old_status = None if old_status is None else Certificate.status_of(old_status)
        new_cert = dataclasses.replace(cert, state=state, energy=energy)
        if old_status is None:
            self._store_certificate(con, row["fingerprint"], new_cert, now)
            return f"certificate ({cert.status})"
        old_ok, new_ok = old_status in CERTIFIED, cert.status in CERTIFIED
        contradiction = ((old_ok and energy < old_energy - tol) or (new_ok and energy > old_energy + tol)
                         or (old_ok and new_ok and abs(energy - old_energy) > tol))
        if contradiction:
            raise InputError(f"this instance's optimum {energy!r} ({cert.status}) contradicts the library's "
                             f"{old_energy!r} ({old_status}) for entry {row['fingerprint'][:SHORT_ID]}; "
                             "one of the certificates is wrong; the library was not changed")
        if new_ok and not old_ok:
            self._store_certificate(con, row["fingerprint"], new_cert, now)
            return f"certificate upgraded from {old_status} to {cert.status}"
        if not new_ok and not old_ok and energy < old_energy - tol:
            self._store_certificate(con, row["fingerprint"], new_cert, now)
            return f"better best-found state ({old_energy:.10g} -> {energy:.10g}, still not proven)"
        if new_ok and old_ok and row["ground_states"] is None and cert.ground_states is not None:
            con.execute("UPDATE entries SET ground_states = ?, updated = ? WHERE fingerprint = ?",
                        (cert.ground_states, now, row["fingerprint"]))
            return "ground-state count"
        return None

    def _load_row_instance(self, row) -> Instance:
        return self._entries("fingerprint = ?", (row["fingerprint"],))[0].instance()

    # --------------------------------------------------------------- reading
    def resolve(self, ident: str) -> str:
        """The full fingerprint for an id (any unique prefix of at least 4 characters)."""
        key = str(ident).strip().lower()
        if len(key) < 4 or set(key) - _HEX:
            raise LibraryError(f"{ident!r} is not an entry id (give at least 4 hex characters of a fingerprint)")
        rows = self._con.execute("SELECT fingerprint FROM entries WHERE substr(fingerprint, 1, ?) = ? LIMIT 2",
                                 (len(key), key)).fetchall()
        if not rows:
            raise LibraryError(f"no entry {ident} in {self.root}")
        if len(rows) > 1:
            raise LibraryError(f"id {ident} matches more than one entry; give more characters")
        return rows[0][0]

    def get(self, ident: str) -> Entry:
        """The entry for an id or unique fingerprint prefix."""
        return self._entries("fingerprint = ?", (self.resolve(ident),))[0]

    def list(self, graph: str | None = None, min_n: int | None = None, max_n: int | None = None,
             certified: bool | None = None, tags=(), metric: str | None = None, solver: str | None = None,
             min_value: float | None = None, max_value: float | None = None, sort: str = "added",
             reverse: bool = False) -> list[Entry]:
        """Entries matching every filter given.

        ``graph`` matches a spec exactly, or a family (``"chimera"``) when it
        has no ``:``.  ``certified=True`` keeps planted/proven entries only.
        ``metric`` keeps entries measured on that metric (by ``solver`` if
        given); with ``min_value``/``max_value`` it compares the latest
        measurement that has a value (see :meth:`Entry.latest`), and entries
        without one are left out.  ``sort`` is one of :data:`SORT_KEYS` (``value``
        sorts by the metric); entries lacking the sort key come last.
        """
        if sort not in SORT_KEYS:
            raise InputError(f"unknown sort key {sort!r}; choose one of: {', '.join(SORT_KEYS)}")
        if metric is None and (min_value is not None or max_value is not None or sort == "value"):
            raise InputError("a metric threshold or sorting by value needs a metric name")
        where, params = ["1"], []
        if graph:
            if not graph.isascii() and not encodable(graph):
                raise InputError(f"the graph filter must be valid text, got {graph!r}")
            if ":" in graph:
                where.append("graph = ?")
                params.append(graph)
            else:
                where.append("(graph = ? OR substr(graph, 1, ?) = ?)")
                params += [graph, len(graph) + 1, graph + ":"]
        if min_n is not None:
            where.append("n >= ?")
            params.append(int(min_n))
        if max_n is not None:
            where.append("n <= ?")
            params.append(int(max_n))
        if certified is not None:
            where.append(("" if certified else "NOT ") + "coalesce(cert_status IN ('planted', 'proven'), 0)")
        for tag in clean_tags(tags):
            where.append("fingerprint IN (SELECT fingerprint FROM tags WHERE tag = ?)")
            params.append(tag)
        entries = self._entries(" AND ".join(where), params)
        if metric is not None:
            def keep(e):
                s = e.latest(metric, solver)
                if min_value is None and max_value is None:
                    return s is not None
                return known(s) and (min_value is None or s.value >= min_value) and (
                    max_value is None or s.value <= max_value)
            entries = [e for e in entries if keep(e)]
        keys = {
            "added": lambda e: (e.added, e.fingerprint), "id": lambda e: e.fingerprint,
            "graph": lambda e: (e.graph, e.n, e.fingerprint), "n": lambda e: (e.n, e.fingerprint),
            "m": lambda e: (e.m, e.fingerprint),
            "energy": lambda e: None if e.certificate is None else e.certificate.energy,
            "value": lambda e: e.latest(metric, solver).value if known(e.latest(metric, solver)) else None,
        }
        key = keys[sort]
        present = sorted((e for e in entries if key(e) is not None), key=key, reverse=reverse)
        return present + [e for e in entries if key(e) is None]

    def _entries(self, where: str, params) -> list[Entry]:
        sub = f"SELECT fingerprint FROM entries WHERE {where}"
        with self._transaction(write=False) as con:
            rows = con.execute(f"SELECT * FROM entries WHERE {where} ORDER BY added, fingerprint",
                               params).fetchall()
            scores, tags, seen = {}, {}, {}
            for r in con.execute(f"SELECT fingerprint, record FROM scores WHERE fingerprint IN ({sub})"
                                 " ORDER BY id", params):
                try:
                    scores.setdefault(r[0], []).append(score_from_record(json.loads(r[1])))
                except (ValueError, TypeError) as exc:
                    raise LibraryError(f"the index of {self.root} is damaged: a score of entry "
                                       f"{r[0][:SHORT_ID]} is unreadable ({exc})") from None
            for r in con.execute(f"SELECT fingerprint, tag FROM tags WHERE fingerprint IN ({sub})"
                                 " ORDER BY tag", params):
                tags.setdefault(r[0], []).append(r[1])
            for r in con.execute(f"SELECT fingerprint, COUNT(*) FROM sightings WHERE fingerprint IN ({sub})"
                                 " GROUP BY fingerprint", params):
                seen[r[0]] = r[1]
        return [self._entry(r, scores.get(r["fingerprint"], []), tags.get(r["fingerprint"], []),
                            seen.get(r["fingerprint"], 1)) for r in rows]

    def _entry(self, r, scores, tags, seen) -> Entry:
        try:
            return self._build_entry(r, scores, tags, seen)
        except (ValueError, TypeError, KeyError, UnicodeError) as exc:
            raise LibraryError(f"the index of {self.root} is damaged: entry {str(r['fingerprint'])[:SHORT_ID]} "
                               f"has unreadable fields ({exc})") from None

    def _build_entry(self, r, scores, tags, seen) -> Entry:
        if r["file"] != f"{ENTRIES_DIR}/{r['fingerprint']}.json":  # never a path outside the library
            raise ValueError(f"its file is recorded as {r['file']!r}, not {ENTRIES_DIR}/<fingerprint>.json")
        cert = None
        if r["cert_status"] is not None:
            cert = Certificate(energy=float(r["cert_energy"]), state=decode_state(r["cert_state"] or ""),
                               method=r["cert_method"], status=Certificate.status_of(r["cert_status"]),
                               seconds=r["cert_seconds"] or 0.0,
                               ground_states=r["ground_states"], details=json.loads(r["cert_details"] or "{}"))
        return Entry(
            fingerprint=r["fingerprint"], graph=r["graph"], n=r["n"], m=r["m"], couplings=r["couplings"],
            fields=r["fields"], has_fields=bool(r["has_fields"]), certificate=cert, scores=scores, tags=tags,
            provenance=json.loads(r["provenance"]), construction=json.loads(r["construction"] or "null"),
            rules=json.loads(r["rules"] or "null"), created=r["created"], added=r["added"],
            path=self.root / r["file"], sha256=r["sha256"], sightings=seen)

    # ------------------------------------------------------------ changing
    def remove(self, ident: str) -> str:
        """Remove an entry (index row first, then its file); returns its fingerprint."""
        fp = self.resolve(ident)
        with self._transaction(write=True) as con:
            for table in ("scores", "tags", "sightings", "entries"):
                con.execute(f"DELETE FROM {table} WHERE fingerprint = ?", (fp,))
        # the file goes under the write lock, and only if no add filed the instance again meanwhile
        with self._transaction(write=True) as con:
            if con.execute("SELECT 1 FROM entries WHERE fingerprint = ?", (fp,)).fetchone() is None:
                self._file(fp).unlink(missing_ok=True)
        return fp

    def verify(self, tidy: bool = False) -> VerifyReport:
        """Check every entry: file present, checksum, fingerprint, certificate energy.

        Files in ``entries/`` that no entry names (left by an interrupted add
        or remove) are notes, not problems; ``tidy`` deletes them.
        """
        problems, notes = [], []
        check = self._con.execute("PRAGMA quick_check").fetchone()[0]
        if check != "ok":
            problems.append(f"the index fails SQLite's integrity check: {check}")
        entries = self._entries("1", ())
        for e in entries:
            problems += e.check()
        with self._transaction(write=tidy) as con:
            known = {r[0] for r in con.execute("SELECT file FROM entries")}
            stray = sorted(p for p in (self.root / ENTRIES_DIR).iterdir()
                           if f"{ENTRIES_DIR}/{p.name}" not in known)
            if stray:
                if tidy:
                    for p in stray:
                        p.unlink(missing_ok=True)
                    notes.append(f"removed {len(stray)} file(s) that belonged to no entry")
                else:
                    notes.append(f"{len(stray)} file(s) in {ENTRIES_DIR}/ belong to no entry (left by an "
                                 "interrupted add or rm; harmless; `verify --tidy` removes them): "
                                 + ", ".join(p.name[:24] for p in stray[:5]) + (" ..." if len(stray) > 5 else ""))
        return VerifyReport(len(entries), problems, notes)

    def export(self, idents, formats, directory, overwrite: bool = False) -> list[Path]:
        """Write entries in the given export formats into ``directory``.

        Files are named by the entry's short id plus the format's suffix.
        Existing files are never replaced unless ``overwrite``; every target
        is checked before anything is written.
        """
        from ..export import FORMATS, export_instance, targets

        formats = [formats] if isinstance(formats, str) else list(formats)
        for f in formats:
            FORMATS.get(f)
        directory = Path(directory)
        entries = [self.get(i) for i in idents]
        jobs = [(e, f, directory / e.id) for e in entries for f in formats]
        if not overwrite:
            clash = [p for _, f, stem in jobs for p in targets(stem, f) if p.exists()]
            if clash:
                raise InputError(f"{clash[0]} already exists ({len(clash)} file(s) would be replaced); "
                                 "choose another folder or allow overwriting")
        instances = {e.fingerprint: e.instance() for e in entries}
        written = []
        for e, f, stem in jobs:
            written += export_instance(instances[e.fingerprint], stem, f)
        return written

