import pytest

from instgen.errors import ConfigError
from instgen.preset import load_preset, override, to_toml, validate
import tomllib
from pathlib import Path

PRESETS = sorted(Path(__file__).resolve().parents[2].joinpath("presets").glob("*.toml"))


@pytest.mark.parametrize("path", PRESETS, ids=[p.stem for p in PRESETS])
def test_shipped_presets_are_valid_and_round_trip(path):
    cfg = load_preset(path)
    assert validate(tomllib.loads(to_toml(cfg))) == cfg


@pytest.mark.parametrize("raw,needle", [
    ({"serach": {}}, "unknown table [serach]"),
    ({"search": {"popsize": 3}}, "unknown key 'popsize'"),
    ({"search": {"population": "ten"}}, "must be a whole number"),
    ({"search": {"population": -4}}, "population"),
    ({"search": {"population": 4, "elites": 4}}, "elites"),
    ({"fitness": {"sweeps": []}}, "sweeps"),
    ({"fitness": {"sweeps": [10, -1]}}, "sweeps"),
    ({"fitness": {"metric": "hardness"}}, "unknown metric"),
    ({"fitness": {"metric": "composite"}}, "needs weights"),
    ({"fitness": {"metric": "composite", "weights": {"tts": 1, "fun": 2}}}, "unknown metric 'fun'"),
    ({"fitness": {"sampler": "magic"}}, "unknown sampler"),
    ({"fitness": {"reference": "oracle"}}, "reference"),
    ({"fitness": {"short_sweeps": 100, "long_sweeps": 10}}, "short_sweeps"),
    ({"fitness": {"beta_range": [0.1]}}, "beta_range"),
    ({"fitness": {"noise_sigma": float("nan")}}, "finite"),
    ({"graph": {"spec": "moebius:3"}}, "unknown graph family"),
    ({"couplings": {"alphabet": "int:3", "range": 1}}, "range"),
    ({"couplings": {"alphabet": "pm1", "precision": 0}}, "precision"),
    ({"search": {"operators": {"teleport": 1.0}}}, "unknown operator"),
    ({"search": {"operators": {"uniform": 1.0}}}, "at least one mutation"),
    ({"search": {"operators": {"field-resample": 1.0}}}, "needs fields"),
    ({"run": {"format_version": 99}}, "newer"),
    ({"run": {"seed": True}}, "seed"),
])
def test_bad_presets_name_the_key(raw, needle):
    with pytest.raises(ConfigError) as exc:
        validate(raw)
    assert needle in str(exc.value)


def test_overrides_parse_toml_values():
    cfg = validate({})
    cfg = override(cfg, ["search.generations=5", "graph.spec=chimera:1", "fitness.sweeps=[5, 50]"])
    assert cfg["search"]["generations"] == 5 and cfg["graph"]["spec"] == "chimera:1"
    assert cfg["fitness"]["sweeps"] == [5, 50]
    with pytest.raises(ConfigError, match="table.key=value"):
        override(cfg, ["generations=5"])


def test_missing_and_broken_files(tmp_path):
    with pytest.raises(ConfigError, match="no such preset"):
        load_preset(tmp_path / "nope.toml")
    bad = tmp_path / "bad.toml"
    bad.write_text("[search\npopulation = 3")
    with pytest.raises(ConfigError, match="not valid TOML"):
        load_preset(bad)


def test_precision_and_range_may_be_written_as_fractions_in_a_preset():
    # TOML has no fractions (toml.io spec: numbers are integers or floats), so "1/3" is a string the preset
    # reads as the float nearest to 1/3, the same value Python's 1 / 3 gives
    text = ('[couplings]\nalphabet = "levels:-1,-2/3,-1/3,1/3,2/3,1"\nrange = "1"\nprecision = "1/3"\n')
    cfg = validate(tomllib.loads(text))
    assert cfg["couplings"]["precision"] == 1 / 3 and cfg["couplings"]["range"] == 1.0
    typed = validate(tomllib.loads(text.replace('"1/3"', "0.3333333333333333").replace('"1"', "1.0")))
    assert typed == cfg
    with pytest.raises(ConfigError, match=r"\[couplings\] precision"):
        validate(tomllib.loads('[couplings]\nprecision = "1/zero"\n'))
