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

Numbers may be written as fractions (``levels:-1,-2/3,-1/3,1/3,2/3,1`` with
precision ``1/3``) or as decimals: a level within :data:`SNAP_TOLERANCE` of a
step from the precision grid (``0.3333`` for 1/3) is taken to mean the grid
value.  Every value the rules produce is snapped to the grid exactly (the float
nearest to k x step, so 3 x 1/3 is 1 and 1/3 - 1/3 is 0, never float noise).
"""

from __future__ import annotations

import dataclasses
import math
from fractions import Fraction

import numpy as np

from .errors import InputError
from .seeds import as_generator


#: Sizes accepted for alphabet values, ranges and precisions: far beyond any processor, yet
#: small enough that sums, differences and quotients of them never overflow a float.
MAX_MAGNITUDE = 1e100
MIN_STEP = 1e-100


#: How far (as a fraction of one step) a level may lie from the precision grid and still be taken
#: to mean the grid value: 3-digit decimals of thirds (0.333, 0.667) are within it, 0.33 is not.
SNAP_TOLERANCE = 5e-3

#: Largest denominator tried when a step is read as an exact fraction (1/3, 1/100).
_MAX_DENOMINATOR = 10**6


def parse_number(text, what: str = "value", check: bool = True) -> float:
    """A number from text: a decimal (``0.25``, ``1e-3``), a whole number or a fraction (``-2/3``).

    ``check``: refuse values that are not finite or larger than :data:`MAX_MAGNITUDE`
    (without it, they are returned for the caller's own check).

    >>> parse_number("1/3") == 1 / 3, parse_number("-2/3") == -2 / 3, parse_number("0.5")
    (True, True, 0.5)
    """
    if isinstance(text, (int, float)) and not isinstance(text, bool):
        value = float(text)
    else:
        word = str(text).strip().replace(" ", "")
        try:
            value = float(word)  # decimals, nan and inf
        except ValueError:
            try:
                value = float(Fraction(word))  # the float nearest to the fraction
            except (ValueError, ZeroDivisionError, OverflowError):
                raise InputError(f"{what}: expected a number or a fraction such as 1/3, got {text!r}") from None
    if check and (not math.isfinite(value) or abs(value) > MAX_MAGNITUDE):
        raise InputError(f"{what}: values must be finite numbers no larger than {MAX_MAGNITUDE:g} in size")
    return value


def _floats(text, what):
    try:
        return [parse_number(x, what) for x in text.split(",") if x.strip()]
    except InputError as exc:
        if "finite" in str(exc):
            raise
        raise InputError(f"{what}: expected numbers (or fractions such as 1/3) separated by commas, "
                         f"got {text!r}") from None


def exact_fraction(value: float) -> Fraction | None:
    """The fraction with a small denominator whose nearest float is ``value``, if there is one.

    >>> exact_fraction(1 / 3), exact_fraction(0.01), exact_fraction(2 ** 0.5)
    (Fraction(1, 3), Fraction(1, 100), None)
    """
    f = Fraction(value).limit_denominator(_MAX_DENOMINATOR)
    return f if float(f) == value else None


def number_text(value: float) -> str:
    """Short text that reads back as exactly ``value``: ``1``, ``0.25``, ``2/3``, else the full repr.

    >>> number_text(1.0), number_text(-0.5), number_text(2 / 3), number_text(1e-7)
    ('1', '-0.5', '2/3', '1e-07')
    """
    short = f"{value:g}"
    if float(short) == value:
        return short
    f = exact_fraction(value)
    if f is not None and f.denominator <= 10_000:
        return f"{f.numerator}/{f.denominator}"
    return repr(float(value))


def snap(values, step: float) -> np.ndarray:
    """``values`` moved to the nearest multiples of ``step``, each the float nearest to k x step.

    When ``step`` is a fraction a/b with a small denominator (1/3, 0.01), the grid value
    is computed as k*a/b in one rounding, so 3 x 1/3 gives 1.0 and 7 x 0.01 gives 0.07.

    >>> snap([0.9999999999999998, -5.55e-17, 0.6667], 1 / 3).tolist() == [1.0, 0.0, 2 / 3]
    True
    """
    v = np.asarray(values, dtype=np.float64)
    k = np.round(v / step)
    f = exact_fraction(step)
    if f is None or max(abs(f.numerator), f.denominator) >= 2**53:
        out = k * step
    else:
        out = (k * f.numerator) / f.denominator
    return out + 0.0  # no negative zeros


def common_step(values) -> float | None:
    """The largest step of which every value is a whole multiple (None when there is no simple one).

    >>> common_step([1 / 3, 2 / 3, 1.0]) == 1 / 3, common_step([2.0, 3.0]), common_step([2 ** 0.5, 1.0])
    (True, 1.0, None)
    """
    fracs = [exact_fraction(abs(float(v))) for v in values if v != 0]
    if not fracs or any(f is None for f in fracs):
        return None
    num = math.gcd(*(f.numerator * (math.lcm(*(g.denominator for g in fracs)) // f.denominator) for f in fracs))
    den = math.lcm(*(f.denominator for f in fracs))
    step = Fraction(num, den)
    return float(step) if step.denominator <= _MAX_DENOMINATOR else None


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
            return cls.of_levels(vals)
        raise InputError(f"unknown alphabet {kind!r}; choose one of: pm1, int:K, gaussian[:SIGMA], "
                         "uniform:A,B, levels:V1,V2,..." + (", none" if allow_none else ""))

    @classmethod
    def of_levels(cls, values) -> Alphabet:
        """A ``levels`` alphabet of ``values``, its spec written so that it reads back exactly.

        >>> Alphabet.of_levels([-1, -2 / 3, 2 / 3, 1]).spec
        'levels:-1,-2/3,2/3,1'
        """
        vals = sorted({float(v) + 0.0 for v in values})
        return cls("levels:" + ",".join(number_text(v) for v in vals), "levels", values=tuple(vals))

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
        limits = []
        for name, val in (("coupling range", coupling_range), ("field range", field_range), ("precision", precision)):
            if isinstance(val, str):  # "1/3" from a preset or the command line
                val = parse_number(val, name)
            if val is not None and (not isinstance(val, (int, float)) or isinstance(val, bool)
                                    or not MIN_STEP <= val <= MAX_MAGNITUDE):
                raise InputError(f"{name} must be a positive number between {MIN_STEP:g} and {MAX_MAGNITUDE:g}, "
                                 f"got {val!r}")
            limits.append(val)
        coupling_range, field_range, precision = limits
        if precision is not None:  # levels typed as decimals (0.3333) mean the grid values (1/3)
            ca, fa = _on_grid(ca, precision, "couplings"), _on_grid(fa, precision, "fields")
        rules = cls(ca, fa, coupling_range, field_range, precision)
        rules._check_fits(ca, coupling_range, "couplings")
        rules._check_fits(fa, field_range, "fields")
        return rules

    def _check_fits(self, alpha: Alphabet, limit, what):
        if alpha.kind == "none":
            return
        if limit is not None and alpha.kind != "gaussian" and alpha.max_abs > limit * (1 + 1e-12):
            raise InputError(f"the {what} alphabet {alpha} reaches |{alpha.max_abs:g}| but the range is {limit:g}")
        if self.precision is not None and not alpha.discrete and limit is not None and self.precision > limit:
            raise InputError(f"the precision {self.precision:g} is coarser than the {what} range {limit:g}")

    @property
    def scale(self) -> float:
        """Energy scale of one coupling (sets the default beta range)."""
        s = self.couplings.scale
        if self.coupling_range is not None:
            s = min(s, self.coupling_range)
        return s

    def legalise(self, values, kind: str = "couplings") -> np.ndarray:
        """Clip to the range and snap to the precision grid (:func:`snap`: no float noise)."""
        v = np.asarray(values, dtype=np.float64)
        limit = self.coupling_range if kind == "couplings" else self.field_range
        if limit is not None:
            v = np.clip(v, -limit, limit)
        if self.precision is not None:
            v = snap(v, self.precision)
            if limit is not None:  # a range that is not itself on the grid: the grid value inside it
                v = np.where(np.abs(v) > limit * (1 + 1e-12), v - np.sign(v) * self.precision, v)
                v = snap(v, self.precision)
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

    @classmethod
    def of_weights(cls, weights, cap: float | None = None) -> CouplingRules:
        """The rules of couplings that are sums of terms of magnitudes ``weights`` (planted families).

        The alphabet is the weights with both signs (``pm1`` for weight 1, ``int:K`` for 1..K);
        the range is the cap on accumulated |J|, when there is one.

        >>> CouplingRules.of_weights([1, 2, 3], cap=3).to_dict()["couplings"], CouplingRules.of_weights([1]).scale
        ('int:3', 1.0)
        """
        mags = sorted({abs(float(w)) for w in weights if w and (cap is None or abs(w) <= cap * (1 + 1e-12))})
        if not mags:
            raise InputError("a planted construction needs at least one weight within its cap")
        if mags == [float(k) for k in range(1, len(mags) + 1)]:
            alpha = "pm1" if len(mags) == 1 else f"int:{len(mags)}"
        else:
            alpha = Alphabet.of_levels([-w for w in mags] + mags)
        return cls.make(alpha, "none", coupling_range=cap)


def _on_grid(alpha: Alphabet, step: float, what: str) -> Alphabet:
    """A discrete alphabet with its values snapped to multiples of ``step``; refused when a value is far off."""
    if not alpha.discrete or alpha.kind == "none":
        return alpha
    vals = np.asarray(alpha.values, dtype=np.float64)
    off = np.abs(vals / step - np.round(vals / step))
    if off.max() > SNAP_TOLERANCE:
        bad = float(vals[int(off.argmax())])
        near = float(snap([bad], step)[0])
        raise InputError(f"the {what} alphabet {alpha} has values that are not multiples of the precision "
                         f"{number_text(step)}: {bad:g} is {abs(bad - near):.3g} from {number_text(near)}, more "
                         f"than {SNAP_TOLERANCE:.1%} of a step (write levels as fractions, e.g. 1/3, or with "
                         "more digits)")
    snapped = snap(vals, step)
    if np.array_equal(snapped, vals):
        return alpha
    if alpha.kind == "levels":
        return Alphabet.of_levels(snapped)
    return dataclasses.replace(alpha, values=tuple(float(v) for v in snapped))
