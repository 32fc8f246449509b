"""`radwalk model` and `radwalk plugins` as a user runs them, and every bad input (issue 2)."""

import json
import subprocess
import sys
import textwrap

import pytest
from astropy.table import Table

from radwalk.cli.main import main

JSON_KEYS = (
    "mass_msun radius_rsun luminosity_lsun teff_k mu central_density_g_cm3 central_temperature_k "
    "central_pressure_dyn_cm2 mean_free_path_center_cm photosphere_radius_rsun diffusion_time_yr "
    "diffusion_time_radiative_core_yr diffusion_time_uniform_yr kelvin_helmholtz_time_yr dynamical_time_s "
    "eddington_luminosity_lsun convective_zones"
).split()


def run(capsys, *argv):
    code = main(list(argv))
    out = capsys.readouterr()
    return code, out.out, out.err


def test_model_json_has_every_key(capsys):
    code, out, _ = run(capsys, "model", "--mass", "1", "--age", "4.57", "--json")
    assert code == 0
    d = json.loads(out)
    for key in JSON_KEYS + ["main_sequence_lifetime_gyr", "central_hydrogen"]:
        assert key in d
    # The calibrated Sun (no composition given) off the shipped track grid: R and L of the IAU 2015 nominal Sun
    # (Resolution B3) to the 0.1 % the calibration asks.
    assert d["radius_rsun"] == pytest.approx(1.0, rel=1e-3) and d["luminosity_lsun"] == pytest.approx(1.0, rel=1e-3)
    assert d["stages"] == {"profile": "track-grid", "opacity": "combined", "relation": "track-grid",
                           "likelihood": "gaussian"}
    assert isinstance(d["convective_zones"], list)


def test_model_human_table_has_units(capsys):
    code, out, _ = run(capsys, "model", "--mass", "2", "--X", "0.7", "--Z", "0.02")
    assert code == 0
    assert "central temperature" in out and " K" in out and "yr" in out and "g/cm^3" in out


def test_model_given_radius_and_luminosity_replace_the_relation(capsys):
    code, out, _ = run(capsys, "model", "--mass", "1", "--radius", "2", "--luminosity", "3", "--profile", "polytrope",
                       "--relation", "homology", "--json")
    d = json.loads(out)
    assert d["radius_rsun"] == pytest.approx(2.0)
    assert d["luminosity_lsun"] == pytest.approx(3.0)
    assert d["radius_source"] == "given"


def test_model_set_and_profile_out(tmp_path, capsys):
    path = tmp_path / "prof.ecsv"
    code, out, _ = run(capsys, "model", "--mass", "1", "--profile", "polytrope", "--set", "n=1.5", "--profile-out",
                       str(path), "--json")
    assert code == 0
    assert json.loads(out)["parameters"]["n"] == 1.5
    t = Table.read(path)
    assert {"r_over_R", "m_over_M", "rho", "T", "P", "kappa", "mean_free_path", "tau", "nabla_rad",
            "nabla_ad", "zone"} <= set(t.colnames)
    assert str(t["T"].unit) == "K"


@pytest.mark.parametrize(
    "argv,needle",
    [
        (["--mass", "1", "--opacity", "kramer"], "unknown opacity component 'kramer' (did you mean 'kramers'?)"),
        (["--mass", "1", "--profile", "nope"], "unknown profile component 'nope'"),
        (["--mass", "1", "--relation", "homolgy"], "did you mean 'homology'"),
        (["--mass", "1", "--set", "nn=3", "--profile", "polytrope"], "unknown parameter 'nn' (did you mean 'n'?)"),
        (["--mass", "1", "--set", "n"], "--set needs NAME=VALUE"),
        (["--mass", "1", "--X", "0.8", "--Z", "0.3"], "X + Z = 1.1 exceeds 1"),
        (["--mass", "-1"], "mass = -1.0 M_sun is not allowed"),
        (["--mass", "nan"], "mass = nan M_sun is not allowed"),
        (["--mass", "inf"], "mass = inf M_sun is not allowed"),
        (["--mass", "1", "--set", "n=5", "--profile", "polytrope"],
         "parameter 'n' of profile 'polytrope' = 5 is outside its allowed range"),
        (["--mass", "1", "--set", "n=-0.5", "--profile", "polytrope"], "outside its allowed range [0, 4.99]"),
        (["--mass", "1", "--radius", "0"], "radius = 0.0 is not allowed"),
    ],
)
def test_model_bad_input_one_line_exit_2(capsys, argv, needle):
    code, out, err = run(capsys, "model", *argv)
    assert code == 2
    lines = [x for x in err.strip().splitlines() if not x.startswith("warning:")]
    assert len(lines) == 1, err
    assert needle in lines[0]
    assert "Traceback" not in err


def _plugin(tmp_path, body, name="myplug.py"):
    p = tmp_path / name
    p.write_text(textwrap.dedent(body))
    return p


def test_plugin_file_that_does_not_import(tmp_path, capsys):
    p = _plugin(tmp_path, "import numpy\nraise ImportError('no such lib')\n")
    code, _, err = run(capsys, "model", "--mass", "1", "--plugin", str(p))
    assert code == 2
    assert "failed to import at line 2" in err and str(p) in err


def test_plugin_file_with_syntax_error(tmp_path, capsys):
    p = _plugin(tmp_path, "def broken(:\n")
    code, _, err = run(capsys, "plugins", "--plugin", str(p))
    assert code == 2 and "syntax error at line 1" in err


BAD_OPACITY = """
import numpy as np
from radwalk.host.hookspecs import hookimpl
from radwalk.host.params import Validity

class Bad:
    name = "{name}"
    description = "returns {what}"
    params = ()
    validity = Validity()
    def kappa(self, rho, T, X, Z):
        return np.full(np.broadcast(rho, T).shape, {value})

@hookimpl
def radwalk_opacities():
    return [Bad()]
"""


@pytest.mark.parametrize("value,what", [("np.nan", "NaN"), ("0.0", "zero"), ("-1.0", "negative")])
def test_plugin_opacity_returning_bad_values(tmp_path, capsys, value, what):
    p = _plugin(tmp_path, BAD_OPACITY.format(name="badlaw", what=what, value=value))
    code, _, err = run(capsys, "model", "--mass", "1", "--radius", "1", "--luminosity", "1",
                       "--plugin", str(p), "--opacity", "badlaw")
    assert code == 2
    # probed over the law's validity range before anything runs: the law and its first bad point are named
    check = "finite" if what == "NaN" else "positive"
    assert f"opacity 'badlaw' (file {p})" in err and f"fails the '{check}' check" in err and "first at rho=" in err


def test_plugin_name_clash_with_builtin(tmp_path, capsys):
    p = _plugin(tmp_path, BAD_OPACITY.format(name="kramers", what="x", value="1.0"))
    code, _, err = run(capsys, "plugins", "--plugin", str(p))
    assert code == 2
    assert "duplicate opacity component name 'kramers': from built-in and from file" in err


def test_misspelled_hook_is_rejected(tmp_path, capsys):
    p = _plugin(tmp_path, """
        from radwalk.host.hookspecs import hookimpl
        @hookimpl
        def radwalk_opacitys():
            return []
    """)
    code, _, err = run(capsys, "plugins", "--plugin", str(p))
    assert code == 2
    assert "unknown hook 'radwalk_opacitys' (did you mean 'radwalk_opacities'?)" in err


def test_plugin_component_is_listed_and_used(tmp_path, capsys):
    p = _plugin(tmp_path, BAD_OPACITY.format(name="flat-one", what="one", value="1.0"))
    code, out, _ = run(capsys, "plugins", "--json", "--plugin", str(p))
    info = json.loads(out)
    ours = [c for c in info["opacity"] if c["name"] == "flat-one"]
    assert ours and ours[0]["source"].startswith("file ")
    code, out, _ = run(capsys, "model", "--mass", "1", "--radius", "1", "--luminosity", "1",
                       "--opacity", "flat-one", "--profile", "polytrope", "--relation", "homology", "--plugin", str(p),
                       "--json")
    assert code == 0
    # constant kappa = 1: mean free path at the centre is 1/rho_c
    d = json.loads(out)
    assert d["mean_free_path_center_cm"] == pytest.approx(1 / d["central_density_g_cm3"], rel=1e-9)


def test_plugins_lists_every_stage_with_params(capsys):
    code, out, _ = run(capsys, "plugins", "--json")
    info = json.loads(out)
    assert set(info) == {"profile", "opacity", "relation", "likelihood"}
    names = {s: {c["name"] for c in comps} for s, comps in info.items()}
    assert {"polytrope", "eddington-standard"} <= names["profile"]
    assert {"electron-scattering", "kramers", "h-minus", "combined", "tabulated"} <= names["opacity"]
    assert {"homology", "eddington"} <= names["relation"]
    assert {"gaussian", "student-t"} <= names["likelihood"]
    poly = next(c for c in info["profile"] if c["name"] == "polytrope")
    n = poly["params"][0]
    assert n["name"] == "n" and n["lower"] == 0 and n["upper"] == 4.99 and n["prior"]["kind"] == "uniform"
    code, out, _ = run(capsys, "plugins")
    assert "polytrope" in out and "built-in" in out


@pytest.mark.subprocess
def test_console_script_runs():
    r = subprocess.run([sys.executable, "-m", "radwalk.cli.main", "model", "--mass", "1", "--opacity", "x"],
                       capture_output=True, text=True)
    assert r.returncode == 2 and "Traceback" not in r.stderr
