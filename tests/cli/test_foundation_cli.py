import json
import subprocess
import sys

import pytest

from instgen.cli import main
from instgen.testing.cli import run_cli


run = run_cli


def test_make_then_info(tmp_path, capsys):
    f = tmp_path / "x.json"
    code, out, err = run(["make", "chimera:4", "--couplings", "pm1", "--seed", "1", "--out", str(f)], capsys)
    assert code == 0 and "128 spins" in out
    code, out, err = run(["info", str(f), "--json"], capsys)
    d = json.loads(out)
    assert code == 0 and d["n"] == 128 and d["m"] == 352 and d["planted"] is False
    code, out, _ = run(["info", str(f)], capsys)
    assert "optimum     unknown (run `instgen certify`" in out


def test_graph_summary_and_list(capsys):
    code, out, _ = run(["graph", "pegasus:6", "--json"], capsys)
    d = json.loads(out)
    assert (d["n"], d["m"]) == (680, 4484)
    code, out, _ = run(["graph", "--list"], capsys)
    assert "zephyr:M[,T]" in out and "heavy-hex" in out


@pytest.mark.parametrize("argv,needle", [
    (["make", "foo:3", "--out", "{tmp}/y.json"], "unknown graph family"),
    (["make", "chimera:2", "--couplings", "int:5", "--range", "1", "--out", "{tmp}/y.json"], "range"),
    (["info", "{tmp}/missing.json"], "no such file"),
    (["info", "{tmp}"], "folder"),
    (["graph", "chimera:-2"], "chimera"),
    (["make", "chimera:2", "--seed", "-3", "--out", "{tmp}/y.json"], "seed"),
])
def test_bad_input_is_one_line_and_exit_2(tmp_path, capsys, argv, needle):
    argv = [a.replace("{tmp}", str(tmp_path)) for a in argv]
    code, out, err = run(argv, capsys)
    assert code == 2
    assert err.count("\n") == 1 and needle in err and "Traceback" not in err
    assert not (tmp_path / "y.json").exists()


def test_module_entry_point_and_help():
    r = subprocess.run([sys.executable, "-m", "instgen", "make", "--help"], capture_output=True, text=True)
    assert r.returncode == 0 and "--couplings" in r.stdout


def test_argparse_errors_exit_2(capsys):
    with pytest.raises(SystemExit) as exc:
        main(["make"])
    assert exc.value.code == 2
    assert capsys.readouterr().err.count("\n") == 1
