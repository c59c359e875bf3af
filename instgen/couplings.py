"""Coupling alphabets and the hardware-style limits on them.

An alphabet says which values couplings (or fields) are drawn from::

    pm1                 -1 or +1
    int:K               +-1, +-2, ..., +-K (no zero)
    gaussian[:SIGMA]    normal with standard deviation SIGMA (1 by default)
    uniform:A,B         uniform on [A, B]
    levels:V1,V2,...    one of the listed values, equally likely

Fields take the same alphabets, or ``none``.  :class:`CouplingRules` adds a
global range (|J| <= range) and a precision (values are multiples of the step),
because processors implement couplings with finite range and resolution.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np

from .errors import InputError
from .seeds import as_generator


#: Sizes accepted for alphabet values, ranges and precisions: far beyond any processor, yet
#: small enough that sums, differences and quotients of them never overflow a float.
MAX_MAGNITUDE = 1e100
MIN_STEP = 1e-100


def _floats(text, what):
    try:
        vals = [float(x) for x in text.split(",") if x.strip()]
    except ValueError:
        raise InputError(f"{what}: expected numbers separated by commas, got {text!r}") from None
    if not all(math.isfinite(v) and abs(v) <= MAX_MAGNITUDE for v in vals):
        raise InputError(f"{what}: values must be finite numbers no larger than {MAX_MAGNITUDE:g} in size")
    return vals


@dataclasses.dataclass(frozen=True)
class Alphabet:
    """A distribution of coupling (or field) values, parsed from a spec string."""

    spec: str
    kind: str
    values: tuple[float, ...] = ()
    sigma: float = 1.0
    low: float = 0.0
    high: float = 0.0

    KINDS = ("none", "pm1", "int", "gaussian", "uniform", "levels")

    @classmethod
    def parse(cls, spec: str, allow_none: bool = False) -> Alphabet:
        """Parse an alphabet spec (see the module docstring).

        >>> Alphabet.parse("int:2").values
        (-2.0, -1.0, 1.0, 2.0)
        """
        if not isinstance(spec, str) or not spec.strip():
            raise InputError("the coupling alphabet is empty; try pm1, int:3, gaussian, uniform:-1,1 or levels:...")
        spec = spec.strip()
        kind, _, arg = spec.partition(":")
        kind = kind.lower()
        if kind == "none":
            if not allow_none:
                raise InputError("couplings cannot be 'none' (fields can)")
            return cls("none", "none", values=(0.0,))
        if kind == "pm1":
            if arg:
                raise InputError("pm1 takes no argument")
            return cls("pm1", "pm1", values=(-1.0, 1.0))
        if kind == "int":
            try:
                k = int(arg)
            except ValueError:
                raise InputError(f"int:K needs a whole number K >= 1, got {arg!r}") from None
            if k < 1 or k > 10_000:
                raise InputError(f"int:K needs 1 <= K <= 10000, got {k}")
            vals = tuple(float(v) for v in list(range(-k, 0)) + list(range(1, k + 1)))
            return cls(f"int:{k}", "int", values=vals)
        if kind == "gaussian":
            sigma = _floats(arg, "gaussian:SIGMA")[0] if arg else 1.0
            if sigma <= 0:
                raise InputError(f"gaussian needs SIGMA > 0, got {sigma}")
            return cls(f"gaussian:{sigma:g}", "gaussian", sigma=sigma)
        if kind == "uniform":
            vals = _floats(arg, "uniform:A,B")
            if len(vals) != 2 or not vals[0] < vals[1]:
                raise InputError(f"uniform:A,B needs two numbers with A < B, got {arg!r}")
            return cls(f"uniform:{vals[0]:g},{vals[1]:g}", "uniform", low=vals[0], high=vals[1])
        if kind == "levels":
            vals = sorted(set(_floats(arg, "levels:V1,V2,...")))
            if not vals or all(v == 0 for v in vals):
                raise InputError("levels needs at least one non-zero value")
            return cls("levels:" + ",".join(f"{v:g}" for v in vals), "levels", values=tuple(vals))
        raise InputError(f"unknown alphabet {kind!r}; choose one of: pm1, int:K, gaussian[:SIGMA], "
                         "uniform:A,B, levels:V1,V2,..." + (", none" if allow_none else ""))

    @property
    def discrete(self) -> bool:
        return self.kind in ("none", "pm1", "int", "levels")

    @property
    def scale(self) -> float:
        """Typical size of a value, used for default schedules and normalisation."""
        if self.kind == "gaussian":
            return self.sigma
        if self.kind == "uniform":
            return max(abs(self.low), abs(self.high))
        return max(abs(v) for v in self.values) if self.values else 0.0

    @property
    def max_abs(self) -> float:
        """Largest |value| the alphabet can produce (inf for gaussian)."""
        if self.kind == "gaussian":
            return math.inf
        return self.scale

    def sample(self, size: int, seed=None) -> np.ndarray:
        rng = as_generator(seed)
        if self.kind == "gaussian":
            return rng.normal(0.0, self.sigma, size)
        if self.kind == "uniform":
            return rng.uniform(self.low, self.high, size)
        return np.asarray(self.values)[rng.integers(0, len(self.values), size)]

    def __str__(self) -> str:
        return self.spec


@dataclasses.dataclass(frozen=True)
class CouplingRules:
    """Alphabets plus the limits a processor imposes.

    ``coupling_range``: every |J| is clipped to it (None: no clip).
    ``field_range``: the same for |h|.
    ``precision``: values are rounded to multiples of this step (None: exact).
    """

    couplings: Alphabet
    fields: Alphabet
    coupling_range: float | None = None
    field_range: float | None = None
    precision: float | None = None

    @classmethod
    def make(cls, couplings="pm1", fields="none", coupling_range=None, field_range=None, precision=None):
        """Build and check rules from spec strings and numbers."""
        ca = couplings if isinstance(couplings, Alphabet) else Alphabet.parse(couplings)
        fa = fields if isinstance(fields, Alphabet) else Alphabet.parse(fields or "none", allow_none=True)
        for name, val in (("coupling range", coupling_range), ("field range", field_range), ("precision", precision)):
            if val is not None and (not isinstance(val, (int, float)) or isinstance(val, bool)
                                    or not MIN_STEP <= val <= MAX_MAGNITUDE):
                raise InputError(f"{name} must be a positive number between {MIN_STEP:g} and {MAX_MAGNITUDE:g}, "
                                 f"got {val!r}")
        rules = cls(ca, fa, coupling_range, field_range, precision)
        rules._check_fits(ca, coupling_range, "couplings")
        rules._check_fits(fa, field_range, "fields")
        return rules

    def _check_fits(self, alpha: Alphabet, limit, what):
        if alpha.kind == "none":
            return
        if limit is not None and alpha.kind != "gaussian" and alpha.max_abs > limit + 1e-12:
            raise InputError(f"the {what} alphabet {alpha} reaches |{alpha.max_abs:g}| but the range is {limit:g}")
        if self.precision is not None:
            if alpha.discrete:
                vals = np.asarray(alpha.values)
                if not np.allclose(np.round(vals / self.precision) * self.precision, vals, atol=1e-9):
                    raise InputError(f"the {what} alphabet {alpha} has values that are not multiples of "
                                     f"the precision {self.precision:g}")
            elif limit is not None and self.precision > limit:
                raise InputError(f"the precision {self.precision:g} is coarser than the {what} range {limit:g}")

    @property
    def scale(self) -> float:
        """Energy scale of one coupling (sets the default beta range)."""
        s = self.couplings.scale
        if self.coupling_range is not None:
            s = min(s, self.coupling_range)
        return s

    def legalise(self, values, kind: str = "couplings") -> np.ndarray:
        """Clip to the range and round to the precision."""
        v = np.asarray(values, dtype=np.float64)
        limit = self.coupling_range if kind == "couplings" else self.field_range
        if limit is not None:
            v = np.clip(v, -limit, limit)
        if self.precision is not None:
            v = np.round(v / self.precision) * self.precision
        return v

    def allows(self, values, kind: str = "couplings") -> bool:
        """True when every value is inside the range and on the precision grid."""
        v = np.asarray(values, dtype=np.float64)
        limit = self.coupling_range if kind == "couplings" else self.field_range
        if limit is not None and np.any(np.abs(v) > limit + 1e-9):
            return False
        if self.precision is not None and not np.allclose(np.round(v / self.precision) * self.precision, v, atol=1e-9):
            return False
        return True

    def sample_couplings(self, m: int, seed=None) -> np.ndarray:
        return self.legalise(self.couplings.sample(m, seed), "couplings")

    def sample_fields(self, n: int, seed=None) -> np.ndarray:
        if self.fields.kind == "none":
            return np.zeros(n)
        return self.legalise(self.fields.sample(n, seed), "fields")

    def to_dict(self) -> dict:
        return {
            "couplings": self.couplings.spec,
            "fields": self.fields.spec,
            "coupling_range": self.coupling_range,
            "field_range": self.field_range,
            "precision": self.precision,
        }

    @classmethod
    def from_dict(cls, d: dict) -> CouplingRules:
        return cls.make(**d)
