"""Anneal profiles and the two-piece fit, checked against scipy, dimod and simulated annealing."""

from __future__ import annotations

import csv
import json

import numpy as np
import pytest
from scipy import optimize, stats

from instgen.cli import main
from instgen.errors import InputError
from instgen.io import save_instance
from instgen.make import make_instance
from instgen.records import Certificate
from instgen.report.profile import anneal_profile, fit_break, spin_changes, write_profile
from instgen.samplers import Schedule, get_sampler
from instgen.samplers.pimc import PathIntegral, anneal_snapshots


def hinge(s, c, b1, b2, sb):
    d = s - sb
    return c + b1 * np.minimum(d, 0) + b2 * np.maximum(d, 0)


# ------------------------------------------------------------ the two-piece fit
def test_fit_recovers_known_break_like_scipy_reference():
    # Reference: scipy.optimize.curve_fit on the same hinge model, started near the truth.
    rng = np.random.default_rng(3)
    s = np.linspace(0.02, 1.0, 30)
    truth = (-40.0, -60.0, -3.0, 0.45)
    y = hinge(s, *truth) + rng.normal(0, 0.6, s.size)
    ours = fit_break(s, y)
    ref, cov = optimize.curve_fit(hinge, s, y, p0=(-35, -50, -1, 0.5))
    assert abs(ours.s_break - truth[3]) < 0.02
    assert abs(ours.s_break - ref[3]) < 2e-3
    assert ours.slope_before == pytest.approx(ref[1], rel=0.02)
    assert ours.slope_after == pytest.approx(ref[2], rel=0.05, abs=0.2)
    # the covariance-based uncertainty matches curve_fit's (same model, same residual variance)
    assert ours.se == pytest.approx(np.sqrt(cov[3, 3]), rel=0.2)
    assert ours.ci[0] < truth[3] < ours.ci[1]
    assert not ours.poor and ours.notes == []


def test_bootstrap_over_replicas_agrees_with_fit_covariance():
    # Reference: curve_fit on the mean curve with the standard errors as sigma gives the
    # break point's standard error from the covariance; the bootstrap over replicas
    # should give the same size of uncertainty (within a factor of two).
    rng = np.random.default_rng(8)
    s = np.linspace(0.05, 1.0, 20)
    truth = (-30.0, -50.0, -2.0, 0.6)
    reps = hinge(s, *truth)[None, :] + rng.normal(0, 4.0, (60, s.size))
    fit = fit_break(s, reps.mean(axis=0), replicas=reps, boot=300, seed=1)
    sem = reps.std(axis=0, ddof=1) / np.sqrt(reps.shape[0])
    _, cov = optimize.curve_fit(hinge, s, reps.mean(axis=0), p0=(-25, -40, -1, 0.5), sigma=sem, absolute_sigma=True)
    ratio = fit.se / np.sqrt(cov[3, 3])
    assert 0.5 < ratio < 2.0
    assert fit.ci[0] < truth[3] < fit.ci[1]
    assert "bootstrap" in fit.method


def test_poor_fits_are_called_poor():
    rng = np.random.default_rng(5)
    s = np.linspace(0.05, 1.0, 20)
    line = fit_break(s, -10 * s + rng.normal(0, 0.5, s.size))
    assert line.poor and any("straight line" in n for n in line.notes)
    # scipy's linear regression explains the data about as well as our two-piece line does
    assert line.r2 - stats.linregress(s, -10 * s).rvalue ** 2 < 0.05
    flat = fit_break(s, np.full(s.size, -3.0))
    assert flat.poor and "does not change" in flat.notes[0]
    late = fit_break(s, hinge(s, -20, -30, -1, 0.97) + rng.normal(0, 0.05, s.size))
    assert late.poor and any("still be falling" in n for n in late.notes)


def test_fit_refuses_too_few_points():
    with pytest.raises(InputError, match="at least 6"):
        fit_break([0.1, 0.2, 0.3], [1.0, 0.5, 0.4])


# ------------------------------------------------------------ spins changing
def test_spin_changes_match_direct_counting():
    rng = np.random.default_rng(2)
    snaps = np.where(rng.random((7, 9, 12)) < 0.8, 1, -1).astype(np.int8)
    snaps[:, 5:, :3] = 1  # some spins settle early
    hamming, frozen = spin_changes(snaps)
    R, K, n = snaps.shape
    for k in range(1, K):
        assert hamming[k] == np.median([np.sum(snaps[r, k] != snaps[r, k - 1]) for r in range(R)])
    for k in range(K):
        still = [all(snaps[r, j, i] == snaps[r, -1, i] for j in range(k, K)) for r in range(R) for i in range(n)]
        assert frozen[k] == pytest.approx(np.mean(still))
    assert np.isnan(hamming[0]) and frozen[-1] == 1.0


def test_recording_states_does_not_change_the_anneal():
    # Reference: the pimc sampler's own run with the same seed (no states recorded).
    inst = make_instance("chimera:1", "pm1", seed=4)
    sched = Schedule(sweeps=61)
    batch, snaps, at = anneal_snapshots(inst, sched, every=10, reads=5, seed=9)
    plain = PathIntegral().run(inst, sched, reads=5, seed=9)
    assert np.array_equal(batch.states, plain.states)
    assert np.array_equal(snaps[:, -1, :], plain.states)
    assert at.tolist() == [0, 10, 20, 30, 40, 50, 60]
    with pytest.raises(InputError):
        anneal_snapshots(inst, sched, every=0)


# ------------------------------------------------------------ the profile
def test_profile_residual_is_measured_against_the_exact_ground_state():
    import dimod

    inst = make_instance("chimera:1", "pm1", seed=6)
    exact = dimod.ExactSolver().sample(inst.to_bqm()).first.energy  # reference: dimod's brute force
    batch = get_sampler("exact").run(inst, None, reads=1, seed=0)
    k = int(np.argmin(batch.energies))
    cert = Certificate(float(batch.energies[k]), batch.states[k], "exhaustive enumeration", "proven")
    inst = inst.replace(metadata={**inst.metadata, "certificate": cert.to_dict()})
    prof = anneal_profile(inst, points=8, reads=12, sweeps=120, seed=3)
    assert prof.reference["energy"] == pytest.approx(exact)
    assert prof.reference["status"] == "proven" and prof.reference["text"].startswith("certified")
    assert np.all(prof.residual_min >= -1e-9)
    assert prof.residual_mean == pytest.approx(prof.energies.mean(axis=0) - exact)
    assert not any("NOT" in c for c in prof.cautions)
    late = prof.late(0.5)  # from the first point at or after s = 0.5 to the end
    k = int(np.argmax(prof.s >= 0.5))
    assert late["s"] == prof.s[k] and late["frozen"] == prof.frozen[k]
    assert late["energy_drop"] == pytest.approx(prof.energies[:, k].mean() - prof.energies[:, -1].mean())


def test_profile_without_a_known_optimum_says_so():
    inst = make_instance("chimera:1", "pm1", seed=7)
    prof = anneal_profile(inst, points=6, reads=8, sweeps=60, seed=1)
    assert prof.reference["status"] == "not proven"
    assert prof.reference["energy"] == prof.energies.min()
    assert any("not a proven ground state" in c for c in prof.cautions)


def test_profile_same_seed_same_result():
    inst = make_instance("chimera:1", "pm1", seed=8)
    a = anneal_profile(inst, points=6, reads=6, sweeps=50, seed=11)
    b = anneal_profile(inst, points=6, reads=6, sweeps=50, seed=11)
    c = anneal_profile(inst, points=6, reads=6, sweeps=50, seed=12)
    assert a.to_dict() == b.to_dict()
    assert not np.array_equal(a.energies, c.energies) or a.fit.ci != c.fit.ci


@pytest.mark.slow
def test_tiny_transverse_field_profile_matches_simulated_annealing():
    # With beta*Gamma ~ 0 the path-integral anneal is classical annealing with beta rising
    # linearly to beta_cold; simulated annealing on the same betas must give the same
    # final-energy distribution.  Two-sided Mann-Whitney U test (scipy.stats) at
    # significance 0.001; a control at a colder final beta must be rejected at that level,
    # so the test has the power to see a difference of that size.
    inst = make_instance("chimera:2", "pm1", seed=11)
    beta, reads = 1.0, 300
    prof = anneal_profile(inst, points=6, reads=reads, sweeps=201, seed=5, transverse=1e-6,
                          beta_range=(beta / 201, beta), boot=20)
    sweeps = prof.settings["sweeps"]
    final = prof.energies[:, -1]
    sa = get_sampler("sa")
    same = sa.run(inst, Schedule(sweeps=sweeps, beta_range=(beta / sweeps, beta), interpolation="linear"),
                  reads=reads, seed=5, order="random").energies
    colder = sa.run(inst, Schedule(sweeps=sweeps, beta_range=(beta / sweeps, 1.5), interpolation="linear"),
                    reads=reads, seed=5, order="random").energies
    assert stats.mannwhitneyu(final, same).pvalue > 0.001
    assert stats.mannwhitneyu(final, colder).pvalue < 0.001


# ------------------------------------------------------------ files and command line
def test_profile_files_and_command_line(tmp_path, capsys):
    inst = make_instance("chimera:1", "pm1", seed=9)
    path = save_instance(inst, tmp_path / "chip.json")
    assert main([ "profile", str(path), "--points", "6", "--reads", "4", "--sweeps", "30", "--seed", "2",
                 "--json"]) == 0
    printed = json.loads(capsys.readouterr().out)
    with open(tmp_path / "chip-profile.csv") as fh:
        rows = list(csv.DictReader(fh))
    saved = json.loads((tmp_path / "chip-profile.json").read_text())
    assert len(rows) == 6 == len(saved["points"])
    for row, point in zip(rows, saved["points"]):
        assert float(row["mean_energy"]) == point["mean_energy"]
        assert float(row["frozen_fraction"]) == point["frozen_fraction"]
    assert printed["break_point"] == saved["break_point"]
    png = (tmp_path / "chip-profile.png").read_bytes()
    assert png[:8] == b"\x89PNG\r\n\x1a\n"


@pytest.mark.parametrize("argv, words", [
    (["--points", "3"], "at least 6"),
    (["--sweeps", "4"], "at least as many sweeps"),
    (["--transverse", "-1"], "transverse"),
])
def test_profile_bad_input_is_one_line_exit_2(tmp_path, capsys, argv, words):
    path = save_instance(make_instance("chimera:1", "pm1", seed=1), tmp_path / "a.json")
    assert main(["profile", str(path)] + argv) == 2
    err = capsys.readouterr().err
    assert words in err and err.count("\n") == 1 and "Traceback" not in err


def test_profile_into_a_file_path_is_refused(tmp_path):
    inst = make_instance("chimera:1", "pm1", seed=1)
    prof = anneal_profile(inst, points=6, reads=3, sweeps=30, seed=1, boot=10)
    (tmp_path / "taken").write_text("x")
    with pytest.raises(InputError, match="is a file"):
        write_profile(prof, tmp_path / "taken")
