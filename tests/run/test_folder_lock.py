"""One run at a time in an output folder: a second run is refused naming the first; a killed run's lock goes."""

import os
import signal
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import pytest
from quick_run import quick_run_toml

from radwalk.errors import RadwalkError
from radwalk.run.lock import folder_lock
from radwalk.run.orchestrate import load_run_config, run_catalog

ROOT = Path(__file__).resolve().parents[2]
FAST_TOML = quick_run_toml(max_steps=2000)


@pytest.mark.subprocess
def test_second_run_on_a_folder_is_refused_and_a_killed_run_leaves_no_lock(tmp_path):
    cat = tmp_path / "cat.csv"
    cat.write_text("id,radius,radius_err,luminosity,luminosity_err,teff,teff_err\n"
                   "a,1.0,0.04,1.0,0.05,5772,100\nb,1.3,0.06,2.5,0.15,6500,120\n")
    cfg = tmp_path / "fast.toml"
    cfg.write_text(FAST_TOML)
    out = tmp_path / "out"
    script = tmp_path / "run.py"
    script.write_text(textwrap.dedent(f"""\
        from radwalk.run.orchestrate import load_run_config, run_catalog
        if __name__ == "__main__":
            run_catalog({str(cat)!r}, {str(out)!r}, load_run_config({str(cfg)!r}), workers=1, report=False,
                        plots=False, quiet=True)
        """))
    proc = subprocess.Popen([sys.executable, str(script)], env={**os.environ, "PYTHONPATH": str(ROOT)},
                            start_new_session=True)
    try:
        deadline = time.monotonic() + 60
        while not (out / "radwalk.log").exists():
            assert proc.poll() is None and time.monotonic() < deadline, "the first run did not start"
            time.sleep(0.05)
        with pytest.raises(RadwalkError, match=rf"in use by another radwalk run \(pid {proc.pid} ") as err:
            run_catalog(cat, out, load_run_config(cfg), workers=1, report=False, plots=False, quiet=True)
        assert "\n" not in str(err.value)
        os.killpg(proc.pid, signal.SIGKILL)
        proc.wait(30)
    finally:
        if proc.poll() is None:
            os.killpg(proc.pid, signal.SIGKILL)
    # the kernel dropped the killed run's lock: the folder can be taken at once
    with folder_lock(out):
        pass
    log = (out / "radwalk.log").read_text()
    assert log.count("finished") == 0
