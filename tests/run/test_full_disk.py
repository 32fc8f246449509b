"""A full disk is the machine's problem, not the stars': no star is marked done, the run says why and stops,
and a resumed run after the space is freed equals an uninterrupted one.

The full disk is real: a 1 MiB tmpfs mounted in a private mount namespace (``unshare -rm``), filled but for a
few pages, so the stars' chain files hit ENOSPC.  Skipped where unprivileged mount namespaces are not allowed.
"""

import errno
import json
import os
import shutil
import subprocess
import sys
import textwrap
from pathlib import Path

import numpy as np
import pytest
from astropy.table import Table
from quick_run import quick_run_toml

from radwalk.errors import EnvironmentProblem, environment_cause
from radwalk.inference.fit import fit_star
from radwalk.inference.star import Star
from radwalk.results import files
from radwalk.run.orchestrate import load_run_config, run_catalog

ROOT = Path(__file__).resolve().parents[2]
FAST_TOML = quick_run_toml(seed=5)
CATALOG = "id,radius,radius_err,luminosity,luminosity_err,teff,teff_err\n" \
          "sun like,1.0,0.04,1.0,0.05,5772,100\nwarmer,1.3,0.06,2.5,0.15,6500,120\n"


def _can_mount_tmpfs(tmp):
    if not shutil.which("unshare"):
        return False
    r = subprocess.run(["unshare", "-rm", "sh", "-c", f"mount -t tmpfs -o size=64k tmpfs {tmp}"],
                       capture_output=True)
    return r.returncode == 0


@pytest.mark.slow
@pytest.mark.subprocess
def test_full_disk_marks_no_star_done_and_resume_equals_a_clean_run(tmp_path):
    mnt = tmp_path / "mnt"
    mnt.mkdir()
    if not _can_mount_tmpfs(mnt):
        pytest.skip("unprivileged tmpfs mounts (unshare -rm) are not allowed here")
    cat = tmp_path / "cat.csv"
    cat.write_text(CATALOG)
    cfg = tmp_path / "fast.toml"
    cfg.write_text(FAST_TOML)
    keep = tmp_path / "kept"
    runner = tmp_path / "run.py"
    runner.write_text(textwrap.dedent(f"""\
        import sys
        from radwalk.errors import RadwalkError
        from radwalk.run.orchestrate import load_run_config, run_catalog
        if __name__ == "__main__":
            try:
                run_catalog({str(cat)!r}, sys.argv[1], load_run_config({str(cfg)!r}), workers=1, report=False,
                            plots=False, quiet=True)
            except RadwalkError as exc:
                print(f"radwalk: error: {{exc}}", file=sys.stderr)
                sys.exit(2)
        """))
    py = sys.executable
    out = mnt / "out"
    # 1 MiB of tmpfs, all but 24 KiB taken by a filler: state.json and the log fit, a star's chain does not
    script = textwrap.dedent(f"""\
        set -u
        mount -t tmpfs -o size=1m tmpfs {mnt}
        avail=$(df -k --output=avail {mnt} | tail -1)
        head -c $(( (avail - 24) * 1024 )) /dev/zero > {mnt}/filler
        {py} {runner} {out} 2> {tmp_path}/err1; echo $? > {tmp_path}/rc1
        mkdir -p {keep} && cp -r {out} {keep}/full
        rm {mnt}/filler
        {py} {runner} {out} 2> {tmp_path}/err2; echo $? > {tmp_path}/rc2
        cp -r {out} {keep}/resumed
        """)
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    subprocess.run(["unshare", "-rm", "sh", "-c", script], env=env, check=True, timeout=300)

    err1 = (tmp_path / "err1").read_text()
    assert (tmp_path / "rc1").read_text().strip() == "2", err1
    last = err1.strip().splitlines()[-1]
    assert "No space left on device" in last and "resume" in last, err1
    assert "worker process died" not in err1
    full = keep / "full"
    assert not list(full.glob("stars/*/summary.json")), "a star was marked done on a full disk"
    assert "No space left on device" in (full / "radwalk.log").read_text()

    assert (tmp_path / "rc2").read_text().strip() == "0", (tmp_path / "err2").read_text()
    ref = tmp_path / "ref"
    run_catalog(cat, ref, load_run_config(cfg), workers=1, report=False, plots=False, quiet=True)
    a, b = Table.read(ref / "summary.ecsv"), Table.read(keep / "resumed" / "summary.ecsv")
    assert a.colnames == b.colnames
    for c in a.colnames:
        if c == "seconds":
            continue
        x, y = np.asarray(a[c]), np.asarray(b[c])
        assert (np.array_equal(x, y, equal_nan=True) if x.dtype.kind == "f" else list(x) == list(y)), c
    for d in (keep / "resumed").glob("stars/*/summary.json"):
        assert json.loads(d.read_text())["status"] != "failed"


def test_no_space_while_writing_leaves_no_summary(tmp_path, monkeypatch):
    # Injected at the file-writing layer (results/files.py): every atomic write raises ENOSPC, as a full disk does.
    cfg = tmp_path / "fast.toml"
    cfg.write_text(FAST_TOML)
    config = load_run_config(cfg)

    def full(path, suffix=None):
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC), str(path))

    monkeypatch.setattr(files, "atomic_path", full)
    star = Star.from_user_units("sun like", 1.0, 0.04, 1.0, 0.05, 5772.0, 100.0)
    with pytest.raises(EnvironmentProblem, match="No space left on device"):
        fit_star(star, config, outdir=tmp_path / "star", plots=True)
    assert not (tmp_path / "star" / "summary.json").exists()


def test_environment_causes_are_named_and_star_errors_are_not():
    assert "No space left" in environment_cause(OSError(errno.ENOSPC, os.strerror(errno.ENOSPC), "/x/a.h5"))
    assert environment_cause(MemoryError()) == "out of memory"
    assert environment_cause(OSError(errno.EIO, os.strerror(errno.EIO))) is not None
    assert environment_cause(FileNotFoundError(errno.ENOENT, "no such file")) is None
    assert environment_cause(ValueError("bad")) is None
