"""Small result records passed between stages (and between processes).

Each holds plain numbers and numpy arrays only, and turns into a JSON-friendly
dict with ``to_dict()`` and back with ``from_dict()``.
"""

from __future__ import annotations

import dataclasses
import math
from typing import Any

import numpy as np


def _plain(value):
    """Make numpy values JSON-friendly; infinities and NaN become None (unbounded / unknown)."""
    if isinstance(value, np.ndarray):
        return _plain(value.tolist())
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, dict):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_plain(v) for v in value]
    return value


@dataclasses.dataclass
class SampleBatch:
    """What a surrogate sampler returns for one instance.

    ``states`` is (R, n) int8 of ±1 in the instance's index order, ``energies``
    (R,) float64 recomputed by :meth:`Instance.energies`.  ``schedule`` is the
    exact schedule used (a dict, stored with every score), ``seed`` the integer
    seed given to the sampler, ``seconds`` the wall time of the sampling call,
    and ``spin_updates`` the number of single-spin update attempts it made
    (0 where that has no meaning), for ns-per-update figures.
    """

    sampler: str
    states: np.ndarray
    energies: np.ndarray
    schedule: dict[str, Any]
    reads: int
    seed: int
    seconds: float
    spin_updates: int = 0
    options: dict[str, Any] = dataclasses.field(default_factory=dict)

    @property
    def min_energy(self) -> float:
        return float(self.energies.min())

    def to_dict(self, states: bool = False) -> dict:
        d = {k: _plain(v) for k, v in dataclasses.asdict(self).items() if k != "states"}
        if states:
            d["states"] = self.states.tolist()
        return d


@dataclasses.dataclass
class Certificate:
    """How a ground-state energy is known.

    ``status`` is one of ``"planted"`` (by construction, checked), ``"proven"``
    (an exact method closed the problem) or ``"not proven"`` (best found, no
    proof; files written before this vocabulary say ``"not proven"`` and read as
    ``"not proven"``).  ``state`` is one state at ``energy``; ``ground_states`` the number of
    ground states where the method counts them (else None).
    """

    energy: float
    state: np.ndarray
    method: str
    status: str
    seconds: float = 0.0
    ground_states: int | None = None
    details: dict[str, Any] = dataclasses.field(default_factory=dict)

    STATUSES = ("planted", "proven", "not proven")
    NOT_PROVEN = "not proven"
    LEGACY = {"unverified": "not proven"}   # words of earlier files, read as today's

    @classmethod
    def status_of(cls, text) -> str:
        """The status a stored or exported word names: ``planted`` and ``proven``
        as written (a trailing explanation is ignored), anything else -- the old
        ``not proven``, a missing or unknown word -- is ``not proven``."""
        text = str(text or "").strip()
        for status in ("planted", "proven"):
            if text == status or text.startswith(status + " "):
                return status
        return cls.NOT_PROVEN

    @property
    def certified(self) -> bool:
        return self.status in ("planted", "proven")

    def to_dict(self) -> dict:
        d = {k: _plain(v) for k, v in dataclasses.asdict(self).items()}
        d["state"] = [int(x) for x in np.asarray(self.state)]
        return d

    @classmethod
    def from_dict(cls, d: dict) -> Certificate:
        d = dict(d)
        d["state"] = np.asarray(d["state"], dtype=np.int8)
        d["status"] = cls.status_of(d.get("status"))
        return cls(**d)


@dataclasses.dataclass
class Score:
    """One hardness measurement of one instance.

    ``value`` is the figure (``inf`` when nothing reached the target), ``ci``
    its confidence interval, ``kind`` says whether it is a ``"value"``, a
    ``"lower bound"`` or an ``"upper bound"`` (e.g. a time-to-solution whose
    optimum sits at the edge of the sweep grid).  ``reference`` is the energy
    measured against and ``reference_status`` how it is known (a Certificate
    status).  ``notes`` are plain-language cautions to print beside the number.
    """

    metric: str
    value: float
    ci: tuple[float, float] | None = None
    kind: str = "value"
    solver: str = ""
    schedule: dict[str, Any] | None = None
    reads: int = 0
    seeds: list[int] = dataclasses.field(default_factory=list)
    reference: float | None = None
    reference_status: str | None = None
    units: str = ""
    notes: list[str] = dataclasses.field(default_factory=list)
    extra: dict[str, Any] = dataclasses.field(default_factory=dict)

    def to_dict(self) -> dict:
        return {k: _plain(v) for k, v in dataclasses.asdict(self).items()}

    @classmethod
    def from_dict(cls, d: dict) -> Score:
        d = dict(d)
        if d.get("ci") is not None:
            d["ci"] = tuple(d["ci"])
        if d.get("reference_status") is not None:
            d["reference_status"] = Certificate.status_of(d["reference_status"])
        return cls(**d)
