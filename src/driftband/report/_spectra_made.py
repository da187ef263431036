"""How the spectra of a report were made, in words, from a spectra file's provenance.

One home for the report's account of the spectra options (filters, regions, callable
sites), the projection (from the most called gene copies to n), the blocks, and what was
read, used, skipped and dropped, by reason. The HTML report and the Markdown summary both
show these rows. No I/O here.
"""

from __future__ import annotations

from typing import Any

from ..spectra.callable import CALLABLE_SOURCES

__all__ = ["spectra_made_rows"]


def _n(v: Any) -> str:
    try:
        return f"{int(v):,}"
    except (TypeError, ValueError):
        return "NA"


def _reasons(counts: dict[str, Any]) -> str:
    parts = [f"{k} {_n(v)}" for k, v in counts.items() if v]
    return ", ".join(parts) or "none"


def spectra_made_rows(doc: dict[str, Any]) -> list[tuple[str, str]]:
    """(item, value) rows saying how one spectra file was made.

    Parameters
    ----------
    doc : dict
        A parsed spectra file (schema ``driftband-spectra``).

    Returns
    -------
    list of (str, str)
        ``filters``, ``callable sites``, ``projection``, ``blocks``, ``records``,
        ``records skipped`` and ``sites dropped``; items the file does not record (an
        older version, or spectra from a table or a simulation) say so.

    Examples
    --------
    >>> doc = {"populations": {"lake": {"n": 20}}, "blocks": [{}] * 3,
    ...        "provenance": {"options": {"min_dp": 8, "block_size": 100000},
    ...                       "counts": {"called_copies_max": {"lake": 24}}}}
    >>> dict(spectra_made_rows(doc))["projection"]
    'lake: 24 → 20 gene copies'
    """
    prov = doc.get("provenance") or {}
    opts = prov.get("options") or {}
    counts = prov.get("counts") or {}
    rows: list[tuple[str, str]] = []
    filt = []
    if opts.get("min_gq") is not None:
        filt.append(f"genotypes with GQ < {opts['min_gq']} set missing")
    if opts.get("min_dp") is not None:
        filt.append(f"genotypes with DP < {opts['min_dp']} set missing")
    if opts.get("pass_only"):
        filt.append("only records with FILTER PASS or '.'")
    if opts.get("regions"):
        filt.append("regions " + ", ".join(map(str, opts["regions"])))
    rows.append(("filters", "; ".join(filt) if filt else "none" if opts else "not recorded"))
    cs = prov.get("callable_sites") or {}
    src = str(cs.get("source") or "")
    rows.append(("callable sites", CALLABLE_SOURCES.get(src, "not recorded")))
    called = counts.get("called_copies_max") or {}
    pops = doc.get("populations") or {}
    proj = []
    for name, p in pops.items():
        n = p.get("n")
        m = called.get(name)
        proj.append(f"{name}: {_n(m)} → {_n(n)} gene copies" if m else f"{name}: n = {_n(n)}")
    rule = "" if opts.get("project") is not None else opts.get("projection_rule") or ""
    rows.append(("projection", "; ".join(proj) + (f" ({rule})" if rule and called else "")))
    nb = len(doc.get("blocks") or [])
    if opts.get("blocks"):
        how = f"from the BED {opts['blocks']}"
    elif opts.get("block_size"):
        how = f"of {_n(opts['block_size'])} bp"
    else:
        how = "(as given)"
    rows.append(("blocks", f"{_n(nb)} blocks {how}"))
    if "records_read" in counts:
        used = counts.get("records_used") or {}
        rows.append(
            (
                "records",
                f"{_n(counts['records_read'])} read; used: "
                + (", ".join(f"{k} {_n(v)}" for k, v in used.items()) or "none"),
            )
        )
    rows.append(("records skipped", _reasons(doc.get("skipped") or {})))
    dropped = counts.get("dropped_sites") or {}
    rows.append(
        (
            "sites dropped",
            "; ".join(
                f"{r}: " + ", ".join(f"{c} {_n(v)}" for c, v in per.items())
                for r, per in dropped.items()
            )
            or "none",
        )
    )
    return rows
