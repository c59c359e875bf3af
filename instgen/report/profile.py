"""Anneal profiles: how an instance's energy falls along a path-integral anneal.

Before spending processor time on a quench study, a group wants to know
whether an instance still changes late in the anneal.  :func:`anneal_profile`
runs the path-integral surrogate (the ``pimc`` sampler) once, reads every
replica's state at K evenly spaced points s_k of the anneal
(:func:`instgen.samplers.pimc.anneal_snapshots`; reading does not disturb the
anneal) and reports per point:

* mean and minimum energy over the replicas (and the standard error of the mean);
* residual energy: mean (and minimum) energy minus the reference energy, which
  is the certified ground state when the instance has one, else its planted
  state, else the lowest energy this profile saw (then it is said plainly that
  it is not a proven ground state);
* median Hamming distance between a replica's states at adjacent points;
* fraction of spins already frozen: spins whose value never changes again at
  any later point up to the end (so it is 1 at the last point by definition,
  and "never" means "at none of the later sample points").

:func:`fit_break` fits a two-piece (hinge) line to energy against s: the
*break point* is where the energy stops falling at its early rate.  Its
uncertainty comes from a bootstrap over replicas (or the fit's covariance when
only the curve is known), and the fit is called poor, plainly, when a straight
line does about as well, the break sits at the edge of the range, the
interval is wide, or the energy falls faster after the break than before.
The break point summarises where the steep fall ends; it is a description of
the curve, not a phase transition, and its uncertainty does not include the
error of describing a smooth curve by two lines.
"""

from __future__ import annotations

import csv
import dataclasses
import io
import json
import math
from pathlib import Path

import numpy as np

from ..errors import InputError, ResourceError
from ..instance import Instance
from ..io import atomic_write

PROFILE_FORMAT = "instgen-anneal-profile"
PROFILE_VERSION = 1
#: Grid of candidate break points tried before the local refinement.
_GRID = 401
#: A fit is poor when a straight line is not rejected at this level (approximate F-test).
POOR_P = 0.01
#: ... or when the two-piece line explains less than this share of the variation.
POOR_R2 = 0.95
#: ... or when the 95% interval of the break point is wider than this (in s).
POOR_WIDTH = 0.25


@dataclasses.dataclass
class BreakFit:
    """A two-piece linear fit y = c + b1 min(s - s_break, 0) + b2 max(s - s_break, 0).

    ``se`` and ``ci`` (95%) describe the uncertainty of ``s_break``; ``method``
    says where they come from.  ``p_line`` is the approximate F-test p-value of
    the two-piece line against one straight line (small: the break is real).
    """

    s_break: float
    level: float
    slope_before: float
    slope_after: float
    r2: float
    r2_line: float
    p_line: float
    se: float
    ci: tuple[float, float]
    method: str
    poor: bool = False
    notes: list[str] = dataclasses.field(default_factory=list)

    def predict(self, s) -> np.ndarray:
        """The fitted line at ``s``."""
        d = np.asarray(s, dtype=float) - self.s_break
        return self.level + self.slope_before * np.minimum(d, 0) + self.slope_after * np.maximum(d, 0)

    def to_dict(self) -> dict:
        d = dataclasses.asdict(self)
        d["ci"] = list(self.ci)
        return d


def _design(s: np.ndarray, breaks: np.ndarray) -> np.ndarray:
    d = s[None, :] - breaks[:, None]
    return np.stack([np.ones_like(d), np.minimum(d, 0.0), np.maximum(d, 0.0)], axis=-1)


def _rss(s: np.ndarray, Y: np.ndarray, breaks: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Least-squares RSS (G, B) and coefficients (G, B, 3) for each break and each curve in Y (B, K)."""
    X = _design(s, breaks)
    Xt = X.transpose(0, 2, 1)
    coef = np.linalg.solve(Xt @ X, Xt @ Y.T)  # (G, 3, B)
    resid = Y.T[None] - X @ coef
    return (resid ** 2).sum(axis=1), coef.transpose(0, 2, 1)


def _best_break(s: np.ndarray, Y: np.ndarray) -> np.ndarray:
    """Grid estimate of the break point of every curve in Y (B, K)."""
    grid = np.linspace(s[1], s[-2], _GRID)
    rss, _ = _rss(s, Y, grid)
    return grid[np.argmin(rss, axis=0)]


def fit_break(s, y, replicas=None, boot: int = 200, seed=0) -> BreakFit:
    """Fit a two-piece line to ``y`` against ``s`` and say how well it fits.

    Parameters
    ----------
    s : (K,) array
        Increasing sample points (K >= 6).
    y : (K,) array
        The curve (e.g. mean energy at each point).
    replicas : (R, K) array, optional
        The per-replica values whose mean is ``y``; when given, the break
        point's uncertainty is a bootstrap over replicas, else it comes from
        the fit's covariance matrix.
    boot : int
        Bootstrap resamples.
    seed : int

    Returns
    -------
    BreakFit

    Examples
    --------
    >>> s = np.linspace(0, 1, 21)
    >>> y = np.where(s < 0.4, -10 * (s - 0.4), -1 * (s - 0.4))
    >>> round(fit_break(s, y).s_break, 3)
    0.4
    """
    from scipy import optimize, stats

    from ..seeds import as_generator

    s = np.asarray(s, dtype=float)
    y = np.asarray(y, dtype=float)
    K = s.size
    if s.ndim != 1 or y.shape != s.shape:
        raise InputError("s and y must be two 1-d arrays of the same length")
    if K < 6:
        raise InputError(f"a two-piece fit needs at least 6 sample points, got {K}")
    if not (np.all(np.isfinite(s)) and np.all(np.isfinite(y))) or np.any(np.diff(s) <= 0):
        raise InputError("s must be increasing and s, y finite")
    grid = np.linspace(s[1], s[-2], _GRID)
    rss, _ = _rss(s, y[None, :], grid)
    g = int(np.argmin(rss[:, 0]))
    lo, hi = grid[max(g - 1, 0)], grid[min(g + 1, _GRID - 1)]
    fine = optimize.minimize_scalar(lambda b: _rss(s, y[None, :], np.array([b]))[0][0, 0],
                                    bounds=(lo, hi), method="bounded", options={"xatol": 1e-9})
    sb = float(fine.x) if fine.fun <= rss[g, 0] else float(grid[g])
    rss2, coef = _rss(s, y[None, :], np.array([sb]))
    rss2 = float(rss2[0, 0])
    c, b1, b2 = (float(v) for v in coef[0, 0])
    tss = float(((y - y.mean()) ** 2).sum())
    line = np.polyfit(s, y, 1)
    rss1 = float(((y - np.polyval(line, s)) ** 2).sum())
    dof = K - 4
    if tss <= 0:
        r2 = r2_line = p = math.nan
    else:
        r2, r2_line = 1 - rss2 / tss, 1 - rss1 / tss
        p = 0.0 if rss2 <= 1e-15 * tss else float(stats.f.sf(((rss1 - rss2) / 2) / (rss2 / dof), 2, dof))
    if replicas is not None:
        R = np.asarray(replicas, dtype=float)
        if R.ndim != 2 or R.shape[1] != K:
            raise InputError(f"replicas must be an (R, {K}) array")
        rng = as_generator(seed)
        idx = rng.integers(0, R.shape[0], size=(int(boot), R.shape[0]))
        draws = _best_break(s, R[idx].mean(axis=1))
        se = float(draws.std(ddof=1))
        ci = (float(np.quantile(draws, 0.025)), float(np.quantile(draws, 0.975)))
        method = f"bootstrap over {R.shape[0]} replicas ({int(boot)} resamples)"
    else:
        d = s - sb
        jac = np.column_stack([np.ones(K), np.minimum(d, 0), np.maximum(d, 0), -np.where(d < 0, b1, b2)])
        try:
            cov = np.linalg.inv(jac.T @ jac) * (rss2 / dof)
            se = float(math.sqrt(max(cov[3, 3], 0.0)))
        except np.linalg.LinAlgError:
            se = math.inf
        half = float(stats.t.ppf(0.975, dof)) * se
        ci = (sb - half, sb + half)
        method = "covariance of the least-squares fit"
    fit = BreakFit(sb, c, b1, b2, r2, r2_line, p, se, ci, method)
    _judge(fit, s)
    return fit


def _judge(fit: BreakFit, s: np.ndarray) -> None:
    """Fill in ``poor`` and the plain-language notes."""
    notes = []
    if not math.isfinite(fit.r2):
        notes.append("the energy does not change at all along the anneal, so there is no break point to find")
    else:
        step = s[1] - s[0]
        if fit.s_break <= s[1] + 0.5 * step:
            notes.append(f"the break point (s = {fit.s_break:.2f}) lies within the first sample intervals, so the "
                         "early slope rests on two or three points; more sample points would place it reliably")
        elif fit.s_break >= s[-2] - 0.5 * step:
            notes.append(f"the break point (s = {fit.s_break:.2f}) lies within the last sample intervals: the energy "
                         "may still be falling at the end of the anneal")
        if fit.p_line > POOR_P:
            notes.append(f"a single straight line fits about as well (approximate F-test p = {fit.p_line:.2g}): "
                         "there is no clear point where progress stops")
        if fit.r2 < POOR_R2:
            notes.append(f"the two-piece line explains only {100 * fit.r2:.0f}% of the variation in energy")
        if fit.ci[1] - fit.ci[0] > POOR_WIDTH or not math.isfinite(fit.se):
            notes.append(f"the break point is poorly determined (95% interval {fit.ci[0]:.2f} to {fit.ci[1]:.2f})")
        if abs(fit.slope_after) > abs(fit.slope_before):
            notes.append("the energy falls faster after the break than before it, so the break is not where "
                         "progress stops")
    fit.poor = bool(notes)
    fit.notes = notes


# ------------------------------------------------------------------ the profile
def spin_changes(snapshots) -> tuple[np.ndarray, np.ndarray]:
    """(median Hamming distance to the previous point, fraction of spins frozen) per point.

    ``snapshots`` is (replicas, points, n) of ±1.  The distance is NaN at the
    first point; a spin is frozen at point k when its value is the same at
    every point from k to the last, so the fraction is 1 at the last point.

    >>> snaps = np.array([[[1, 1], [1, -1], [1, -1]]])
    >>> [x.tolist() for x in spin_changes(snaps)]
    [[nan, 1.0, 0.0], [0.5, 1.0, 1.0]]
    """
    snaps = np.asarray(snapshots)
    if snaps.ndim != 3:
        raise InputError("snapshots must be a (replicas, points, spins) array")
    K = snaps.shape[1]
    changed = snaps[:, 1:, :] != snaps[:, :-1, :]
    hamming = np.full(K, np.nan)
    if K > 1:
        hamming[1:] = np.median(changed.sum(axis=2), axis=0)
    later = np.flip(np.logical_or.accumulate(np.flip(changed, axis=1), axis=1), axis=1)  # a change at j >= k
    frozen = np.ones(K)
    frozen[:-1] = 1.0 - later.mean(axis=(0, 2))
    return hamming, frozen


@dataclasses.dataclass
class Profile:
    """An anneal profile (see the module docstring).

    Arrays have one value per sample point, except ``energies``: the energy of
    every replica at every point, (replicas, points).
    """

    s: np.ndarray
    sweep: np.ndarray
    energies: np.ndarray
    transverse_field: np.ndarray
    mean_energy: np.ndarray
    min_energy: np.ndarray
    sem_energy: np.ndarray
    residual_mean: np.ndarray
    residual_min: np.ndarray
    hamming_median: np.ndarray
    frozen: np.ndarray
    reference: dict
    fit: BreakFit
    settings: dict
    instance: dict
    cautions: list[str]

    COLUMNS = ("point", "sweeps_done", "s", "transverse_field", "mean_energy", "min_energy", "sem_energy",
               "residual_mean", "residual_min", "residual_mean_per_spin", "median_hamming_to_previous",
               "frozen_fraction")

    def rows(self) -> list[dict]:
        """One dict per sample point (columns :attr:`COLUMNS`; NaN where undefined)."""
        n = self.instance["n"]
        return [{"point": k, "sweeps_done": int(self.sweep[k]) + 1, "s": float(self.s[k]),
                 "transverse_field": float(self.transverse_field[k]), "mean_energy": float(self.mean_energy[k]),
                 "min_energy": float(self.min_energy[k]), "sem_energy": float(self.sem_energy[k]),
                 "residual_mean": float(self.residual_mean[k]), "residual_min": float(self.residual_min[k]),
                 "residual_mean_per_spin": float(self.residual_mean[k]) / n,
                 "median_hamming_to_previous": float(self.hamming_median[k]), "frozen_fraction": float(self.frozen[k])}
                for k in range(self.s.size)]

    def late(self, s_from: float = 0.8) -> dict:
        """What still happens from ``s_from`` to the end: the question a quench study asks.

        ``energy_drop`` is the fall of the mean energy from the first point at or
        after ``s_from`` to the end (also per spin), ``most_changed`` the largest
        median number of spins changed between later adjacent points, and
        ``frozen`` the fraction of spins already frozen at that first point.
        """
        k = int(np.searchsorted(self.s, s_from - 1e-12))
        k = min(k, self.s.size - 1)
        drop = float(self.mean_energy[k] - self.mean_energy[-1])
        changed = self.hamming_median[k + 1:]
        return {"s": float(self.s[k]), "energy_drop": drop, "energy_drop_per_spin": drop / self.instance["n"],
                "most_changed": float(changed.max()) if changed.size else 0.0, "frozen": float(self.frozen[k])}

    def to_dict(self) -> dict:
        """Plain JSON-safe data (undefined or infinite numbers become None)."""
        return _json_safe({"format": PROFILE_FORMAT, "format_version": PROFILE_VERSION, "instance": self.instance,
                           "settings": self.settings, "reference": self.reference,
                           "break_point": self.fit.to_dict(), "late_anneal": self.late(), "points": self.rows(),
                           "cautions": list(self.cautions)})


def _json_safe(obj):
    if isinstance(obj, float) and not math.isfinite(obj):
        return None
    if isinstance(obj, dict):
        return {k: _json_safe(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_json_safe(v) for v in obj]
    if isinstance(obj, np.generic):
        return _json_safe(obj.item())
    return obj


def _reference_text(ref) -> str:
    if ref.status in ("proven", "planted") and ref.source.startswith("certificate"):
        return f"certified ground state ({ref.source})"
    if ref.status == "planted":
        return "planted ground state (known by construction)"
    if ref.source.startswith("certificate"):
        return "best known energy from the certificate, not proven to be the ground state"
    return "lowest energy seen in this profile, not a proven ground state (residual energies may be understated)"


def anneal_profile(instance: Instance, points: int = 20, reads: int = 48, sweeps: int = 1000, seed=0, *,
                   transverse: float = 2.0, beta_range=None, scale=None, boot: int = 200) -> Profile:
    """Profile the path-integral anneal of ``instance`` at ``points`` evenly spaced values of s.

    Parameters
    ----------
    instance : Instance
    points : int
        Sample points K (at least 6); the first is after the first sweep, the last at the end.
    reads : int
        Replicas (independent anneals).
    sweeps : int
        Anneal length; rounded up so that the points fall on whole sweeps
        (the value used is in ``settings["sweeps"]``).
    seed : int
    transverse : float
        beta * Gamma at s = 0 (the pimc sampler's ``transverse`` option).
    beta_range, scale : optional
        As for :func:`instgen.scoring.measure`; by default the inverse
        temperature comes from the coupling alphabet stored with the instance.
    boot : int
        Bootstrap resamples for the break point's uncertainty.

    Examples
    --------
    >>> from instgen.make import make_instance
    >>> prof = anneal_profile(make_instance("chimera:1", "pm1", seed=1), points=6, reads=4, sweeps=50, seed=2)
    >>> prof.s.size, prof.settings["sweeps"], float(prof.frozen[-1])
    (6, 51, 1.0)
    """
    from ..samplers import Schedule
    from ..samplers.pimc import anneal_snapshots
    from ..scoring import MAX_BYTES, check_effort, resolve_reference, schedule_range
    from ..seeds import derive_seed
    from ..library.entry import energy_tolerance

    if not isinstance(instance, Instance):
        raise InputError(f"expected an Instance, got {type(instance).__name__}")
    for name, v, low in (("points", points, 6), ("reads", reads, 2), ("sweeps", sweeps, 1)):
        if isinstance(v, bool) or not isinstance(v, (int, np.integer)) or v < low:
            raise InputError(f"{name} must be a whole number of at least {low}, got {v!r}")
    if sweeps < points:
        raise InputError(f"the anneal needs at least as many sweeps as sample points ({points}), got {sweeps}")
    check_effort(instance.n, int(reads), [int(sweeps)])
    if float(reads) * points * instance.n > MAX_BYTES:
        raise ResourceError(f"keeping {reads:,} replicas of {instance.n:,} spins at {points:,} points needs about "
                            f"{reads * points * instance.n / 1e9:.3g} GB; instgen refuses above {MAX_BYTES / 1e9:g} GB")
    every = -(-(int(sweeps) - 1) // (int(points) - 1))
    total = every * (int(points) - 1) + 1
    br, scale, beta_source = schedule_range(instance, beta_range, scale)
    sched = Schedule(sweeps=total, beta_range=br)
    batch, snaps, at = anneal_snapshots(instance, sched, every, reads=int(reads), seed=seed, transverse=transverse)
    R, K, n = snaps.shape
    E = instance.energies(snaps.reshape(R * K, n)).reshape(R, K)
    tol = energy_tolerance(instance)
    claimed = resolve_reference(instance, math.inf, tol=tol)
    ref = resolve_reference(instance, float(E.min()), tol=tol)
    hamming, frozen = spin_changes(snaps)
    s = sched.s_path()[at]
    fit = fit_break(s, E.mean(axis=0), replicas=E, boot=boot, seed=derive_seed(seed, "profile-bootstrap"))
    ref_source = ref.source if claimed.energy == ref.energy else "lowest energy seen in this profile"
    reference = {"energy": ref.energy, "status": ref.status, "source": ref_source, "text": _reference_text(ref)}
    cautions = []
    if math.isfinite(claimed.energy) and ref.energy < claimed.energy - tol:
        cautions.append(f"A replica reached energy {ref.energy:g}, below the {claimed.source} ({claimed.energy:g}): "
                        "that energy is not the ground state; residual energies use the lower one.")
    if ref.status not in ("proven", "planted"):
        cautions.append(f"Residual energies are measured against the {reference['text']}.")
    if fit.poor:
        cautions.append("The two-piece fit is poor, so the break point is not a reliable estimate of where "
                        "progress stops: " + "; ".join(fit.notes) + ".")
    if R < 20:
        cautions.append(f"Only {R} replicas: the mean energies and the bootstrap interval are rough.")
    cautions.append("This profile is from a classical path-integral surrogate at fixed temperature, not from "
                    "a quantum processor; read it as a preview of where the energy stops falling.")
    settings = {"sampler": "pimc", "points": K, "reads": R, "sweeps": total, "sweeps_between_points": every,
                "transverse": float(transverse), "temperature_beta": br[1], "beta_range_source": beta_source,
                "seed": seed, "sampler_seed": batch.seed, "bootstrap": int(boot)}
    return Profile(
        s=s, sweep=at, energies=E, transverse_field=np.asarray(batch.schedule["transverse_field"])[at],
        mean_energy=E.mean(axis=0), min_energy=E.min(axis=0), sem_energy=E.std(axis=0, ddof=1) / math.sqrt(R),
        residual_mean=E.mean(axis=0) - ref.energy, residual_min=E.min(axis=0) - ref.energy,
        hamming_median=hamming, frozen=frozen, reference=reference, fit=fit, settings=settings,
        instance={"graph": instance.graph, "n": instance.n, "m": instance.m,
                  "name": str(instance.metadata.get("name", ""))}, cautions=cautions)


def write_profile(profile: Profile, folder, stem: str = "profile") -> dict[str, Path]:
    """Write ``STEM.csv``, ``STEM.json`` and ``STEM.png`` into ``folder``; returns their paths."""
    from .plots import profile_figure, save_figure

    folder = Path(folder)
    if folder.exists() and not folder.is_dir():
        raise InputError(f"{folder} is a file, not a folder to write the profile into")
    buf = io.StringIO()
    writer = csv.DictWriter(buf, fieldnames=Profile.COLUMNS, lineterminator="\n")
    writer.writeheader()
    for r in profile.rows():
        writer.writerow({k: ("" if isinstance(v, float) and math.isnan(v) else v) for k, v in r.items()})
    paths = {"csv": atomic_write(folder / f"{stem}.csv", buf.getvalue()),
             "json": atomic_write(folder / f"{stem}.json", json.dumps(profile.to_dict(), indent=1))}
    paths["png"] = save_figure(profile_figure(profile), folder / f"{stem}.png")
    return paths
