"""Catalog input: any table astropy.table reads, turned into validated Star records.

Formats follow the file name (``.ecsv``, ``.fits``/``.fit``/``.fts`` (also
gzipped), ``.vot``/``.votable``/``.xml``, ``.csv``, ``.tsv``) and otherwise
astropy's own guess.  Default columns are ``id``, ``radius``, ``radius_err``,
``luminosity``, ``luminosity_err``, ``teff``, ``teff_err`` and optionally
``feh``, ``feh_err``; the run config's ``[columns]`` table maps these names to
the file's (our name -> file column).

An optional column ``luminosity_derived`` (true/false, yes/no, 1/0; empty
means false) marks rows whose luminosity the catalog computed from its own
radius and T_eff; the fit then leaves L out of the likelihood
(:class:`radwalk.inference.star.Star`).  It is found by its name (any case)
only, not through ``[columns]``; an unreadable flag fails its row.

Units come from the file and are converted with astropy.units: a radius in
km or m becomes R_sun (IAU 2015 nominal, :mod:`radwalk.constants`), a
luminosity in W or erg/s becomes L_sun, T_eff must be a temperature in K.  A
value column without a unit is read in the documented default (R_sun, L_sun,
K; dex for [Fe/H]); an uncertainty column without a unit takes the unit of
its value column.  Each such column gives one notice line.

What stops the read (:class:`radwalk.errors.CatalogError`, one line): a file
that is missing, unreadable, empty or without rows, a missing required column
(id and at least one observable with its uncertainty), a unit that cannot be
converted, rows without an id and duplicate ids.  Ids are text, kept exactly as written:
in CSV and TSV files every cell is read as text (``007`` stays ``007``, and
``1`` and ``1.0`` are two ids); ECSV, FITS and VOTable files declare their
column types, and a numeric id column there is the writer's choice.  What does not: a row with a
NaN, a zero or negative uncertainty or an unphysical value becomes a failed
entry with the reason, and the other stars run.  An empty (masked) or NaN
value together with an empty uncertainty means "not measured" (a star may
lack T_eff, for instance).

Row numbers in messages count data rows from 1.
"""

from __future__ import annotations

import hashlib
import math
import warnings
from dataclasses import dataclass, field
from pathlib import Path
from typing import NamedTuple

import astropy.units as u
import numpy as np

from radwalk import constants as k
from radwalk.errors import CatalogError
from radwalk.host.config import CATALOG_COLUMNS
from radwalk.host.registry import suggest
from radwalk.inference.star import Star

OBSERVABLE_PAIRS = (("radius", "radius_err"), ("luminosity", "luminosity_err"), ("teff", "teff_err"))
DERIVED_FLAG = "luminosity_derived"  # optional: L was computed from the row's R and T_eff
_TRUE, _FALSE = ("true", "yes", "y", "t", "1"), ("false", "no", "n", "f", "0", "")
FEH_PAIR = ("feh", "feh_err")

# Default unit of a value column that has none in the file (documented in the module docstring).
DEFAULT_UNITS = {"radius": "R_sun", "luminosity": "L_sun", "teff": "K", "feh": "dex"}

# Values outside these ranges belong to no star: most often a unit mix-up (a radius in km
# written without a unit, say).  Wide on purpose: white dwarfs to red supergiants
# (common practice, no source).
PLAUSIBLE = {
    "radius": (1e-3, 1e4, "R_sun", "R"),
    "luminosity": (1e-7, 1e8, "L_sun", "L"),
    "teff": (500.0, 1e6, "K", "T_eff"),
}

_FORMATS = {
    ".ecsv": "ascii.ecsv", ".fits": "fits", ".fit": "fits", ".fts": "fits", ".vot": "votable",
    ".votable": "votable", ".xml": "votable", ".csv": "ascii.csv", ".tsv": "ascii.tab",
}

_TEXT_FORMATS = ("ascii.csv", "ascii.tab")  # formats without declared column types

_SI_UNIT = {"radius": u.cm, "luminosity": u.erg / u.s}
_NOMINAL = {"radius": (u.R_sun, k.R_SUN), "luminosity": (u.L_sun, k.L_SUN)}
_KIND = {"radius": "a length", "luminosity": "a power (luminosity)", "teff": "a temperature"}


class CatalogEntry(NamedTuple):
    """One catalog row: its index (0-based), id, the Star (None when the row is unusable) and why."""

    row: int
    id: str
    star: Star | None
    error: str | None


@dataclass
class Catalog:
    """A read catalog.

    Attributes
    ----------
    path : Path
        The file read.
    format : str
        The astropy reader used (``"guessed"`` when astropy chose).
    fingerprint : str
        sha256 (hex) of the file's bytes.
    stars : list of CatalogEntry
        One entry a row, in file order: (row_index, id, Star or None, error or None).
    notices : list of str
        One-line notes for the user (columns read in default units, reader warnings).
    columns : dict
        Our column name -> the file column read for it.
    units : dict
        Our column name -> the unit the file's values were read in.
    observed : list of dict
        Per row, name -> (value, error) in R_sun, L_sun, K (NaN where missing or unreadable),
        also for rows that failed, so a summary table can show what the file said.
    """

    path: Path
    format: str
    fingerprint: str
    stars: list = field(default_factory=list)
    notices: list = field(default_factory=list)
    columns: dict = field(default_factory=dict)
    units: dict = field(default_factory=dict)
    observed: list = field(default_factory=list)

    def __len__(self) -> int:
        return len(self.stars)

    def __iter__(self):
        return iter(self.stars)

    @property
    def n_usable(self) -> int:
        return sum(1 for e in self.stars if e.star is not None)


def file_sha256(path, block: int = 1 << 20) -> str:
    """sha256 (hex) of a file's bytes, read in blocks."""
    h = hashlib.sha256()
    with open(path, "rb") as f:
        for chunk in iter(lambda: f.read(block), b""):
            h.update(chunk)
    return h.hexdigest()


def unit_name(unit) -> str:
    """A unit as users write it here (R_sun and L_sun rather than astropy's solRad, solLum)."""
    for name in ("R_sun", "L_sun", "M_sun"):
        if unit == u.Unit(name):
            return name
    return unit.to_string() or "dimensionless"


def _format_for(path: Path) -> str | None:
    suffixes = [s.lower() for s in path.suffixes]
    if suffixes and suffixes[-1] in (".gz", ".bz2", ".xz") and len(suffixes) > 1:
        suffixes = suffixes[:-1]
    return _FORMATS.get(suffixes[-1]) if suffixes else None


def _one_line(text: str) -> str:
    return " ".join(str(text).split())


def _read_table(path: Path, notices: list):
    from astropy.table import Table

    if not path.exists():
        raise CatalogError(f"catalog file {path} does not exist")
    if path.is_dir():
        raise CatalogError(f"catalog {path} is a folder, not a table file")
    try:
        size = path.stat().st_size
        with open(path, "rb"):
            pass
    except OSError as exc:
        raise CatalogError(f"cannot read catalog {path}: {exc.strerror}") from None
    if size == 0:
        raise CatalogError(f"catalog file {path} is empty")
    fmt = _format_for(path)
    lines = _text_lines(path) if fmt in _TEXT_FORMATS else None
    # Reader warnings (a FITS file with several tables, a VOTable quirk) become notices
    # instead of stray warnings; unrecognised units are caught again column by column below.
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            if fmt in _TEXT_FORMATS:
                # every cell as the text written: ids are text ("007" and "1e3" must not become 7.0 and 1000.0,
                # nor "1" and "1.0" one id); the value columns are parsed as numbers below
                from astropy.io import ascii as astropy_ascii

                table = Table.read(lines, format=fmt, converters={"*": [astropy_ascii.convert_numpy(str)]})
            else:
                table = Table.read(path, format=fmt) if fmt else Table.read(path)
        except Exception as exc:  # noqa: BLE001 - every reader failure means "not a readable table"
            if fmt is None and type(exc).__name__ == "IORegistryError":
                raise CatalogError(
                    f"cannot read catalog {path}: astropy recognises no table format in it; use an ECSV, "
                    "FITS, VOTable or CSV file (.ecsv, .fits, .vot, .csv)") from None
            how = f"as {fmt}" if fmt else "(format guessed from the content)"
            raise CatalogError(
                f"cannot read catalog {path} {how}: {type(exc).__name__}: {_one_line(exc)[:300]}"
            ) from None
    for w in caught:
        msg = f"reading {path.name}: {_one_line(w.message)}"
        if msg not in notices:
            notices.append(msg)
    if len(table) == 0:
        raise CatalogError(f"catalog {path} has no rows (columns: {', '.join(table.colnames) or 'none'})")
    if lines is not None:
        table.meta["radwalk_fields"] = _field_counts(lines, "\t" if fmt == "ascii.tab" else ",", len(table))
    return table, fmt or "guessed"


def _text_lines(path: Path) -> list[str]:
    """A text catalog's lines, a UTF-8 byte-order mark (as spreadsheets save) removed."""
    raw = path.read_bytes()
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = raw[:exc.start].count(b"\n") + 1
        raise CatalogError(f"catalog {path} is not UTF-8 text (byte {raw[exc.start]:#04x} on line {line}); save it "
                           "as UTF-8") from None
    return text.splitlines(keepends=True)


def _field_counts(lines: list[str], delimiter: str, n_rows: int):
    """(header fields, [fields of each data row]), or None when the rows cannot be matched to the table's."""
    import csv

    rows = [r for r in csv.reader(lines, delimiter=delimiter) if any(cell.strip() for cell in r)]
    if len(rows) != n_rows + 1:  # comment or other lines the reader skipped: no row-by-row count
        return None
    return len(rows[0]), [len(r) for r in rows[1:]]


def _resolve_columns(table, path: Path, mapping: dict, notices: list) -> dict:
    """Our name -> file column name, for the columns present; raises for missing required ones."""
    unknown = set(mapping) - set(CATALOG_COLUMNS)
    if unknown:
        bad = sorted(unknown)[0]
        raise CatalogError(f"column map names {bad!r}{suggest(bad, CATALOG_COLUMNS)}, which is not a catalog "
                           f"column; known: {', '.join(CATALOG_COLUMNS)}")
    taken: dict = {}
    for ours, theirs in mapping.items():
        if theirs in taken:
            raise CatalogError(f"column {theirs!r} is mapped to both {taken[theirs]} and {ours} in [columns]; "
                               "each observable needs its own column")
        taken[theirs] = ours
    available = list(table.colnames)
    lower = {}
    for name in available:
        lower.setdefault(name.lower(), []).append(name)
    found = {}
    for ours in CATALOG_COLUMNS:
        want = mapping.get(ours, ours)
        if want in available:
            found[ours] = want
        elif ours not in mapping and len(lower.get(want.lower(), [])) == 1:
            # "Teff" for "teff": unambiguous, so read it, and say so.
            found[ours] = lower[want.lower()][0]
            notices.append(f"column {found[ours]!r} read as {ours}")

    def label(ours):
        want = mapping.get(ours, ours)
        return want if want == ours else f"{want} (for {ours})"

    missing = []  # (what to show, the file column wanted)
    if "id" not in found:
        missing.append((label("id"), mapping.get("id", "id")))
    pairs = []
    for value, err in (*OBSERVABLE_PAIRS, FEH_PAIR):
        have_v, have_e = value in found, err in found
        if have_v and not have_e:
            missing.append((label(err), mapping.get(err, err)))
        elif have_e and not have_v:
            missing.append((label(value), mapping.get(value, value)))
        elif have_v and have_e and (value, err) != FEH_PAIR:
            pairs.append(value)
    if not pairs and not any(v in found or e in found for v, e in OBSERVABLE_PAIRS):
        missing.append(("at least one of " + ", ".join(f"{label(v)} + {label(e)}" for v, e in OBSERVABLE_PAIRS),
                        None))
    if missing:
        unused = [c for c in available if c not in found.values()]
        shown = ", ".join(m + (suggest(want, unused) if want else "") for m, want in missing)
        mapped = "" if mapping else "; the run config's [columns] table maps other names"
        raise CatalogError(
            f"catalog {path.name} lacks required column(s): {shown}; "
            f"columns in the file: {', '.join(available) or 'none'}{mapped}"
        )
    return found


def _column_unit(col, ours: str, path: Path):
    unit = getattr(col, "unit", None)
    if isinstance(unit, u.UnrecognizedUnit):
        raise CatalogError(f"column {col.name!r} of {path.name} has unit {str(unit)!r}, which astropy does not "
                           f"recognise; use e.g. {DEFAULT_UNITS[ours.removesuffix('_err')]}")
    return unit


def _factor(unit, base: str, colname: str, path: Path) -> float:
    """Multiplier from the column's unit to R_sun, L_sun, K or dex."""
    if base == "feh":
        if unit in (u.dex, u.dimensionless_unscaled):
            return 1.0
        raise CatalogError(f"column {colname!r} of {path.name} has unit {unit}; [Fe/H] must be in dex "
                           "or without a unit")
    if base == "teff":
        try:
            return float(unit.to(u.K))
        except u.UnitsError:
            raise CatalogError(f"column {colname!r} of {path.name} has unit {unit}, which is not "
                               f"{_KIND[base]} in K") from None
    nominal, cgs = _NOMINAL[base]
    if unit == nominal:
        return 1.0  # exact: the file's R_sun / L_sun is the nominal one
    try:
        return float(unit.to(_SI_UNIT[base])) / cgs
    except u.UnitsError:
        raise CatalogError(f"column {colname!r} of {path.name} has unit {unit}, which is not "
                           f"{_KIND[base]}") from None


def _as_floats(col, n: int, ours: str, bad: dict):
    """Column values as floats with NaN for masked cells; unreadable cells recorded in ``bad``."""
    data = col.data if hasattr(col, "data") else np.asarray(col)
    mask = np.ma.getmaskarray(data) if np.ma.isMaskedArray(data) else np.zeros(n, dtype=bool)
    raw = np.ma.getdata(data)
    if raw.dtype.kind in "fiu":
        out = raw.astype(float)
    elif raw.dtype.kind == "b":
        out = np.full(n, np.nan)
        for i in range(n):
            bad.setdefault(i, f"{ours} is a true/false value, not a number")
    else:
        out = np.full(n, np.nan)
        for i, cell in enumerate(raw):
            if mask[i]:
                continue
            text = cell.decode("utf-8", "replace") if isinstance(cell, bytes) else str(cell)
            if text.strip() == "":
                continue
            try:
                out[i] = float(text)
            except ValueError:
                bad.setdefault(i, f"{ours} value {text.strip()!r} is not a number")
    out[mask] = np.nan
    return out


def _ids(table, colname: str, path: Path) -> list[str]:
    col = table[colname]
    data = col.data if hasattr(col, "data") else np.asarray(col)
    mask = np.ma.getmaskarray(data) if np.ma.isMaskedArray(data) else np.zeros(len(table), dtype=bool)
    raw = np.ma.getdata(data)
    ids, empty = [], []
    for i, cell in enumerate(raw):
        if isinstance(cell, bytes):
            cell = cell.decode("utf-8", "replace")
        text = "" if mask[i] else str(cell)
        if isinstance(cell, (float, np.floating)) and not math.isfinite(cell):
            text = ""
        if text.strip() == "":
            empty.append(i + 1)
        ids.append(text)
    if empty:
        shown = ", ".join(map(str, empty[:10])) + (" ..." if len(empty) > 10 else "")
        raise CatalogError(f"catalog {path.name}: {len(empty)} row(s) have no id (rows {shown}); "
                           "every star needs an id")
    seen: dict[str, list[int]] = {}
    for i, s in enumerate(ids):
        seen.setdefault(s, []).append(i + 1)
    dups = {s: rows for s, rows in seen.items() if len(rows) > 1}
    if dups:
        shown = "; ".join(f"{s!r} (rows {', '.join(map(str, r))})" for s, r in list(dups.items())[:10])
        more = f"; and {len(dups) - 10} more" if len(dups) > 10 else ""
        raise CatalogError(f"catalog {path.name} has duplicate ids: {shown}{more}")
    return ids


def _flags(table, n: int, bad: dict, notices: list) -> np.ndarray:
    """The optional ``luminosity_derived`` column as bools [n] (False without the column); bad cells in ``bad``."""
    names = [c for c in table.colnames if c.lower() == DERIVED_FLAG]
    out = np.zeros(n, dtype=bool)
    if not names:
        return out
    if len(names) > 1:
        raise CatalogError(f"catalog has {len(names)} columns named {DERIVED_FLAG} in different cases: "
                           f"{', '.join(names)}")
    if names[0] != DERIVED_FLAG:
        notices.append(f"column {names[0]!r} read as {DERIVED_FLAG}")
    col = table[names[0]]
    data = col.data if hasattr(col, "data") else np.asarray(col)
    mask = np.ma.getmaskarray(data) if np.ma.isMaskedArray(data) else np.zeros(n, dtype=bool)
    for i, cell in enumerate(np.ma.getdata(data)):
        if mask[i]:
            continue
        if isinstance(cell, bytes):
            cell = cell.decode("utf-8", "replace")
        if isinstance(cell, (float, np.floating)) and math.isnan(cell):
            continue
        text = str(cell).strip().lower()
        if isinstance(cell, (bool, np.bool_)):
            out[i] = bool(cell)
        elif isinstance(cell, (int, np.integer, float, np.floating)) and float(cell) in (0.0, 1.0):
            out[i] = float(cell) == 1.0
        elif text in _TRUE or text in _FALSE:
            out[i] = text in _TRUE
        else:
            bad.setdefault(i, f"{DERIVED_FLAG} value {str(cell).strip()!r} is not true/false, yes/no or 1/0")
    return out


def _plausible(key: str, value: float) -> str | None:
    lo, hi, unit, label = PLAUSIBLE[key]
    if math.isfinite(value) and value > 0 and not lo <= value <= hi:
        return (f"{label} = {value:.4g} {unit} is outside {lo:g} to {hi:g} {unit}, the range of any star "
                "(a unit mix-up?)")
    return None


def read_catalog(path, columns: dict | None = None) -> Catalog:
    """Reads a catalog file into validated star records.

    Parameters
    ----------
    path : str or Path
        ECSV, FITS, VOTable or CSV file (or anything astropy.table can guess).
    columns : dict, optional
        Our column name -> the file's column name (the run config's ``[columns]``).

    Returns
    -------
    Catalog
        Entries in file order; rows that cannot be used carry ``star=None`` and the reason.

    Raises
    ------
    CatalogError
        For a file that cannot be used as a whole (see the module docstring).
    """
    path = Path(path).expanduser()
    notices: list[str] = []
    table, fmt = _read_table(path, notices)
    mapping = dict(columns or {})
    found = _resolve_columns(table, path, mapping, notices)
    ids = _ids(table, found["id"], path)
    n = len(table)

    bad: dict[int, str] = {}
    values: dict[str, np.ndarray] = {}
    units: dict[str, str] = {}
    for value_name, err_name in (*OBSERVABLE_PAIRS, FEH_PAIR):
        if value_name not in found:
            continue
        vcol, ecol = table[found[value_name]], table[found[err_name]]
        vunit = _column_unit(vcol, value_name, path)
        eunit = _column_unit(ecol, err_name, path)
        if vunit is None:
            vunit = u.Unit(DEFAULT_UNITS[value_name])
            if value_name != "feh":
                notices.append(f"{value_name} has no unit in the file; read as {DEFAULT_UNITS[value_name]}")
        if eunit is None:
            eunit = vunit
            if value_name != "feh":
                notices.append(f"{err_name} has no unit in the file; read as {unit_name(vunit)}, "
                               f"the unit of {value_name}")
        fv = _factor(vunit, value_name, vcol.name, path)
        fe = _factor(eunit, value_name, ecol.name, path)
        values[value_name] = _as_floats(vcol, n, value_name, bad) * fv
        values[err_name] = _as_floats(ecol, n, err_name, bad) * fe
        units[value_name], units[err_name] = unit_name(vunit), unit_name(eunit)

    counts = table.meta.get("radwalk_fields")
    if counts:
        width, per_row = counts
        for i, got in enumerate(per_row):
            if got < width:  # astropy fills a short row with empty cells: they would read as "not measured"
                bad.setdefault(i, f"the row has {got} of {width} fields (a truncated line?)")
    derived = _flags(table, n, bad, notices)
    nan = np.full(n, np.nan)
    entries, observed = [], []
    for i in range(n):
        row = {name: float(values.get(name, nan)[i]) for name in CATALOG_COLUMNS if name != "id"}
        observed.append({v: (row[v], row[e]) for v, e in (*OBSERVABLE_PAIRS, FEH_PAIR)})
        reason = bad.get(i)
        star = None
        feh = row["feh"] if math.isfinite(row["feh"]) or math.isfinite(row["feh_err"]) else None
        if reason is None and feh is not None and not math.isfinite(feh):
            reason = "[Fe/H] is missing but its uncertainty is given (leave both empty: not measured)"
        if reason is None:
            try:
                star = Star.from_user_units(
                    ids[i], row["radius"], row["radius_err"], row["luminosity"], row["luminosity_err"],
                    row["teff"], row["teff_err"], feh=feh, feh_err=row["feh_err"] if feh is not None else None,
                    luminosity_derived=bool(derived[i]))
            except CatalogError as exc:
                reason = str(exc)
        if reason is None:
            for v, _ in OBSERVABLE_PAIRS:
                reason = reason or _plausible(v, row[v])
            if reason is not None:
                star = None
        entries.append(CatalogEntry(i, ids[i], star, None if star is not None else f"row {i + 1}: {reason}"))
    return Catalog(path=path.resolve(), format=fmt, fingerprint=file_sha256(path), stars=entries,
                   notices=notices, columns=found, units=units, observed=observed)
