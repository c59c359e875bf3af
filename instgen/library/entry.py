"""One library entry, and what the library reads out of an instance's metadata.

The library trusts nothing it is handed: a certificate whose energy does not
match its own state, a malformed score or an empty tag is refused with an
:class:`~instgen.errors.InputError` before anything is written.
"""

from __future__ import annotations

import dataclasses
import hashlib
import json
from pathlib import Path

import numpy as np

from ..errors import FormatError, InputError, LibraryError
from ..instance import Instance
from ..io import encodable, loads_instance
from ..records import Certificate, Score
from .fingerprint import fingerprint

#: Characters of the fingerprint shown as an entry's short id.
SHORT_ID = 12

CERTIFIED = ("planted", "proven")


def energy_tolerance(inst: Instance) -> float:
    """Energies closer than this are the same energy (relative to Σ|J|+|h|)."""
    return 1e-9 * max(1.0, float(np.abs(inst.J).sum() + np.abs(inst.h).sum()))


def encode_state(state) -> str:
    """A ±1 state as text, '+' for +1 and '-' for -1 (spin 0 first)."""
    return "".join("+" if v > 0 else "-" for v in np.asarray(state).tolist())


def decode_state(text: str) -> np.ndarray:
    raw = np.frombuffer(text.encode("ascii"), dtype=np.uint8)
    return np.where(raw == ord("+"), 1, -1).astype(np.int8)


def json_safe(obj):
    """A copy with non-finite floats written as the strings "inf", "-inf", "nan".

    JSON has no such numbers and instance files refuse them, yet a score may
    be infinite (nothing reached the target) or carry an open-ended interval.
    ``float()`` reads the strings back.

    >>> json_safe({"ci": [1.5, float("inf")]})
    {'ci': [1.5, 'inf']}
    """
    if isinstance(obj, float) and not np.isfinite(obj):
        return str(obj)
    if isinstance(obj, dict):
        return {k: json_safe(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [json_safe(v) for v in obj]
    return obj


def certificate_of(inst: Instance) -> Certificate | None:
    """The instance's certificate, checked; a planted state counts as one.

    Raises :class:`InputError` when the metadata holds a certificate that is
    malformed or whose energy is not the energy of its own state.

    >>> inst = Instance(edges=[[0, 1]], J=[1.0], planted=[1, -1])
    >>> certificate_of(inst).status, certificate_of(inst).energy
    ('planted', -1.0)
    """
    raw = inst.metadata.get("certificate")
    if raw is None:
        if inst.planted is None:
            return None
        return Certificate(energy=float(inst.planted_energy), state=np.asarray(inst.planted, np.int8),
                           method="planted by construction", status="planted")
    try:
        cert = Certificate.from_dict(raw)
        state = np.asarray(cert.state)
        energy = float(cert.energy)
    except (TypeError, ValueError, KeyError) as exc:
        raise InputError(f"the instance's certificate is malformed ({exc})") from None
    if cert.status not in Certificate.STATUSES:
        raise InputError(f"certificate status {cert.status!r} is not one of {', '.join(Certificate.STATUSES)}")
    if state.shape != (inst.n,) or not np.all(np.abs(state) == 1):
        raise InputError(f"the certificate's state must be {inst.n} values of -1 or +1")
    actual = inst.energy(state)
    if abs(actual - energy) > energy_tolerance(inst):
        raise InputError(f"the certificate states energy {energy!r} but its state has energy {actual!r}; "
                         "refusing a certificate that contradicts itself")
    cert.state = state.astype(np.int8)
    cert.energy = energy
    return cert


def scores_of(inst: Instance) -> list[Score]:
    """Every hardness measurement in ``metadata["scores"]`` as Score records."""
    raw = inst.metadata.get("scores", [])
    if not isinstance(raw, list):
        raise InputError("metadata 'scores' must be a list of score records")
    out = []
    for k, d in enumerate(raw):
        try:
            score = score_from_record(d)
        except (TypeError, ValueError, KeyError) as exc:
            raise InputError(f"score record {k} in the instance is malformed ({exc})") from None
        if not isinstance(score.metric, str) or not score.metric:
            raise InputError(f"score record {k} names no metric")
        out.append(score)
    return out


def _number(x):
    return None if x is None else float(x)


def score_from_record(d: dict) -> Score:
    """A Score from its dict, numbers normalised.

    Records write an infinite or unknown number as null; a null value comes
    back as NaN (unknown: it matches no threshold and sorts last) and a null
    interval end as None (unbounded).

    >>> score_from_record({"metric": "tts", "value": None, "ci": [10, None]}).ci
    (10.0, None)
    """
    score = Score.from_dict(d)
    score.value = float("nan") if score.value is None else float(score.value)
    if score.ci is not None:
        score.ci = tuple(_number(x) for x in score.ci)
    return score


def known(score: Score | None) -> bool:
    """True for a measurement with a value (not missing, not NaN)."""
    return score is not None and not np.isnan(score.value)


def clean_tags(tags) -> list[str]:
    """Tags as a sorted list of distinct non-empty strings."""
    out = set()
    for t in tags:
        if not isinstance(t, str) or not t.strip():
            raise InputError(f"a tag must be a non-empty string, got {t!r}")
        if not t.isascii() and not encodable(t):  # e.g. bytes that were not UTF-8 on the command line
            raise InputError(f"a tag must be valid text, got {t!r}")
        out.add(t.strip())
    return sorted(out)


def score_key(score: Score) -> str:
    """Identity of a measurement: the same record filed twice is stored once."""
    text = json.dumps(json_safe(score.to_dict()), sort_keys=True, separators=(",", ":"), default=str)
    return hashlib.sha256(text.encode()).hexdigest()


@dataclasses.dataclass
class Entry:
    """One instance in a library, as the index describes it.

    ``certificate`` is None for an entry with no known optimum; an entry is
    *certified* only when the certificate's status is ``planted`` or
    ``proven`` (an ``not proven`` optimum is a best found state).  Call
    :meth:`instance` for the instance itself with the library's metadata.
    """

    fingerprint: str
    graph: str
    n: int
    m: int
    couplings: str | None
    fields: str | None
    has_fields: bool
    certificate: Certificate | None
    scores: list[Score]
    tags: list[str]
    provenance: dict
    construction: dict | None
    rules: dict | None
    created: str | None
    added: str
    path: Path
    sha256: str
    sightings: int = 1

    @property
    def id(self) -> str:
        """The short id shown in listings (a prefix of the fingerprint)."""
        return self.fingerprint[:SHORT_ID]

    @property
    def certified(self) -> bool:
        return self.certificate is not None and self.certificate.status in CERTIFIED

    @property
    def optimum_text(self) -> str:
        """The optimum in plain words, saying so when it is not proven."""
        c = self.certificate
        if c is None:
            return "unknown (no certificate)"
        if c.status in CERTIFIED:
            return f"{c.energy:.10g} ({c.status})"
        return f"{c.energy:.10g} (not proven: the best state found)"

    def latest(self, metric: str, solver: str | None = None) -> Score | None:
        """The most recently filed measurement of ``metric`` (by ``solver``).

        One with a value is preferred over a later one whose value is unknown.
        """
        found = [s for s in self.scores if s.metric == metric and (solver is None or s.solver == solver)]
        with_value = [s for s in found if known(s)]
        return (with_value or found or [None])[-1]

    def instance(self, check: bool = True) -> Instance:
        """The stored instance, with the library's certificate, scores, tags and provenance.

        With ``check`` the file's checksum is compared with the one recorded
        when it was filed; a changed or missing file raises LibraryError.
        """
        try:
            raw = self.path.read_bytes()
        except OSError:
            raise LibraryError(f"entry {self.id}: its file {self.path} is missing or unreadable; "
                               "run `instgen library verify`") from None
        if check and hashlib.sha256(raw).hexdigest() != self.sha256:
            raise LibraryError(f"entry {self.id}: its file {self.path} has changed since it was filed "
                               "(checksum mismatch); run `instgen library verify`")
        try:
            inst = loads_instance(raw.decode("utf-8"), str(self.path))
        except (UnicodeDecodeError, FormatError) as exc:
            raise LibraryError(f"entry {self.id}: its file cannot be read ({exc})") from None
        meta = dict(inst.metadata)
        meta.pop("certificate", None)
        if self.certificate is not None:
            meta["certificate"] = json_safe(self.certificate.to_dict())
        meta.update(scores=[json_safe(s.to_dict()) for s in self.scores], tags=list(self.tags),
                    provenance=dict(self.provenance), fingerprint=self.fingerprint)
        return inst.replace(metadata=meta)

    def to_dict(self, state: bool = False) -> dict:
        """A JSON-friendly summary (the certificate's state only with ``state``)."""
        cert = None
        if self.certificate is not None:
            cert = self.certificate.to_dict()
            if not state:
                cert.pop("state")
        return json_safe({
            "id": self.id, "fingerprint": self.fingerprint, "graph": self.graph, "n": self.n, "m": self.m,
            "couplings": self.couplings, "fields": self.fields, "has_fields": self.has_fields,
            "certified": self.certified, "optimum": self.optimum_text, "certificate": cert,
            "scores": [s.to_dict() for s in self.scores], "tags": list(self.tags),
            "provenance": self.provenance, "construction": self.construction, "rules": self.rules,
            "created": self.created, "added": self.added, "file": str(self.path), "sha256": self.sha256,
            "times_filed": self.sightings,
        })

    def check(self) -> list[str]:
        """Problems with this entry's file and certificate (empty when all is well)."""
        where = f"entry {self.id}"
        try:
            raw = self.path.read_bytes()
        except OSError:
            return [f"{where}: file {self.path.name} is missing"]
        out = []
        if hashlib.sha256(raw).hexdigest() != self.sha256:
            out.append(f"{where}: file {self.path.name} has changed since it was filed (checksum mismatch)")
        try:
            inst = self.instance(check=False)
        except (LibraryError, FormatError) as exc:
            return out + [f"{where}: {exc}"]
        if fingerprint(inst) != self.fingerprint:
            out.append(f"{where}: the file holds a different instance (its fingerprint does not match its name)")
        if (inst.n, inst.m) != (self.n, self.m):
            out.append(f"{where}: the index says n={self.n}, m={self.m} but the file has n={inst.n}, m={inst.m}")
        c = self.certificate
        if c is not None:
            if len(c.state) != inst.n:
                out.append(f"{where}: the stored ground state has {len(c.state)} spins, the instance {inst.n}")
            else:
                actual = inst.energy(c.state)
                if abs(actual - c.energy) > energy_tolerance(inst):
                    out.append(f"{where}: stored optimum {c.energy!r} is not the energy {actual!r} of the stored state")
                if inst.planted is not None and c.status in CERTIFIED and \
                        inst.planted_energy < c.energy - energy_tolerance(inst):
                    out.append(f"{where}: the planted state has energy {inst.planted_energy!r}, below the certified "
                               f"optimum {c.energy!r}")
        return out
