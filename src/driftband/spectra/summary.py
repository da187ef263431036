"""Terminal summary of spectra: skipped records and per-population diversity (for stderr)."""

from __future__ import annotations

import math
from typing import Any

from ._types import SpectraSet
from .callable import CALLABLE_SOURCES

__all__ = ["summary_lines"]


def summary_lines(ss: SpectraSet) -> list[str]:
    """Human-readable summary: skip counts and per-population diversity (for stderr).

    Parameters
    ----------
    ss : SpectraSet
        Spectra with their diversity statistics (``PopulationSpectra.stats``).

    Returns
    -------
    list of str
        The skipped records by reason, then a table of ``n``, callable sites, segregating
        sites, pi, Watterson's theta and Tajima's D per population and class, and piN/piS.
    """
    out = []
    sk = ss.skipped
    if sk:
        out.append("skipped records: " + ", ".join(f"{k} {v:,}" for k, v in sk.items()))
    counts = ss.provenance.get("counts") or {}
    for reason, per in (counts.get("dropped_sites") or {}).items():
        each = ", ".join(f"{c} {n:,}" for c, n in per.items())
        out.append(f"dropped sites, {reason}: {sum(per.values()):,} ({each})")
    cs = ss.provenance.get("callable_sites") or {}
    if cs:
        src = str(cs.get("source"))
        out.append(f"callable sites: {CALLABLE_SOURCES.get(src, src)}")
    hdr = (
        f"{'population':<14} {'class':<8} {'n':>5} {'sites':>12} {'segregating':>11} "
        f"{'pi':>10} {'theta_W':>10} {'Tajima_D':>9}"
    )
    out.append(hdr)
    for name, pop in ss.populations.items():
        for c, cs in pop.classes.items():
            st = pop.stats.get(c, {})
            out.append(
                f"{name:<14} {c:<8} {pop.n:>5} {cs.sites:>12,} "
                f"{_fmt(st.get('segregating'), 0):>11} {_fmt(st.get('pi')):>10} "
                f"{_fmt(st.get('theta_w')):>10} {_fmt(st.get('tajimas_d'), 3):>9}"
            )
        r = pop.stats.get("piN_piS")
        out.append(
            f"{name:<14} piN/piS = {_fmt(r, 4)}"
            + ("" if r is not None else " (needs classes 0fold and 4fold)")
        )
    return out


def _fmt(v: Any, digits: int | None = None) -> str:
    if v is None or (isinstance(v, float) and not math.isfinite(v)):
        return "NA"
    if digits == 0:
        return f"{float(v):,.0f}"
    if digits is not None:
        return f"{float(v):.{digits}f}"
    return f"{float(v):.3e}"
