"""The HTML report: the tables hold the numbers in summary.json and the library, the cautions
come first, the plots are embedded PNGs, and it renders in headless Chromium.

Screenshots go to outputs/test-artifacts/report/.
"""

from __future__ import annotations

import base64
import html.parser
import io
import json
import shutil
import subprocess
import tempfile
from pathlib import Path

import matplotlib.image as mimage
import pytest

from instgen.cli import main
from instgen.errors import FormatError, InputError
from instgen.library import Library
from instgen.report.html import write_report

from runcase import make_library, make_run

ARTIFACTS = Path(__file__).resolve().parents[2] / "outputs" / "test-artifacts" / "report"


class Page(html.parser.HTMLParser):
    """Tables (class, rows of (text, attributes)), images, headings and the cautions, read with the stdlib parser."""

    def __init__(self, text: str):
        super().__init__()
        self.tables, self.images, self.headings, self.cautions, self.body = [], [], [], [], {}
        self._cell = self._heading = self._item = None
        self._in_cautions = False
        self.order = []
        self.feed(text)

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if tag == "body":
            self.body = a
        elif tag == "table":
            self.tables.append((a.get("class", ""), []))
        elif tag == "tr" and self.tables:
            self.tables[-1][1].append([])
        elif tag in ("td", "th"):
            self._cell = ["", a]
        elif tag == "img":
            self.images.append(a)
        elif tag in ("h1", "h2"):
            self._heading = ""
        elif tag == "section" and a.get("class") == "cautions":
            self._in_cautions = True
            self.order.append("cautions")
        elif tag == "li" and self._in_cautions:
            self._item = ""

    def handle_endtag(self, tag):
        if tag in ("td", "th") and self._cell is not None:
            self.tables[-1][1][-1].append((self._cell[0].strip(), self._cell[1]))
            self._cell = None
        elif tag in ("h1", "h2") and self._heading is not None:
            self.headings.append(self._heading.strip())
            self.order.append(self._heading.strip())
            self._heading = None
        elif tag == "li" and self._item is not None:
            self.cautions.append(self._item.strip())
            self._item = None
        elif tag == "section":
            self._in_cautions = False

    def handle_data(self, data):
        if self._cell is not None:
            self._cell[0] += data
        if self._heading is not None:
            self._heading += data
        if self._item is not None:
            self._item += data

    def table(self, cls: str) -> list[dict]:
        """Rows of the table with this class as {column head: (text, attributes)}."""
        rows = next(r for c, r in self.tables if c == cls)
        head = [text for text, _ in rows[0]]
        return [dict(zip(head, r)) for r in rows[1:]]


def exact(cell) -> float:
    return float(cell[1]["data-value"])


@pytest.fixture(scope="module")
def run_report(tmp_path_factory):
    folder = tmp_path_factory.mktemp("run")
    summary = make_run(folder)
    path = write_report(folder, reads=12, profiles=1, profile_reads=8, profile_sweeps=60, seed=3)
    return folder, summary, path


@pytest.fixture(scope="module")
def library_report(tmp_path_factory):
    folder = tmp_path_factory.mktemp("lib") / "chip-suite"
    ids = make_library(folder)
    return folder, ids, write_report(folder)


# ------------------------------------------------------------------ run report
def test_winner_table_holds_the_summary_numbers(run_report):
    folder, summary, path = run_report
    page = Page(path.read_text())
    rows = page.table("winners")
    assert len(rows) == len(summary["winners"])
    for row, w in zip(rows, summary["winners"]):
        cert = w["certificate"]
        assert row["file"][0] == w["file"]
        assert exact(row["ground-state energy"]) == cert["energy"]
        assert row["ground-state energy"][0] == format(cert["energy"], ".10g")
        assert exact(row["spins"]) == w["n"] and exact(row["couplers"]) == w["m"]
        assert ("not proven" in row["how it is known"][0]) == (cert["status"] == "not proven")
        assert "confirmed TTS99 (sweeps)" not in row  # search-grid ranking keys stay in summary.json
        for solver in summary["run"]["solvers"]:
            score = next(s for s in w["scores"] if s["metric"] == "tts" and s["solver"] == solver)
            cell = row[f"tts on {solver} (sweeps)"]
            assert exact(cell) == score["value"]
            assert cell[1]["data-kind"] == score["kind"]
            assert cell[0].startswith({"upper bound": "≤ ", "lower bound": "≥ "}.get(score["kind"], "")
                                      + format(score["value"], ".4g"))
            if score["kind"] != "lower bound":  # TTS99 is shown with the sweep count it was found at
                assert f"at {score['extra']['best_sweeps']}" in cell[0]


def test_comparison_and_baseline_tables(run_report):
    folder, summary, path = run_report
    page = Page(path.read_text())
    for row, ref in zip(page.table("comparison"), summary["comparison"]):
        assert row["metric"][0] == ref["metric"] and row["solver"][0] == ref["solver"]
        assert exact(row["winners median"]) == ref["winners_median"]
        assert exact(row["baseline median"]) == ref["baseline_median"]
        assert row["winners are"][0] == ref["verdict"]
        if ref["ratio"] is not None:
            assert row["ratio (winners / baseline)"][0].lstrip("≥≤ ") == format(ref["ratio"], ".3g")
    base = page.table("baseline")
    assert [exact(r["ground-state energy"]) for r in base] == [
        e["certificate"]["energy"] for e in summary["baseline"]["instances"]]
    settings = {r["setting"][0]: r["value"][0] for r in page.table("settings")}
    assert all(v.strip() not in ("", "–") for v in settings.values())  # settings that are not set are not shown
    assert "search_solvers" not in settings and all("_" not in k for k in settings)  # no raw keys
    assert settings["graph"] == summary["run"]["graph"] and settings["run seed"] == str(summary["run"]["seed"])


def test_cautions_come_first_and_all_of_them(run_report):
    folder, summary, path = run_report
    page = Page(path.read_text())
    assert page.order[1] == "cautions"  # right under the title
    for c in summary["cautions"]:
        assert c in page.cautions
    assert any("an optimum that is not proven" in c for c in page.cautions)
    assert any("measured on sa, tabu only" in c for c in page.cautions)
    # in this small run the winners are not clearly harder than random: the report must say so
    rows = [r for r in summary["comparison"] if r["verdict"] != "harder"]
    assert rows and all(any(c.startswith(f"{r['metric']} on {r['solver']}, winners against random") and
                            r["verdict"] in c for c in page.cautions) for r in rows)


def test_ratio_interval_against_known_ratios():
    # Reference: for two log-normal groups the ratio of medians is exp(difference of log-medians);
    # here 1 (same distribution) and 10 (shifted by ln 10).
    import numpy as np

    from instgen.compare import ratio_interval

    rng = np.random.default_rng(4)
    base = rng.lognormal(3.0, 0.3, 40)
    same = ratio_interval(rng.lognormal(3.0, 0.3, 40), base, seed=1)
    tenfold = ratio_interval(rng.lognormal(3.0 + np.log(10), 0.3, 40), base, seed=1)
    assert same[0] < 1 < same[1]
    assert tenfold[0] < 10 < tenfold[1] and tenfold[0] > 1
    assert ratio_interval([5.0], base, seed=1) is None  # one instance: no interval


def test_plots_are_embedded_pngs_and_saved(run_report):
    folder, summary, path = run_report
    page = Page(path.read_text())
    saved = {p.read_bytes() for p in (folder / "plots").glob("*.png")}
    assert {p.name for p in (folder / "plots").glob("*.png")} == {"baseline.png", "fitness.png", "sweeps.png",
                                                                  "profile-01.png"}
    assert len(page.images) == 4
    for img in page.images:
        head, data = img["src"].split(",", 1)
        assert head == "data:image/png;base64" and img["alt"]
        png = base64.b64decode(data)
        assert png in saved
        assert mimage.imread(io.BytesIO(png), format="png").shape[0] > 200  # matplotlib decodes it
    assert (folder / "plots" / "profile-01.csv").is_file()


@pytest.mark.slow
def test_same_seed_same_report(run_report, tmp_path):
    folder, summary, path = run_report
    copy = tmp_path / "again"
    shutil.copytree(folder, copy, ignore=shutil.ignore_patterns("plots", "report.html"))
    again = write_report(copy, reads=12, profiles=1, profile_reads=8, profile_sweeps=60, seed=3)
    strip = lambda text: text.split("<footer>")[0].replace(str(copy), str(folder))
    assert strip(again.read_text()) == strip(path.read_text())


def test_run_without_stored_tts_grid_measures_it(tmp_path):
    # A run bred for the anneal gain stores no TTS per sweep count; the report measures it
    # afresh (instgen.scoring) and says so.
    summary = make_run(tmp_path, winners=2, baseline=2, generations=3, metric="anneal-gain")
    page = Page(write_report(tmp_path, reads=8, profiles=0, seed=1).read_text())
    assert len(page.images) == 3  # winners vs random, fitness, TTS and residual against sweeps
    assert any("measured afresh" in c for c in page.cautions)
    rows = page.table("winners")
    for row, w in zip(rows, summary["winners"]):
        gain = next(s for s in w["scores"] if s["metric"] == "anneal-gain" and s["solver"] == "sa")
        assert exact(row["anneal-gain on sa (energy per spin / coupling scale)"]) == gain["value"]


# ------------------------------------------------------------------ library report
def test_library_report_lists_every_entry(library_report):
    folder, ids, path = library_report
    page = Page(path.read_text())
    rows = page.table("entries")
    with Library.open(folder) as lib:
        entries = {e.id: e for e in lib.list()}
    assert sorted(r["id"][0] for r in rows) == sorted(ids)
    for r in rows:
        e = entries[r["id"][0]]
        assert exact(r["ground-state energy"]) == e.certificate.energy
        assert exact(r["spins"]) == e.n
    hardness = page.table("hardness")  # the measurements, in their own table so both fit the page
    assert sorted(r["id"][0] for r in hardness) == sorted(ids)
    for r in hardness:
        assert exact(r["tts on sa (sweeps)"]) == entries[r["id"][0]].latest("tts", "sa").value
    assert any("3 of 5 entries have an optimum that is not proven" in c for c in page.cautions)
    assert page.headings[0] == "Benchmark library “chip-suite”"
    assert (folder / "plots" / "hardness-vs-size.png").is_file()
    with Library.open(folder) as lib:  # writing the report left the library sound
        assert lib.verify().ok


# ------------------------------------------------------------------ bad input
def test_neither_run_nor_library_is_refused(tmp_path, capsys):
    with pytest.raises(InputError, match="neither a run folder"):
        write_report(tmp_path)
    assert main(["report", str(tmp_path / "missing")]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "not a folder" in err
    (tmp_path / "log.jsonl").write_text("")
    with pytest.raises(InputError, match="has not finished"):
        write_report(tmp_path)


def test_damaged_or_newer_summary_is_refused(tmp_path, capsys):
    (tmp_path / "summary.json").write_text('{"format": "instgen-run-summary", "run": ')
    assert main(["report", str(tmp_path)]) == 2
    err = capsys.readouterr().err
    assert "not valid JSON" in err and err.count("\n") == 1
    (tmp_path / "summary.json").write_text(json.dumps({"format": "instgen-run-summary", "format_version": 99}))
    with pytest.raises(FormatError, match="upgrade instgen"):
        write_report(tmp_path)


# ------------------------------------------------------------------ in a browser
def _chromium(*args, timeout=90) -> subprocess.CompletedProcess:
    exe = shutil.which("chromium") or shutil.which("chromium-browser")
    assert exe, "headless Chromium is needed for this test (.ci/run installs Debian's chromium)"
    with tempfile.TemporaryDirectory() as profile:
        return subprocess.run(
            [exe, "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
             "--disable-background-networking", "--disable-component-update", "--disable-sync",
             f"--user-data-dir={profile}", *args], capture_output=True, text=True, timeout=timeout)


@pytest.mark.slow
@pytest.mark.browser
@pytest.mark.parametrize("which", ["run", "library"])
def test_report_renders_in_chromium(which, run_report, library_report):
    folder, path = (run_report[0], run_report[2]) if which == "run" else (library_report[0], library_report[2])
    dom = _chromium("--window-size=1280,2000", "--dump-dom", path.as_uri())
    assert dom.returncode == 0, dom.stderr[-2000:]
    page = Page(dom.stdout)
    shown = page.body.get("data-images-shown")  # set by the page's script once every image has loaded
    assert shown == f"{len(page.images)}/{len(page.images)}" and len(page.images) >= 1
    # every table fits the page's column in a 1280-pixel window, no sideways scrolling (the script measures)
    widest, column = map(int, page.body.get("data-widest-table").split("/"))
    assert 0 < widest <= column, f"a table is {widest} px wide in a {column} px column"
    assert 'class="broken"' not in dom.stdout  # the script marks an image that failed to load
    if which == "run":
        summary = run_report[1]
        rows = page.table("winners")
        assert [exact(r["ground-state energy"]) for r in rows] == [w["certificate"]["energy"]
                                                                    for w in summary["winners"]]
    else:
        assert sorted(r["id"][0] for r in page.table("entries")) == sorted(library_report[1])
    ARTIFACTS.mkdir(parents=True, exist_ok=True)
    shot = ARTIFACTS / f"report-{which}.png"
    shot.unlink(missing_ok=True)
    res = _chromium(f"--screenshot={shot}", "--window-size=1280,2000", path.as_uri())
    assert res.returncode == 0 and shot.is_file()
    img = mimage.imread(shot)
    assert img.shape[:2] == (2000, 1280) and img[..., :3].std() > 0.05


@pytest.mark.parametrize("which", ["run", "library"])
def test_a_report_carries_no_absolute_path_of_this_machine(which, run_report, library_report):
    # a report is mailed and archived: the user's own folders stay out of it (common practice for shared files)
    folder, path = (run_report[0], run_report[2]) if which == "run" else (library_report[0], library_report[2])
    text = path.read_text()
    assert str(folder.resolve()) not in text and str(folder) not in text and str(folder.parent) not in text
