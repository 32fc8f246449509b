"""The subcommands behave alike: shared config options, exit statuses, progress for a terminal or a log."""

import json
import os
import pty
import subprocess
import sys
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "run"))
from quick_run import quick_run_toml  # noqa: E402

from radwalk.cli.args import EXIT_CODES_TEXT  # noqa: E402
from radwalk.cli.main import build_parser, main  # noqa: E402
from radwalk.host.config import load  # noqa: E402

ROOT = Path(__file__).resolve().parents[2]
RADWALK = [sys.executable, "-m", "radwalk.cli.main"]
CATALOG = ("id,radius,radius_err,luminosity,luminosity_err,teff,teff_err\n"
           "a,1.0,0.04,1.0,0.05,5772,100\n")
BROKEN = "broken,1.1,-0.05,1.2,0.1,6000,100\n"  # a negative uncertainty: that star fails, the others run


def run(capsys, *argv):
    code = main([str(a) for a in argv])
    out = capsys.readouterr()
    return code, out.out, out.err


@pytest.fixture
def quick(tmp_path):
    p = tmp_path / "quick.toml"
    p.write_text(quick_run_toml(seed=3))
    return p


def env():
    return {**os.environ, "MPLBACKEND": "Agg"}


# -- the same options everywhere ---------------------------------------------------------------------------------
def test_run_takes_the_stage_seed_and_set_options_of_fit_and_fits_a_star_as_fit_does(tmp_path, capsys, quick):
    cat = tmp_path / "cat.csv"
    cat.write_text(CATALOG)
    options = ["--config", quick, "--opacity", "kramers", "--set", "n=2", "--seed", "7"]
    code, out, err = run(capsys, "run", cat, "--out", tmp_path / "r", "--workers", "1", "--no-plots", "--no-report",
                         "--quiet", *options)
    assert code == 0, err  # not converged with the quick sampler, but fitted
    cfg = load(tmp_path / "r" / "run.toml")
    assert cfg.stages["opacity"] == "kramers" and cfg.stages["profile"] == "polytrope"  # the rest from --config
    assert cfg.settings["n"] == 2.0 and cfg.seed == 7
    ran = json.loads(next((tmp_path / "r" / "stars").glob("*/summary.json")).read_text())

    code, _, err = run(capsys, "fit", "--id", "a", "--radius", "1.0", "0.04", "--luminosity", "1.0", "0.05",
                       "--teff", "5772", "100", "--out", tmp_path / "f", "--no-plots", *options)
    assert code == 0, err
    fitted = json.loads((tmp_path / "f" / "summary.json").read_text())
    # the same star, config and seed: the same samples, whichever command fitted it
    assert ran["stages"] == fitted["stages"] and ran["stages"]["opacity"] == "kramers"
    assert ran["parameters"] == fitted["parameters"]


@pytest.mark.parametrize("cmd", ["run", "demo"])
@pytest.mark.parametrize("bad,needle", [(["--opacity", "kramerz"], "did you mean 'kramers'"),
                                        (["--set", "nn=2"], "unknown parameter 'nn'"),
                                        (["--set", "n2"], "--set needs NAME=VALUE")])
def test_run_and_demo_refuse_what_fit_refuses(tmp_path, capsys, quick, cmd, bad, needle):
    cat = tmp_path / "cat.csv"
    cat.write_text(CATALOG)
    where = [cat, "--out", tmp_path / "r"] if cmd == "run" else ["--out", tmp_path / "r"]
    code, _, err = run(capsys, cmd, *where, "--config", quick, "--quiet", *bad)
    assert code == 2 and needle in err, err
    code, _, err = run(capsys, "fit", "--radius", "1", "0.04", "--config", quick, "--out", tmp_path / "f", *bad)
    assert code == 2 and needle in err, err


def test_demo_takes_seed_config_workers_and_no_plots(tmp_path, capsys, quick):
    out = tmp_path / "demo"
    code, text, err = run(capsys, "demo", "--out", out, "--config", quick, "--seed", "11", "--workers", "2",
                          "--no-plots", "--no-report", "--quiet")
    cfg = load(out / "run.toml")
    assert cfg.seed == 11 and cfg.stages["profile"] == "polytrope" and cfg.sampler.max_steps == 200
    # the textbook stages reach none of the demo's evolved stars: they fail, and the exit status says so
    docs = [json.loads(p.read_text()) for p in out.glob("stars/*/summary.json")]
    failed = sum(d["status"] == "failed" for d in docs)
    assert len(docs) == 24 and 0 < failed < 24 and code == 1, err
    assert f"{failed} failed" in text and f"{24 - failed} without figures" in text
    assert not list(out.glob("stars/*/*.png"))


def test_demo_seed_must_be_a_whole_non_negative_number(capsys):
    with pytest.raises(SystemExit) as e:
        main(["demo", "--seed", "-1"])
    assert e.value.code == 2 and "must be at least 0" in capsys.readouterr().err


# -- exit statuses -------------------------------------------------------------------------------------------------
def test_every_help_ends_with_the_exit_statuses():
    parser = build_parser()
    assert parser.epilog == EXIT_CODES_TEXT
    sub = next(a for a in parser._actions if a.dest == "command")
    for name, p in sub.choices.items():
        assert p.epilog == EXIT_CODES_TEXT, name
        assert "1 some stars failed" in p.format_help().replace("\n", " "), name
    readme = (ROOT / "README.md").read_text()
    assert "exit status" in readme.lower() and "1 " in readme


def test_run_exits_1_when_some_stars_failed(tmp_path, capsys, quick):
    cat = tmp_path / "cat.csv"
    cat.write_text(CATALOG + BROKEN)
    code, out, _ = run(capsys, "run", cat, "--out", tmp_path / "r", "--config", quick, "--workers", "1",
                       "--no-plots", "--no-report", "--quiet")
    assert code == 1 and "1 failed" in out


def test_fit_exits_1_when_the_star_fails(tmp_path, capsys):
    # the default stages: R = 300 R_sun at 1 L_sun is past every allowed composition's main sequence
    code, _, err = run(capsys, "fit", "--radius", "300", "1", "--luminosity", "1", "0.05", "--no-plots",
                       "--out", tmp_path / "x")
    lines = [x for x in err.strip().splitlines() if not x.startswith(("warning:", "radwalk: sampling"))]
    assert code == 1 and len(lines) == 1 and "beyond the end of the main sequence" in lines[0], err
    assert json.loads((tmp_path / "x" / "summary.json").read_text())["status"] == "failed"


@pytest.mark.parametrize("argv", [
    ["model", "--mass", "1", "--profile", "polytrop"],
    ["plugins", "--plugin", "no-such-plugin.py"],
    ["fit", "--radius", "1", "0.02", "--config", "no-such.toml"],
    ["check-plugin", "no_such_component_anywhere"],
    ["run", "no-such-catalog.csv", "--out", "{tmp}/r"],
    ["report", "{tmp}/no-such-run"],
    ["demo", "--config", "no-such.toml", "--out", "{tmp}/d"],
    ["grid", "info", "no-such-grid-key"],
])
def test_bad_input_exits_2_with_one_line_for_every_subcommand(tmp_path, capsys, argv):
    code, _, err = run(capsys, *(a.replace("{tmp}", str(tmp_path)) for a in argv))
    lines = [x for x in err.strip().splitlines() if not x.startswith("warning:")]
    assert code == 2 and len(lines) == 1 and lines[0].startswith("radwalk: error:"), err


# -- progress ------------------------------------------------------------------------------------------------------
@pytest.mark.subprocess
def test_progress_into_a_log_is_plain_lines(tmp_path, quick):
    cat = tmp_path / "cat.csv"
    cat.write_text(CATALOG)
    log = tmp_path / "err.log"
    with open(log, "wb") as f:
        r = subprocess.run([*RADWALK, "run", cat, "--out", tmp_path / "r", "--config", quick, "--workers", "1",
                            "--no-report"], stderr=f, stdout=subprocess.PIPE, env=env(), cwd=tmp_path, timeout=600)
        assert r.returncode == 0
        r = subprocess.run([*RADWALK, "fit", "--radius", "1", "0.04", "--config", quick, "--out", tmp_path / "f",
                            "--no-plots"], stderr=f, stdout=subprocess.PIPE, env=env(), cwd=tmp_path, timeout=600)
        assert r.returncode == 0
    text = log.read_bytes().decode()
    assert "\r" not in text and "\x1b" not in text  # no redrawn frames, no terminal codes
    assert "radwalk: star 'a' not-converged" in text  # the run: a line per star
    assert "radwalk: figures of star 'a'" in text
    assert "radwalk: sampling star star: 16 walkers, up to 200 steps" in text  # the fit: its start, ...
    assert "radwalk: sampling: 100/200 steps, tau_max" in text  # ... the first chunk ...
    assert "radwalk: sampling: 200/200 steps" in text  # ... and the last
    assert text.count("notice:") == len(set(x for x in text.splitlines() if "notice:" in x))  # each once


@pytest.mark.subprocess
def test_progress_on_a_terminal_is_redrawn(tmp_path, quick):
    leader, follower = pty.openpty()
    proc = subprocess.Popen([*RADWALK, "fit", "--radius", "1", "0.04", "--config", quick, "--out", tmp_path / "f",
                             "--no-plots"], stderr=follower, stdout=subprocess.DEVNULL, env=env(), cwd=tmp_path)
    os.close(follower)  # the child holds the terminal's other end now
    seen = b""
    try:
        while True:  # read while it runs, so a full terminal buffer never blocks the child
            try:
                chunk = os.read(leader, 65536)
            except OSError:  # the child closed its end: all read
                break
            if not chunk:
                break
            seen += chunk
        code = proc.wait(timeout=600)
    finally:
        os.close(leader)
        if proc.poll() is None:
            proc.kill()
            proc.wait()
    assert code == 0, seen.decode(errors="replace")
    text = seen.decode()
    assert "\rsampling" in text.replace("\x1b[K", "") and "200/200 steps" in text


# -- model --profile-out -------------------------------------------------------------------------------------------
def test_model_profile_out_refuses_a_missing_folder(tmp_path, capsys):
    target = tmp_path / "no-such-folder" / "profile.ecsv"
    code, _, err = run(capsys, "model", "--mass", "1", "--profile", "polytrope", "--profile-out", target)
    assert code == 2 and "does not exist" in err and str(target.parent) in err
    assert not target.parent.exists()
    blocker = tmp_path / "a-file"
    blocker.write_text("x")
    code, _, err = run(capsys, "model", "--mass", "1", "--profile-out", blocker / "profile.ecsv")
    assert code == 2 and "is not a folder" in err
