"""The chain file (chain.h5): a star's walkers written chunk by chunk while it runs, and read back.

Datasets ``chain`` [steps, walkers, ndim] and ``log_prob`` [steps, walkers]
(float64, gzip), attribute ``names`` (the sampled parameters, in column
order) and, after each chunk, ``steps``, ``tau`` and ``converged``.  The file
is written in chunks (emcee's own HDF backend reopens its file several times
a step, measured about 17x slower per step), so a running fit can be
inspected.

When the fit ends, :func:`describe_chain_file` makes the file readable on its
own (docs/outputs.md): attributes ``units``, ``burn``, ``thin``, ``seed``,
``star_id``, the stages, priors, fixed values and package versions; and a
group ``derived`` with the thinned posterior samples the derived quantities
were computed on (``derived/parameters`` [n, nparams], every parameter, those
drawn from their priors too) and one dataset per derived quantity [n], row by
row the same samples, so any function of the posterior (the ratio of two
timescales, say) is a line of numpy away.  :func:`read_chain` reads it back;
:func:`to_arviz` converts it (``radwalk[arviz]``).
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np

from radwalk.results.files import ensure_space
from radwalk.results.provenance import package_versions

LAYOUT = ("chain [steps, walkers, ndim]: every walker's position at every step, columns as attribute names "
          "(units: attribute units); log_prob [steps, walkers]: log posterior; the posterior samples are "
          "chain[burn::thin] (attributes burn, thin); derived/parameters [n, nparams]: the thinned samples the "
          "derived quantities were computed on, every parameter (attribute names, units), those drawn from their "
          "priors after sampling too; derived/<quantity> [n]: that quantity at the same rows (attributes unit, "
          "description)")

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


def _text(values) -> list[str]:
    return [str(v) for v in values]


def describe_chain_file(path, products, summary: dict, seed: int, versions: dict | None = None) -> None:
    """Writes into a finished chain file what makes it readable alone, and the derived samples beside the chain.

    Parameters
    ----------
    path : str or Path
        The star's chain file, as the sampler wrote it.
    products : FitProducts
        The fit's products (:class:`radwalk.results.products.FitProducts`): its chain (burn, thin), the
        thinned parameter samples, the rows the derived quantities were computed on and their values.
    summary : dict
        The fit's summary (stages, fixed values, sampler settings), as :func:`radwalk.inference.fit.fit_one`
        returns it.
    seed : int
        The run's seed (the star's own stream is spawned from it and the star id).
    versions : dict, optional
        Package versions; by default :func:`package_versions`.
    """
    import h5py

    from radwalk.forward.quantities import description

    chain = products.chain
    ndim = len(chain.names)
    rows = np.asarray(products.derived_rows, dtype=int)
    at = np.asarray(products.samples, dtype=float)[rows]
    ok = getattr(products, "derived_ok", None)
    if ok is not None:  # the derived quantities are given over the samples that gave a model star
        at = at[np.asarray(ok, dtype=bool)]
    derived = {name: np.asarray(v, dtype=float) for name, v in products.derived.items()
               if np.ndim(v) == 1 and np.shape(v)[0] == at.shape[0]}
    units = {name: d.get("unit", "") for name, d in (summary.get("derived") or {}).items()}
    nbytes = at.nbytes + sum(v.nbytes for v in derived.values())
    ensure_space(Path(path).parent, nbytes + _HDF5_OVERHEAD)
    sampler = summary.get("sampler") or {}
    with h5py.File(path, "a") as f:
        attrs = f.attrs
        attrs["units"] = _text(products.param_units[:ndim])
        attrs["labels"] = _text(products.param_labels[:ndim])
        attrs["priors"] = _text(p.describe() for p in products.priors[:ndim])
        attrs["burn"] = int(chain.burn)
        attrs["thin"] = int(chain.thin)
        attrs["walkers"] = int(chain.chain.shape[1])
        attrs["steps"] = int(chain.chain.shape[0])
        attrs["converged"] = bool(chain.converged)
        attrs["reason"] = str(chain.reason)
        attrs["acceptance"] = float(chain.acceptance)
        attrs["seed"] = int(seed)
        attrs["star_id"] = str(products.star.id)
        attrs["opacity"] = str(products.opacity)
        attrs["stages"] = json.dumps(summary.get("stages") or {}, sort_keys=True)
        attrs["fixed"] = json.dumps(summary.get("fixed") or {}, sort_keys=True)
        attrs["versions"] = json.dumps(versions or package_versions(), sort_keys=True)
        attrs["layout"] = LAYOUT
        if "derived" in f:
            del f["derived"]
        group = f.create_group("derived")
        group.attrs["description"] = (
            f"{at.shape[0]} posterior samples, evenly spaced over the thinned chain (up to sampler.derived_samples "
            f"= {sampler.get('derived_samples', at.shape[0])}), that gave a model star; every dataset here is row "
            "by row these samples")
        params = group.create_dataset("parameters", data=at, compression="gzip", compression_opts=4)
        params.attrs["names"] = _text(products.param_names)
        params.attrs["units"] = _text(products.param_units)
        params.attrs["drawn_from_prior"] = [j >= ndim for j in range(len(products.param_names))]
        for name, values in derived.items():
            if name == "parameters":
                continue  # a quantity of that name would hide the samples' own table
            d = group.create_dataset(name, data=values, compression="gzip", compression_opts=4)
            d.attrs["unit"] = str(units.get(name, ""))
            d.attrs["description"] = description(name)


def write_chain_file(path, products, summary: dict, seed: int) -> Path:
    """Writes a finished fit's chain file at once: the file a fit writes chunk by chunk, described alike.

    The fit writes its chain with :class:`ChainFile` while it samples and finishes the file with
    :func:`describe_chain_file`; a fit held in memory (``radwalk.fit(...).write(folder)``) goes through
    the same two, so both files carry the same datasets, attributes and ``derived`` group.

    Parameters
    ----------
    path : str or Path
        The chain file to write (replaced if it exists).
    products : FitProducts
        The fit's products; ``products.chain`` is the whole chain [steps, walkers, ndim].
    summary : dict
        The fit's summary (or the summary.json document, which holds it).
    seed : int
        The run's seed.

    Returns
    -------
    Path
    """
    chain = products.chain
    store = ChainFile(Path(path), chain.names, chain.chain.shape[1])
    store.append(chain.chain, chain.log_prob, steps=chain.steps, tau=chain.tau, converged=bool(chain.converged))
    describe_chain_file(path, products, summary, seed)
    return Path(path)


def _decoded(values) -> list[str]:
    return [v.decode() if isinstance(v, bytes) else str(v) for v in values]


def read_chain(path) -> dict:
    """A chain file as plain data.

    Returns
    -------
    dict
        ``chain`` [steps, walkers, ndim], ``log_prob`` [steps, walkers], ``names``, ``units``, ``burn``,
        ``thin`` and every other attribute (``stages``, ``fixed``, ``versions`` decoded from JSON);
        ``samples`` [n, ndim] = the chain after burn-in and thinning, walkers flattened; ``derived``:
        name -> [n] and ``derived_parameters`` [n, nparams] with ``derived_names``, ``derived_units``
        (empty when the file has no derived group, e.g. a chain still running).
    """
    import h5py

    with h5py.File(path, "r") as f:
        out = {key: (v if np.ndim(v) == 0 else np.asarray(v)) for key, v in f.attrs.items()}
        for key in ("names", "units", "labels", "priors"):
            if key in out:
                out[key] = _decoded(out[key])
        for key in ("stages", "fixed", "versions"):
            if key in out:
                out[key] = json.loads(out[key])
        for key, v in out.items():
            if isinstance(v, bytes):
                out[key] = v.decode()
            elif isinstance(v, np.generic):
                out[key] = v.item()
        out["chain"] = np.asarray(f["chain"])
        out["log_prob"] = np.asarray(f["log_prob"])
        burn, thin = int(out.get("burn", 0)), int(out.get("thin", 1))
        kept = out["chain"][burn::thin]
        out["samples"] = kept.reshape(-1, kept.shape[-1])
        out["derived"], out["derived_units"] = {}, {}
        out["derived_parameters"], out["derived_names"], out["derived_parameter_units"] = None, [], []
        if "derived" in f:
            g = f["derived"]
            out["derived_parameters"] = np.asarray(g["parameters"])
            out["derived_names"] = _decoded(g["parameters"].attrs["names"])
            out["derived_parameter_units"] = _decoded(g["parameters"].attrs["units"])
            for name, d in g.items():
                if name != "parameters":
                    out["derived"][name] = np.asarray(d)
                    unit = d.attrs.get("unit", "")
                    out["derived_units"][name] = unit.decode() if isinstance(unit, bytes) else str(unit)
    return out


def to_arviz(path):
    """A chain file as an ``arviz.InferenceData`` (needs ``pip install radwalk[arviz]``).

    Groups: ``posterior`` (the sampled parameters after burn-in and thinning, one ArviZ chain per walker),
    ``sample_stats`` (``lp``, the log posterior) and ``constant_data`` (the fixed parameters); the file's
    attributes (star id, seed, stages, versions, units) become the groups' attributes.  The derived
    quantities, computed on evenly spaced thinned samples rather than per walker and step, are not an
    ArviZ group: read them with :func:`read_chain` (``derived``).

    Raises
    ------
    ImportError
        If arviz is not installed, saying how to install it.
    """
    import warnings

    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", FutureWarning)  # arviz 0.2x announces its coming refactor on import
            import arviz
    except ImportError:
        raise ImportError("to_arviz needs arviz: pip install 'radwalk[arviz]'") from None
    data = read_chain(path)
    burn, thin = int(data.get("burn", 0)), int(data.get("thin", 1))
    kept = data["chain"][burn::thin]  # [draw, walker, ndim]
    posterior = {name: kept[:, :, j].T for j, name in enumerate(data["names"])}  # [chain = walker, draw]
    attrs = {"star_id": str(data.get("star_id", "")), "seed": int(data.get("seed", -1)),
             "opacity": str(data.get("opacity", "")), "stages": json.dumps(data.get("stages", {})),
             "versions": json.dumps(data.get("versions", {})), "burn": burn, "thin": thin,
             "units": json.dumps(dict(zip(data["names"], data.get("units", [""] * len(data["names"])))))}
    fixed = {name: np.asarray(v) for name, v in (data.get("fixed") or {}).items()}
    idata = arviz.from_dict(posterior=posterior, sample_stats={"lp": data["log_prob"][burn::thin].T},
                            constant_data=fixed or None)
    for group in idata.groups():
        idata[group].attrs.update(attrs)
    return idata
