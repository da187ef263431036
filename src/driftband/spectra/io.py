"""Reading and writing spectra files.

The spectra file is JSON, schema ``driftband-spectra`` version 2::

    {
      "schema": "driftband-spectra", "schema_version": 2,
      "blocks": [{"chrom": "1", "start": 0, "end": 100000, "name": ""}, ...],
      "populations": {
        "lake": {
          "n": 20, "folded": false, "polarisation": "aa",
          "classes": {
            "0fold": {"sfs": [...n+1 ints...], "sites": 123456,
                      "block_sfs": [[...], ...], "block_sites": [...]},
            "4fold": {...}
          },
          "stats": {"0fold": {"pi": ..., "theta_w": ..., "tajimas_d": ...,
                              "segregating": ...}, ..., "piN_piS": ...}
        }
      },
      "skipped": {"multiallelic": 3, ...},
      "provenance": {...}
    }

``sfs`` and ``sites`` are the sums of the block arrays (checked on reading).
A long TSV (columns ``population, class, n, folded, derived_copies, site_count``:
``site_count`` sites of the class carry ``derived_copies`` derived, or minor, copies)
is written beside it for pipelines, and the same table, or a wide one, can be read back
(reviewer mode, see :func:`read_spectra_tsv`).
"""

from __future__ import annotations

import csv
import json
import logging
import os
from typing import Any

import numpy as np

from .._io import atomic_output, json_ready, load_json
from ..exceptions import InputError
from ._types import (
    Block,
    ClassSpectrum,
    PopulationSpectra,
    SpectraSet,
    _counts_array,
    spectrum_length,
)
from .stats import diversity

log = logging.getLogger("driftband")

__all__ = [
    "SCHEMA",
    "LONG_TSV_COLUMNS",
    "SCHEMA_VERSION",
    "SCHEMA_VERSIONS_READ",
    "add_diversity",
    "check_spectra_schema",
    "read_spectra",
    "read_spectra_json",
    "read_spectra_tsv",
    "spectra_to_dict",
    "upgrade_spectra_doc",
    "write_spectra_json",
    "write_spectra_tsv",
]

SCHEMA = "driftband-spectra"
#: Version 2 names the sample table ``samples`` among the provenance's inputs (version 1:
#: ``popmap``) and records the largest number of called gene copies per population
#: (``provenance.counts.called_copies_max``). Version 1 files are read, translated.
SCHEMA_VERSION = 2
SCHEMA_VERSIONS_READ = (1, 2)


def add_diversity(pop: PopulationSpectra, neutral: str = "4fold", selected: str = "0fold") -> None:
    """Fill ``pop.stats`` with π, θ_W, Tajima's D per class and π_N/π_S."""
    stats: dict[str, Any] = {}
    for name, cs in pop.classes.items():
        stats[name] = diversity(cs.sfs, pop.n, pop.folded, cs.sites)
    if neutral in stats and selected in stats:
        pis, pin = stats[neutral]["pi"], stats[selected]["pi"]
        stats["piN_piS"] = pin / pis if pis and np.isfinite(pis) else float("nan")
    pop.stats = stats


def spectra_to_dict(ss: SpectraSet) -> dict[str, Any]:
    """The JSON document of a :class:`SpectraSet`."""
    pops = {}
    for name, pop in ss.populations.items():
        pops[name] = {
            "n": pop.n,
            "folded": pop.folded,
            "polarisation": pop.polarisation,
            "classes": {
                c: {
                    "sfs": cs.sfs,
                    "sites": cs.sites,
                    "block_sfs": cs.block_sfs,
                    "block_sites": cs.block_sites,
                }
                for c, cs in pop.classes.items()
            },
            "stats": pop.stats,
        }
    return json_ready(
        {
            "schema": SCHEMA,
            "schema_version": SCHEMA_VERSION,
            "blocks": [
                {"chrom": b.chrom, "start": b.start, "end": b.end, "name": b.name}
                for b in ss.blocks
            ],
            "populations": pops,
            "skipped": ss.skipped,
            "provenance": ss.provenance,
        }
    )


def write_spectra_json(ss: SpectraSet, path: str | os.PathLike, force: bool = False) -> None:
    """Write a spectra file atomically (see the module docstring for the schema)."""
    doc = spectra_to_dict(ss)
    with atomic_output(path, force=force) as fh:
        # json.dumps uses the C encoder (json.dump streams through the Python one).
        fh.write(json.dumps(doc, separators=(",", ":")))
        fh.write("\n")


#: Header of the long spectra table: one row per spectrum entry.
LONG_TSV_COLUMNS = ["population", "class", "n", "folded", "derived_copies", "site_count"]
#: Column names of spectra tables before this version, and what to write instead.
_OLD_TSV_COLUMNS = {
    "sites": "'callable_sites' (wide layout) or 'site_count' (long layout)",
    "count": "'derived_copies'",
    "count_index": "'derived_copies'",
}


def write_spectra_tsv(ss: SpectraSet, path: str | os.PathLike, force: bool = False) -> None:
    """Write the long spectra table (:data:`LONG_TSV_COLUMNS`): ``site_count`` sites
    with ``derived_copies`` derived copies, one row per entry."""
    with atomic_output(path, force=force, newline="") as fh:
        w = csv.writer(fh, delimiter="\t", lineterminator="\n")
        w.writerow(LONG_TSV_COLUMNS)
        for name, pop in ss.populations.items():
            for c, cs in pop.classes.items():
                for i, v in enumerate(cs.sfs.tolist()):
                    w.writerow([name, c, pop.n, str(pop.folded).lower(), i, v])


def _fail(path: str | os.PathLike | None, msg: str) -> InputError:
    return InputError(msg, path)


def _numbers(v: Any, key: str, path: str | os.PathLike, depth: int) -> np.ndarray:
    """A list (``depth`` 1) or list of equal-length lists (2) of finite numbers >= 0."""
    rows = v if depth == 2 else [v]
    if not isinstance(rows, list) or not rows and depth == 2:
        raise _fail(path, f"{key} must be a non-empty list of lists of counts")
    for r in rows:
        if not isinstance(r, list) or not r:
            raise _fail(path, f"{key} must be a non-empty list of counts")
        for x in r:
            if isinstance(x, bool) or not isinstance(x, int | float):
                raise _fail(path, f"{key}: {json.dumps(x)} is not a number")
            if not np.isfinite(x) or x < 0:
                raise _fail(path, f"{key}: {x!r} is not a finite count >= 0")
    if len({len(r) for r in rows}) != 1:
        raise _fail(path, f"{key}: the block rows differ in length")
    out = np.asarray(rows, dtype=np.float64)
    return out if depth == 2 else out[0]


def _whole(v: Any, key: str, path: str | os.PathLike, minimum: int = 0) -> int:
    """A whole number >= ``minimum`` (JSON integer, or a float with no fraction)."""
    ok = not isinstance(v, bool) and isinstance(v, int | float) and np.isfinite(v)
    if not ok or v != int(v) or v < minimum:
        raise _fail(path, f"{key}: {json.dumps(v)} is not a whole number >= {minimum}")
    return int(v)


def read_spectra_json(path: str | os.PathLike) -> SpectraSet:
    """Read and validate a spectra file.

    Every value is checked: counts finite and non-negative, ``n`` a whole number, ``folded``
    true or false, site totals whole numbers equal to the sums of the spectra.

    Raises
    ------
    InputError
        Not JSON, another schema or version, or an impossible or inconsistent value (the
        population, class and key are named).
    """
    doc = load_json(path, "spectra JSON file")
    check_spectra_schema(doc, path)
    doc = upgrade_spectra_doc(doc, path)
    popsd = doc.get("populations")
    if not isinstance(popsd, dict) or not popsd:
        raise _fail(path, '"populations" must be a non-empty object')
    try:
        blocks = [
            Block(str(b["chrom"]), int(b["start"]), int(b["end"]), str(b.get("name", "")))
            for b in doc.get("blocks", [])
        ]
    except (KeyError, TypeError, ValueError, OverflowError) as err:
        raise _fail(path, f'"blocks": malformed entry ({type(err).__name__}: {err})') from None
    pops: dict[str, PopulationSpectra] = {}
    for name, p in popsd.items():
        where = f"population {name!r}"
        if not isinstance(p, dict):
            raise _fail(path, f"{where}: must be an object")
        n = _whole(p.get("n"), f'{where} "n"', path, minimum=1)
        folded = p.get("folded")
        if not isinstance(folded, bool):
            raise _fail(path, f'{where} "folded": {json.dumps(folded)} is not true or false')
        m = spectrum_length(n, folded)
        cls = p.get("classes")
        if not isinstance(cls, dict) or not cls:
            raise _fail(path, f'{where} "classes" must be a non-empty object')
        classes = {}
        for c, cd in cls.items():
            wc = f"{where} class {c!r}"
            if not isinstance(cd, dict):
                raise _fail(path, f"{wc}: must be an object")
            if "block_sfs" not in cd and "sfs" not in cd:
                raise _fail(path, f'{wc}: no "sfs"')
            if "block_sites" not in cd and "sites" not in cd:
                raise _fail(path, f'{wc}: no "sites"')
            if "block_sfs" in cd:
                bsf = _numbers(cd["block_sfs"], f'{wc} "block_sfs"', path, 2)
            else:
                bsf = _numbers(cd["sfs"], f'{wc} "sfs"', path, 1)[None, :]
            if "block_sites" in cd:
                bsv = cd["block_sites"]
                if not isinstance(bsv, list) or not bsv:
                    raise _fail(path, f'{wc} "block_sites" must be a non-empty list')
                bsites = np.array(
                    [_whole(v, f'{wc} "block_sites"', path) for v in bsv], dtype=np.int64
                )
            else:
                bsites = np.array([_whole(cd["sites"], f'{wc} "sites"', path)], np.int64)
            if "sites" in cd and _whole(cd["sites"], f'{wc} "sites"', path) != bsites.sum():
                raise _fail(
                    path,
                    f'{wc}: "sites" is {cd["sites"]} but "block_sites" add up to {bsites.sum()}',
                )
            if bsf.shape[1] != m:
                raise _fail(
                    path,
                    f"{wc}: spectra must have {m} entries for n={n}{' folded' if folded else ''}",
                )
            if bsf.shape[0] != bsites.shape[0]:
                raise _fail(
                    path,
                    f'{wc}: "block_sfs" has {bsf.shape[0]} blocks, "block_sites" {bsites.shape[0]}',
                )
            cs = ClassSpectrum(_counts_array(bsf), bsites)
            if "sfs" in cd:
                sfs = _numbers(cd["sfs"], f'{wc} "sfs"', path, 1)
                if sfs.shape != cs.sfs.shape or not np.allclose(cs.sfs, sfs, rtol=1e-9, atol=1e-6):
                    raise _fail(path, f'{wc}: "sfs" is not the sum of "block_sfs"')
            if not np.allclose(bsf.sum(axis=1), bsites, rtol=1e-9, atol=1e-6):
                raise _fail(
                    path,
                    f"{wc}: the spectrum entries add up to {bsf.sum():g}, not to the "
                    f"{bsites.sum()} sites (block by block)",
                )
            classes[str(c)] = cs
        stats = p.get("stats") or {}
        if not isinstance(stats, dict):
            raise _fail(path, f'{where} "stats" must be an object')
        pops[str(name)] = PopulationSpectra(
            str(name), n, folded, classes, str(p.get("polarisation", "given")), dict(stats)
        )
    skipped = doc.get("skipped", {})
    prov = doc.get("provenance", {})
    if not isinstance(skipped, dict) or not isinstance(prov, dict):
        raise _fail(path, '"skipped" and "provenance" must be objects')
    return SpectraSet(pops, blocks, dict(skipped), dict(prov))


def check_spectra_schema(doc: Any, path: str | os.PathLike | None = None) -> None:
    """Raise InputError unless ``doc`` is a spectra document of the supported version.

    Parameters
    ----------
    doc : object
        A parsed JSON document.
    path : path-like, optional
        Its file, named in the error message.

    Raises
    ------
    InputError
        Not a dict with ``"schema": "driftband-spectra"``, or another ``schema_version``.
    """
    if not isinstance(doc, dict) or doc.get("schema") != SCHEMA:
        raise _fail(
            path,
            f'not a spectra file (expected "schema": "{SCHEMA}"; make one '
            "with 'driftband spectra')",
        )
    ver = doc.get("schema_version")
    if ver not in SCHEMA_VERSIONS_READ:
        raise _fail(
            path,
            f"spectra schema version {ver!r} is not supported "
            f"(this driftband reads versions {', '.join(map(str, SCHEMA_VERSIONS_READ))})",
        )


def upgrade_spectra_doc(doc: dict[str, Any], path: str | os.PathLike | None = None) -> dict:
    """A spectra document of an older schema version translated to this one.

    Version 1 named the sample table ``popmap`` among the provenance's inputs; it is
    renamed ``samples``, and a warning says that the file was translated. Documents of
    the current version are returned as they are.

    Parameters
    ----------
    doc : dict
        A parsed spectra file whose schema has been checked (:func:`check_spectra_schema`).
    path : path-like, optional
        Its file, named in the warning.

    Returns
    -------
    dict
    """
    if doc.get("schema_version") == SCHEMA_VERSION:
        return doc
    out = dict(doc)
    prov = dict(out.get("provenance") or {})
    inputs = prov.get("inputs")
    if isinstance(inputs, dict) and "popmap" in inputs:
        prov["inputs"] = {("samples" if k == "popmap" else k): v for k, v in inputs.items()}
    out["provenance"] = prov
    out["schema_version"] = SCHEMA_VERSION
    log.warning(
        "%s: spectra file of schema version %s (an older driftband), read as version %d "
        "(the input 'popmap' is now 'samples'; no record of the called gene copies); "
        "rerun 'driftband spectra' to write the current version",
        os.fspath(path) if path is not None else "spectra document",
        doc.get("schema_version"),
        SCHEMA_VERSION,
    )
    return out


def read_spectra_tsv(path: str | os.PathLike, folded: bool | None = None) -> SpectraSet:
    """Read spectra from a plain TSV (reviewer mode: spectra published in a table).

    Two layouts are accepted (header line required; ``#`` lines are comments):

    * **wide**: ``population, class, callable_sites, c0, c1, ..., cn`` -- one row per
      population and class, its callable sites, then the site counts for 0..n derived
      copies (the count columns may have any names; their number fixes n). If the ``c0``
      entry is empty, it is filled as ``callable_sites`` minus the other entries.
    * **long**: ``population, class, derived_copies, site_count``, one row per entry:
      ``site_count`` sites with ``derived_copies`` derived copies. Optional columns ``n``
      and ``folded``.

    Tables with the column names of earlier versions (``sites``, ``count``,
    ``count_index``) are refused with the names to use.

    Parameters
    ----------
    path : path-like
    folded : bool, optional
        Whether the counts are minor-allele (folded) spectra of length n//2+1; wide tables
        cannot tell, so they are taken as unfolded unless this is True. Long tables with a
        ``folded`` column say it themselves.
    """
    try:
        with open(path, encoding="utf-8", newline="") as fh:
            rows = [r for r in csv.reader(fh, delimiter="\t") if r and not r[0].startswith("#")]
    except FileNotFoundError:
        raise _fail(path, "file not found") from None
    if len(rows) < 2:
        raise _fail(path, "empty spectra table (a header and at least one row are needed)")
    header = [h.strip().lower() for h in rows[0]]
    if header[:2] != ["population", "class"]:
        raise InputError("the first two columns must be 'population' and 'class'", path, 1)
    for old, new in _OLD_TSV_COLUMNS.items():
        if old in header:
            raise InputError(f"column {old!r} is now called {new}; rename it", path, 1)
    long = "derived_copies" in header and "site_count" in header
    if not long and (len(header) < 4 or header[2] != "callable_sites"):
        raise InputError(
            "expected the wide layout (population, class, callable_sites, c0, c1, ...) "
            "or the long one (population, class, derived_copies, site_count)",
            path,
            1,
        )
    data: dict[str, dict[str, dict[int, float]]] = {}
    sites: dict[tuple[str, str], int] = {}
    fold_of: dict[str, bool] = {}
    n_of: dict[str, int] = {}
    for ln, r in enumerate(rows[1:], start=2):
        r = [x.strip() for x in r]
        if len(r) != len(header):
            raise InputError(f"{len(r)} fields, the header has {len(header)}", path, ln)
        pop, cls = r[0], r[1]
        try:
            if long:
                rec = dict(zip(header, r))
                k = int(rec["derived_copies"])
                v: float = float(rec["site_count"])
                v = int(v) if v == int(v) else v
                if k < 0 or v < 0:
                    raise ValueError("negative value")
                if k in data.setdefault(pop, {}).setdefault(cls, {}):
                    raise ValueError(f"derived_copies {k} given twice")
                data[pop][cls][k] = v
                if rec.get("folded"):
                    fold_of[pop] = rec["folded"].lower() in ("true", "1", "yes")
                if rec.get("n"):
                    n_of[pop] = int(rec["n"])
            else:
                total = int(float(r[2]))
                vals = r[3:]
                counts: dict[int, float] = {k: int(float(x)) for k, x in enumerate(vals) if x != ""}
                if 0 not in counts:
                    counts[0] = total - sum(counts.values())
                if any(v < 0 for v in counts.values()):
                    raise ValueError("negative count (or entries exceed 'callable_sites')")
                data.setdefault(pop, {})[cls] = counts
                sites[(pop, cls)] = total
        except ValueError as err:
            raise InputError(f"not a valid number ({err})", path, ln) from None
    pops = {}
    for pop, classes in data.items():
        is_folded = fold_of.get(pop, bool(folded))
        if long and pop in n_of:
            n = n_of[pop]
        elif is_folded:
            raise _fail(path, f"population {pop!r}: folded spectra need an 'n' column")
        else:
            n = max(max(c) for c in classes.values())
        length = spectrum_length(n, is_folded)
        out = {}
        for cls, counts in classes.items():
            arr = np.zeros(length, dtype=np.float64)
            for k, v in counts.items():
                if k >= length:
                    raise _fail(
                        path,
                        f"population {pop!r} class {cls!r}: derived_copies {k} beyond "
                        f"the spectrum length {length}",
                    )
                arr[k] = v
            if not long and len(counts) != length:
                raise _fail(
                    path,
                    f"population {pop!r} class {cls!r}: {len(counts)} entries, "
                    f"others of this population have {length}",
                )
            if (pop, cls) in sites and arr.sum() != sites[(pop, cls)]:
                raise _fail(
                    path,
                    f"population {pop!r} class {cls!r}: entries add up to "
                    f"{arr.sum()}, not to callable_sites={sites[(pop, cls)]}",
                )
            out[cls] = ClassSpectrum.from_total(_counts_array(arr))
        ps = PopulationSpectra(pop, n, is_folded, out, "fold" if is_folded else "given")
        add_diversity(ps)
        pops[pop] = ps
    return SpectraSet(
        pops,
        [Block("all", 0, 0, "table")],
        {},
        {"source": {"path": os.path.abspath(path), "layout": "long" if long else "wide"}},
    )


def read_spectra(path: str | os.PathLike) -> SpectraSet:
    """Read a spectra file: JSON (``.json``) or a plain TSV table (anything else)."""
    p = os.fspath(path)
    with open(p, "rb") as fh:
        head = fh.read(64).lstrip(b"\xef\xbb\xbf \t\r\n")
    if head.startswith((b"{", b"[")):
        return read_spectra_json(p)
    return read_spectra_tsv(p)
