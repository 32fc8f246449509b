"""`radwalk fit` as a user runs it, and its bad inputs (issue 3)."""

import json

import h5py
import pytest

from radwalk.cli.main import main


def run(capsys, *argv):
    code = main(list(argv))
    out = capsys.readouterr()
    return code, out.out, out.err


# Two band stars: these tests are about the command, and each band star is a solved star (~2 s of CPU).
FAST = """
[settings]
band_stars = 2

[sampler]
walkers = 16
chunk = 200
max_steps = 1200
derived_samples = 150
optimizer_starts = 2
"""


def _refuse(name):
    raise ValueError(f"{name} is not JSON")


@pytest.fixture
def fast_config(tmp_path):
    p = tmp_path / "fast.toml"
    p.write_text(FAST)
    return str(p)


def test_fit_writes_outputs_and_prints_table(tmp_path, capsys, fast_config):
    out = tmp_path / "sunlike"
    code, text, err = run(capsys, "fit", "--id", "sun like", "--radius", "1.0", "0.02", "--luminosity", "1.0",
                          "0.05", "--teff", "5772", "60", "--config", fast_config, "--out", str(out), "--seed", "3")
    assert code == 0, err
    assert "mass" in text and "M_sun" in text and "diffusion_time" in text and "prior-dominated" in text
    doc = json.loads((out / "summary.json").read_text())
    assert doc["id"] == "sun like" and doc["status"] in ("ok", "not-converged")
    for png in ("corner_parameters.png", "corner_timescales.png", "trace.png", "profile.png", "predictive.png"):
        assert (out / png).stat().st_size > 1000
    with h5py.File(out / "chain.h5") as f:
        assert f["chain"].shape[1:] == (16, 3)
        assert list(f.attrs["names"]) == ["mass", "Z", "age"]  # the track grid: X follows Z by its rule


def test_fit_json_without_teff(tmp_path, capsys, fast_config):
    code, text, _ = run(capsys, "fit", "--radius", "1.5", "0.05", "--luminosity", "4", "0.3", "--config",
                        fast_config, "--out", str(tmp_path / "a"), "--json", "--no-plots")
    assert code == 0
    doc = json.loads(text, parse_constant=_refuse)  # strict JSON: no NaN or Infinity
    assert doc["observed"]["teff"]["value"] is None  # null: not measured
    assert "teff" in doc["derived"]


@pytest.mark.parametrize(
    "extra,needle",
    [
        (["--radius", "1", "0"], "uncertainty of R = 0 R_sun is not allowed"),
        (["--radius", "1", "-0.1"], "uncertainty of R = -0.1 R_sun is not allowed"),
        (["--luminosity", "1", "nan"], "uncertainty of L = nan L_sun is not allowed"),
        (["--teff", "-5000", "50"], "T_eff = -5000 K is not allowed"),
        ([], "give at least one of --radius, --luminosity, --teff"),
        (["--radius", "1", "0.02", "--opacity", "kramerz"], "did you mean 'kramers'"),
        (["--radius", "1", "0.02", "--set", "nn=2"], "unknown parameter 'nn'"),
        (["--radius", "1", "0.02", "--feh", "0.1", "0"], "[Fe/H] = 0.1 needs a finite value"),
    ],
)
def test_fit_bad_input(tmp_path, capsys, fast_config, extra, needle):
    code, _, err = run(capsys, "fit", *extra, "--config", fast_config, "--out", str(tmp_path / "x"))
    assert code == 2
    lines = [x for x in err.strip().splitlines() if not x.startswith("warning:")]
    assert len(lines) == 1 and needle in lines[0], err


def test_fit_config_errors(tmp_path, capsys):
    bad = tmp_path / "bad.toml"
    bad.write_text("[sampler]\nwalker = 16\n")
    code, _, err = run(capsys, "fit", "--radius", "1", "0.02", "--config", str(bad), "--out", str(tmp_path / "y"))
    assert code == 2 and "did you mean 'walkers'" in err
    imp = tmp_path / "imp.toml"
    imp.write_text("[priors.mass]\nkind = 'uniform'\nlower = 3\nupper = 1\n")
    code, _, err = run(capsys, "fit", "--radius", "1", "0.02", "--config", str(imp), "--out", str(tmp_path / "z"))
    assert code == 2 and "impossible prior" in err


def test_fit_unwritable_output(tmp_path, capsys, fast_config):
    blocker = tmp_path / "file"
    blocker.write_text("x")
    code, _, err = run(capsys, "fit", "--radius", "1", "0.02", "--config", fast_config, "--out", str(blocker / "sub"))
    assert code == 2 and "is not writable" in err
