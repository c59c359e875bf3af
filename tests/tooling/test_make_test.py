"""`make test` on a fresh machine: the browser tests' Chromium comes with it.

Checked with GNU make's own dry run (`make -n`, GNU make manual: "print the
recipe that would be executed, but do not execute it") and by running the
install script with nothing on its PATH, as on a machine without apt-get.
"""

import shutil
import subprocess
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]


def _recipe(target: str) -> list[str]:
    # -n: GNU make prints the commands it would run, in order (GNU make manual, "Instead of Executing Recipes");
    res = subprocess.run(["make", "-n", "-C", str(ROOT), target], capture_output=True, text=True, timeout=60)
    assert res.returncode == 0, res.stderr
    return [line.strip() for line in res.stdout.splitlines()]


def test_make_test_installs_chromium_before_pytest():
    for target in ("test", "test-fast"):
        lines = _recipe(target)
        browser = [i for i, line in enumerate(lines) if ".ci/browser" in line]
        pytest_ = [i for i, line in enumerate(lines) if "-m pytest" in line]
        assert browser and pytest_ and browser[0] < pytest_[0], lines


def test_ci_run_leaves_the_install_to_make_test():
    script = (ROOT / ".ci" / "run").read_text()
    assert "make test" in script and "apt-get" not in script


def test_browser_script_without_chromium_or_apt_get_says_so_and_lets_the_tests_run(tmp_path):
    # an empty PATH: `command -v` (a bash builtin) finds neither chromium nor apt-get
    res = subprocess.run([shutil.which("bash"), str(ROOT / ".ci" / "browser")], capture_output=True, text=True,
                         env={"PATH": str(tmp_path)}, timeout=60)
    assert res.returncode == 0
    lines = res.stderr.strip().splitlines()
    assert len(lines) == 1 and "apt-get is not available" in lines[0] and "browser tests" in lines[0]

