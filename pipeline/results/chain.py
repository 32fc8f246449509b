"""The chain file (chain.h5): a star's walkers written chunk by chunk while it runs, and read back.

Datasets ``chain`` [steps, walkers, ndim] and ``log_prob`` [steps, walkers]
(float64, gzip), attribute ``names`` (the sampled parameters, in column
order) and, after each chunk, ``steps``, ``tau`` and ``converged``.  The file
is written in chunks (emcee's own HDF backend reopens its file several times
a step, measured about 17x slower per step), so a running fit can be
inspected.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np

from radwalk.results.files import ensure_space

# Bytes reserved for HDF5's own structures (headers, chunk index, attributes) on top of the data of a write.
_HDF5_OVERHEAD = 256 * 1024


class ChainFile:
    """Appends chunks of a chain to an HDF5 file (gzip) so a running fit can be inspected."""

    def __init__(self, path: Path, names, walkers: int):
        import h5py

        self.path = Path(path)
        self.path.parent.mkdir(parents=True, exist_ok=True)
        self._h5py = h5py
        ensure_space(self.path.parent, _HDF5_OVERHEAD)
        with h5py.File(self.path, "w") as f:
            nd = len(names)
            f.create_dataset("chain", shape=(0, walkers, nd), maxshape=(None, walkers, nd), dtype="f8",
                             chunks=(64, walkers, nd), compression="gzip", compression_opts=4)
            f.create_dataset("log_prob", shape=(0, walkers), maxshape=(None, walkers), dtype="f8",
                             chunks=(64, walkers), compression="gzip", compression_opts=4)
            f.attrs["names"] = [str(n) for n in names]

    def append(self, chain, log_prob, **attrs):
        # uncompressed size: gzip never needs more than that (plus its small overhead)
        ensure_space(self.path.parent, np.asarray(chain).nbytes + np.asarray(log_prob).nbytes + _HDF5_OVERHEAD)
        with self._h5py.File(self.path, "a") as f:
            c, lp = f["chain"], f["log_prob"]
            start = c.shape[0]
            c.resize(start + chain.shape[0], axis=0)
            lp.resize(start + chain.shape[0], axis=0)
            c[start:] = chain
            lp[start:] = log_prob
            for k, v in attrs.items():
                f.attrs[k] = v


def posterior_interval(chain_file, name: str, level: float = 0.95, burn: int = 0, thin: int = 1):
    """Central credible interval of one sampled parameter from a star's chain.h5.

    Parameters
    ----------
    chain_file : str or Path
        The star's chain.h5.
    name : str
        Parameter name (one of the file's ``names`` attribute).
    level : float
        Probability inside the interval.
    burn, thin : int
        Steps dropped at the start, and thinning (the summary's sampler.burn / sampler.thin).

    Returns
    -------
    tuple of float
        (lower, upper) in the parameter's unit.
    """
    import h5py

    with h5py.File(chain_file, "r") as f:
        names = [n.decode() if isinstance(n, bytes) else str(n) for n in f.attrs["names"]]
        j = names.index(name)
        x = np.asarray(f["chain"][burn::thin, :, j]).ravel()
    x = x[np.isfinite(x)]
    if x.size == 0:
        return (math.nan, math.nan)
    lo, hi = np.percentile(x, [50 * (1 - level), 50 * (1 + level)])
    return float(lo), float(hi)
