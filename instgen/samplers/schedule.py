"""Explicit annealing schedules.

A schedule is chosen before any instance is scored and stored with every score.
Samplers never pick a temperature range from the instance they are scoring:
a search would learn to break an automatic schedule instead of the sampler.

``beta_range`` is in units of inverse energy for the instance as written, so the
default range comes from the coupling alphabet's scale
(:func:`default_beta_range`), not from the instance.

For the path-integral and rotor samplers the anneal parameter s runs from 0 to 1
over ``sweeps``; ``shape`` bends that path:

* ``"plain"``: s rises linearly;
* ``"pause"``: s holds at ``s_pause`` for ``pause_fraction`` of the sweeps;
* ``"quench"``: linear up to ``s_quench``, then a jump to s = 1 for the remaining
  ``quench_sweeps`` sweeps (a fast ramp to the end).
"""

from __future__ import annotations

import dataclasses

import numpy as np

from ..errors import InputError

INTERPOLATIONS = ("geometric", "linear")
SHAPES = ("plain", "pause", "quench")

#: Default inverse-temperature range for unit-scale couplings (common practice
#: for ±1 spin glasses: hot enough to flip anything, cold enough to freeze).
UNIT_BETA_RANGE = (0.1, 5.0)


def default_beta_range(scale: float) -> tuple[float, float]:
    """The default (hot, cold) beta range for couplings of typical size ``scale``."""
    if not scale > 0 or not np.isfinite(scale):
        raise InputError(f"the coupling scale must be a positive number, got {scale}")
    return (UNIT_BETA_RANGE[0] / scale, UNIT_BETA_RANGE[1] / scale)


@dataclasses.dataclass(frozen=True)
class Schedule:
    """An explicit annealing schedule (see the module docstring)."""

    sweeps: int
    beta_range: tuple[float, float] = UNIT_BETA_RANGE
    interpolation: str = "geometric"
    shape: str = "plain"
    s_pause: float = 0.5
    pause_fraction: float = 0.0
    s_quench: float = 1.0
    quench_sweeps: int = 1

    def __post_init__(self):
        if isinstance(self.sweeps, bool) or not isinstance(self.sweeps, (int, np.integer)) or self.sweeps < 1:
            raise InputError(f"sweeps must be a positive integer, got {self.sweeps!r}")
        object.__setattr__(self, "sweeps", int(self.sweeps))
        b0, b1 = (float(x) for x in self.beta_range)
        if not (np.isfinite(b0) and np.isfinite(b1)) or b0 <= 0 or b1 <= 0:
            raise InputError(f"beta_range must be two positive numbers, got {self.beta_range}")
        object.__setattr__(self, "beta_range", (b0, b1))
        if self.interpolation not in INTERPOLATIONS:
            raise InputError(f"unknown interpolation {self.interpolation!r}; choose one of: {', '.join(INTERPOLATIONS)}")
        if self.shape not in SHAPES:
            raise InputError(f"unknown schedule shape {self.shape!r}; choose one of: {', '.join(SHAPES)}")
        for name in ("s_pause", "pause_fraction", "s_quench"):
            v = float(getattr(self, name))
            if not 0.0 <= v <= 1.0:
                raise InputError(f"{name} must lie in [0, 1], got {v}")
        if self.shape == "pause" and self.pause_fraction >= 1.0:
            raise InputError("pause_fraction must be below 1 (some sweeps must anneal)")
        if self.shape == "quench" and not 1 <= self.quench_sweeps < self.sweeps:
            raise InputError("quench_sweeps must be at least 1 and fewer than sweeps")

    def betas(self) -> np.ndarray:
        """Inverse temperature of each sweep, (sweeps,) float64, hot to cold."""
        b0, b1 = self.beta_range
        if self.sweeps == 1:
            return np.array([b1])
        if self.interpolation == "geometric":
            return np.geomspace(b0, b1, self.sweeps)
        return np.linspace(b0, b1, self.sweeps)

    def s_path(self) -> np.ndarray:
        """The anneal parameter s in (0, 1] at each sweep, following ``shape``."""
        k = self.sweeps
        if self.shape == "plain":
            return np.linspace(1.0 / k, 1.0, k)
        if self.shape == "pause":
            held = int(round(self.pause_fraction * k))
            ramp = k - held
            s = np.linspace(1.0 / ramp, 1.0, ramp) if ramp > 0 else np.array([])
            cut = int(np.searchsorted(s, self.s_pause))
            return np.concatenate([s[:cut], np.full(held, self.s_pause), s[cut:]])
        ramp = k - self.quench_sweeps
        s = np.linspace(self.s_quench / ramp, self.s_quench, ramp)
        return np.concatenate([s, np.ones(self.quench_sweeps)])

    def to_dict(self) -> dict:
        d = dataclasses.asdict(self)
        d["beta_range"] = list(self.beta_range)
        return d

    @classmethod
    def from_dict(cls, d: dict) -> Schedule:
        allowed = {f.name for f in dataclasses.fields(cls)}
        unknown = set(d) - allowed
        if unknown:
            raise InputError(f"unknown schedule key(s) {sorted(unknown)}; valid keys: {', '.join(sorted(allowed))}")
        d = dict(d)
        if "beta_range" in d:
            d["beta_range"] = tuple(d["beta_range"])
        return cls(**d)
