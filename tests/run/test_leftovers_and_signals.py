"""Killed runs' temporary files are cleaned by the next run; SIGTERM is logged as an interruption; a Dask
scheduler that does not answer leaves no output folder behind."""

import os
import signal
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import pytest
from quick_run import quick_run_toml

from radwalk.errors import ConfigError
from radwalk.results.layout import star_folder
from radwalk.run.orchestrate import load_run_config, run_catalog

ROOT = Path(__file__).resolve().parents[2]
FAST_TOML = quick_run_toml()
CATALOG = "id,radius,radius_err,luminosity,luminosity_err,teff,teff_err\na,1.0,0.04,1.0,0.05,5772,100\n"


@pytest.fixture
def setup(tmp_path):
    (tmp_path / "cat.csv").write_text(CATALOG)
    (tmp_path / "fast.toml").write_text(FAST_TOML)
    return tmp_path, load_run_config(tmp_path / "fast.toml")


def _killed_inside_a_write(path):
    """A real process SIGKILLed while writing ``path`` through radwalk's atomic writer."""
    code = textwrap.dedent(f"""\
        import os, signal
        from radwalk.results.files import atomic_path
        with atomic_path({str(path)!r}) as tmp:
            tmp.write_bytes(b"half a png")
            os.kill(os.getpid(), signal.SIGKILL)
        """)
    rc = subprocess.run([sys.executable, "-c", code]).returncode
    assert rc == -signal.SIGKILL


@pytest.mark.subprocess
def test_next_run_removes_a_killed_runs_temporary_files(setup):
    d, config = setup
    out = d / "out"
    folder = star_folder(out, "a")
    folder.mkdir(parents=True)
    _killed_inside_a_write(folder / "trace.png")
    _killed_inside_a_write(out / "summary.ecsv")
    left = [p for p in out.rglob(".*") if p.is_file()]
    assert len(left) == 2, left
    # a catalog whose one row cannot be used: the run does no fit, only its folder work
    (d / "bad.csv").write_text(CATALOG.replace("0.04", "-0.04"))
    o = run_catalog(d / "bad.csv", out, config, workers=1, report=False, plots=False, quiet=True)
    assert o.failed == 1
    assert [p for p in out.rglob(".*") if p.is_file()] == []


@pytest.mark.subprocess
def test_sigterm_is_logged_as_an_interruption(setup):
    d, config = setup
    out = d / "out"
    script = d / "run.py"
    slow = d / "slow.toml"
    slow.write_text(FAST_TOML.replace("max_steps = 200", "max_steps = 100000"))
    script.write_text(textwrap.dedent(f"""\
        import sys
        from radwalk.cli.main import main
        if __name__ == "__main__":
            sys.exit(main(["run", {str(d / "cat.csv")!r}, "--out", {str(out)!r}, "--config", {str(slow)!r},
                           "--workers", "1", "--no-report", "--quiet"]))
        """))
    proc = subprocess.Popen([sys.executable, str(script)], env={**os.environ, "PYTHONPATH": str(ROOT)},
                            start_new_session=True, stderr=subprocess.PIPE, text=True)
    try:
        deadline = time.monotonic() + 60
        while not list(out.glob("stars/*/chain.partial.h5")):  # a star is being fitted
            assert proc.poll() is None and time.monotonic() < deadline, "the run did not start a star"
            time.sleep(0.05)
        os.killpg(proc.pid, signal.SIGTERM)  # as a batch scheduler stops a job
        _, err = proc.communicate(timeout=30)
        rc = proc.returncode
    finally:
        if proc.poll() is None:
            os.killpg(proc.pid, signal.SIGKILL)
            proc.communicate()
    assert rc == 128 + signal.SIGTERM, err
    assert "terminated" in err and "Traceback" not in err
    assert "interrupted (SIGTERM); run the same command again to resume" in (out / "radwalk.log").read_text()


@pytest.mark.dask
def test_unanswering_scheduler_creates_no_output_folder(setup):
    d, config = setup
    out = d / "never"
    with pytest.raises(ConfigError, match="no Dask scheduler answered"):
        run_catalog(d / "cat.csv", out, config, executor="dask", scheduler="tcp://127.0.0.1:1", report=False,
                    plots=False, quiet=True)
    assert not out.exists()
