"""The notebook API: radwalk.fit and radwalk.model give what the command line gives."""

import json

import astropy.units as u
import numpy as np
import pytest

import radwalk
from radwalk.cli.main import main
from radwalk.errors import RadwalkError
from radwalk.results.chain import read_chain

# Two band stars: the profile bands are not what these tests check, and each band star is a solved star (~2 s).
FAST = {"settings": {"band_stars": 2},
        "sampler": {"walkers": 16, "chunk": 200, "max_steps": 1200, "derived_samples": 150, "optimizer_starts": 2}}
STAR = {"radius": (1.02, 0.02), "luminosity": (1.05, 0.05), "teff": (5800.0, 60.0)}


def _refuse(name):
    raise ValueError(f"not strict JSON: {name}")


@pytest.fixture(scope="module")
def result():
    return radwalk.fit(**STAR, id="api star", config=FAST, seed=4)


@pytest.fixture(scope="module")
def cli_fit(tmp_path_factory):
    """The same star, config and seed through `radwalk fit`: its output folder."""
    folder = tmp_path_factory.mktemp("cli")
    toml = folder / "fast.toml"
    toml.write_text("[settings]\nband_stars = 2\n[sampler]\n"
                    + "\n".join(f"{k} = {v}" for k, v in FAST["sampler"].items()) + "\n")
    code = main(["fit", "--id", "api star", "--radius", "1.02", "0.02", "--luminosity", "1.05", "0.05", "--teff",
                 "5800", "60", "--config", str(toml), "--seed", "4", "--out", str(folder / "out"), "--no-plots"])
    assert code == 0
    return folder / "out"


def test_fit_summary_is_the_summary_json_of_the_command_line(result, cli_fit):
    cli = json.loads((cli_fit / "summary.json").read_text(), parse_constant=_refuse)
    api = json.loads(json.dumps(result.summary, allow_nan=False), parse_constant=_refuse)  # strict JSON content
    for key in ("id", "status", "parameters", "derived", "observed"):
        assert api[key] == cli[key], key


def test_write_gives_the_chain_file_of_the_command_line(result, cli_fit, tmp_path):
    # the same star, config and seed through `radwalk fit` and through FitResult.write: the same chain.h5
    cli = read_chain(cli_fit / "chain.h5")
    api = read_chain(result.write(tmp_path / "api") / "chain.h5")
    assert set(api) == set(cli)  # every attribute and dataset, the derived group among them
    assert api["units"] == cli["units"] and api["star_id"] == "api star" and api["seed"] == 4
    assert (api["burn"], api["thin"], api["stages"]) == (cli["burn"], cli["thin"], cli["stages"])
    np.testing.assert_array_equal(api["chain"], cli["chain"])
    assert set(api["derived"]) == set(cli["derived"]) and api["derived_names"] == cli["derived_names"]
    for name, values in cli["derived"].items():
        np.testing.assert_array_equal(api["derived"][name], values)


def test_samples_are_a_qtable_of_every_parameter_and_derived_quantity_with_units(result):
    t = result.samples
    names = set(result.summary["parameters"]) | set(result.summary["derived"])
    assert names <= set(t.colnames)
    assert t["mass"].unit == u.Msun and t["diffusion_time"].unit == u.yr
    assert t["central_density"].unit == u.g / u.cm**3
    assert len(t) == result.summary["sampler"]["derived_samples"]
    # the table's medians are the summary's
    assert np.median(t["mass"].value) == pytest.approx(result.summary["parameters"]["mass"]["p50"], rel=0.05)
    assert np.median(t["diffusion_time"].value) == pytest.approx(result.summary["derived"]["diffusion_time"]["p50"])
    assert result.chain.chain.ndim == 3


def test_quantities_in_other_units_give_the_same_fit(result):
    km, watt = u.km, u.W
    r_sun, l_sun = (1 * u.Rsun).to_value(km), (1 * u.Lsun).to_value(watt)
    again = radwalk.fit(radius=(1.02 * r_sun * km, 0.02 * r_sun * km), luminosity=(1.05 * l_sun * watt,
                        0.05 * l_sun * watt), teff=(5800 * u.K, 60 * u.K), id="api star", config=FAST, seed=4)
    assert again.summary["parameters"]["mass"]["p50"] == pytest.approx(
        result.summary["parameters"]["mass"]["p50"], rel=1e-9)


def test_write_puts_the_run_folder_files_in_place(result, tmp_path):
    folder = result.write(tmp_path / "star")
    doc = json.loads((folder / "summary.json").read_text(), parse_constant=_refuse)
    assert doc["id"] == "api star" and set(doc["plots"])
    assert (folder / "chain.h5").stat().st_size > 1000
    assert (folder / "corner_parameters.png").stat().st_size > 1000


def test_model_equals_radwalk_model_json(capsys):
    star = radwalk.model(mass=1.0, X=0.70, Z=0.02, age=0)
    assert main(["model", "--mass", "1", "--X", "0.70", "--Z", "0.02", "--age", "0", "--json"]) == 0
    cli = json.loads(capsys.readouterr().out, parse_constant=_refuse)
    assert star.summary == cli
    assert star.profile["T"].unit == u.K and len(star.profile) > 100
    quick = radwalk.model(mass=2 * u.Msun, profile="polytrope", relation="homology", settings={"n": 1.5})
    assert quick.summary["stages"]["profile"] == "polytrope" and quick.summary["parameters"]["n"] == 1.5


@pytest.mark.parametrize("kwargs,needle", [
    ({"radius": (1.0, 0.0)}, "uncertainty of R = 0 R_sun is not allowed"),
    ({"radius": 1.0}, "radius must be a pair"),
    ({"radius": (1.0 * u.kg, 0.1 * u.kg)}, "cannot be converted"),
    ({"radius": (1.0, 0.1), "opacity": "kramerz"}, "did you mean 'kramers'"),
    ({"radius": (1.0, 0.1), "config": 5}, "config must be"),
])
def test_bad_input_raises_one_clear_error(kwargs, needle):
    with pytest.raises(RadwalkError) as info:
        radwalk.fit(**{"config": FAST, **kwargs})
    assert needle in str(info.value)


def test_the_readme_python_example_runs(tmp_path, monkeypatch, capsys):
    # The README's "From Python" block, as a reader would paste it.
    from pathlib import Path

    text = (Path(__file__).resolve().parents[1] / "README.md").read_text()
    block = text.split("```python\n", 1)[1].split("```", 1)[0]
    monkeypatch.chdir(tmp_path)
    namespace = {}
    exec(compile(block, "README.md", "exec"), namespace)  # noqa: S102 - the project's own README
    assert "p50" in capsys.readouterr().out
    sun = namespace["star"].summary  # the calibrated Sun: no composition given
    assert sun["age_gyr"] == 4.57 and sun["stages"]["profile"] == "track-grid"
    assert sun["radius_rsun"] == pytest.approx(1.0, abs=1e-3) and sun["luminosity_lsun"] == pytest.approx(1.0, abs=1e-3)
    assert namespace["res"].samples["mass"].unit == u.Msun
