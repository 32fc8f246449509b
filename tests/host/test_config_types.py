"""A config value of the wrong type is refused at load with one line naming the key and what it must be."""

import pytest

from radwalk.cli.main import main
from radwalk.errors import ConfigError
from radwalk.host.config import load

CASES = {
    "columns id a number": ("[columns]\nid = 5\n", r"\[columns\] id must be .*string"),
    "solar_z a string": ('[metallicity]\nsolar_z = "x"\n', r"\[metallicity\] solar_z must be"),
    "solar_x zero": ("[metallicity]\nsolar_x = 0\n", r"\[metallicity\] solar_x must be"),
    "plugins not strings": ("[run]\nplugins = [1]\n", r"\[run\] plugins must be .*file"),
    "plugins a string": ('[run]\nplugins = "my.py"\n', r"\[run\] plugins must be .*list"),
    "prior bound a string": ('[priors.mass]\nkind = "uniform"\nlower = "a"\nupper = 2\n',
                             r"\[priors.mass\] lower must be a number"),
    "prior bound a list": ('[priors.mass]\nkind = "uniform"\nlower = [0.5]\nupper = 2\n',
                           r"\[priors.mass\] lower must be a number"),
    "prior kind a number": ("[priors.mass]\nkind = 3\nlower = 0.5\nupper = 2\n", r"\[priors.mass\] kind must be"),
    "tau_multiple a string": ('[sampler]\ntau_multiple = "many"\n', r"sampler.tau_multiple must be"),
    "seed a bool": ("[run]\nseed = true\n", r"\[run\] seed must be"),
}


@pytest.mark.parametrize("text, match", CASES.values(), ids=list(CASES))
def test_wrong_type_is_one_config_error(tmp_path, text, match):
    path = tmp_path / "run.toml"
    path.write_text(text)
    with pytest.raises(ConfigError, match=match) as err:
        load(path)
    assert "\n" not in str(err.value)


def test_config_that_is_not_utf8(tmp_path):
    path = tmp_path / "run.toml"
    path.write_bytes(b"[run]\nseed = 1 # caf\xe9\n")
    with pytest.raises(ConfigError, match="not UTF-8"):
        load(path)


def test_cli_reports_bad_config_and_profile_out_folder_in_one_line(tmp_path, capsys):
    path = tmp_path / "run.toml"
    path.write_bytes(b"\xff\xfe[run]\n")
    assert main(["fit", "--radius", "1", "0.05", "--luminosity", "1", "0.05", "--config", str(path)]) == 2
    err = capsys.readouterr().err.strip()
    assert err.startswith("radwalk: error:") and "\n" not in err and "UTF-8" in err
    assert main(["model", "--mass", "1", "--profile", "polytrope", "--relation", "homology",
                 "--profile-out", str(tmp_path)]) == 2
    err = capsys.readouterr().err.strip()
    assert err.startswith("radwalk: error:") and "\n" not in err and "folder" in err
