"""Where the callable sites come from, and whether a VCF looks variants-only.

Sites of the classes absent from the VCF count as callable monomorphic sites (entry 0 of
the spectra). That is right for an all-sites VCF, or for sites inside a callable-sites BED
(``--callable``, e.g. from depth filters), but a VCF from a variant caller usually holds
variant records only: without a mask, every class site it has no record for is taken as
callable, however poorly it was covered. That inflates the callable counts and biases θ
and the fit wherever coverage was patchy. :func:`callable_status` says which case a run
is in, from its counts; the spectra file records it (``provenance.callable_sites``) and
the report shows it.
"""

from __future__ import annotations

from typing import Any

from .counting import RegionCounts

__all__ = [
    "CALLABLE_SOURCES",
    "SPARSE_COVERAGE",
    "callable_status",
    "sites_with_records",
    "sparse_message",
    "variants_only_message",
]

#: An all-sites VCF (one with monomorphic records) without a mask is called *sparse*
#: when fewer than this share of the callable class sites hold a record: the sites
#: without one are still counted as callable monomorphic sites.
SPARSE_COVERAGE = 0.9

#: Where the callable sites of a spectra file come from (``provenance.callable_sites.source``),
#: in words for the summary and the report.
CALLABLE_SOURCES = {
    "mask": "the class sites inside the callable-sites BED (--callable)",
    "all_sites_vcf": "the class sites; the VCF holds monomorphic records (an all-sites VCF)",
    "stated": "every class site, as stated (--all-sites-callable); the VCF is variants-only",
    "assumed": (
        "every class site, ASSUMED: the VCF is variants-only and no callable-sites BED "
        "was given, so sites without a record count as callable monomorphic sites"
    ),
}


def callable_status(
    total: RegionCounts, has_mask: bool, stated: bool, callable_sites: int | None = None
) -> dict[str, Any]:
    """Where the callable sites come from, and whether the VCF looks variants-only.

    A VCF *looks variants-only* when none of its records at callable class sites is
    monomorphic (ALT ``.`` or a placeholder only) although some are usable: its callers
    wrote variant records only, so every class site without a record counts as a callable
    monomorphic site (entry 0), right only if every such site was in fact callable.

    Parameters
    ----------
    total : RegionCounts
        Summed counts.
    has_mask : bool
        A callable-sites BED was given.
    stated : bool
        The user stated that every class site was callable.
    callable_sites : int, optional
        Callable class sites of the plan, for ``record_coverage``.

    Returns
    -------
    dict
        ``variants_only`` (bool), ``monomorphic_records`` (int), ``source`` (``"mask"``,
        ``"all_sites_vcf"``, ``"stated"`` or ``"assumed"``) and ``warn`` (bool: a
        variants-only VCF whose absent sites are assumed callable); with
        ``callable_sites``, also ``record_coverage``: the share of the callable class
        sites that hold a record (near 1 for an all-sites VCF without a mask), and
        ``sparse``: an all-sites VCF without a mask whose records cover fewer than
        :data:`SPARSE_COVERAGE` of the callable class sites.
    """
    used = sites_with_records(total)
    variants_only = total.monomorphic == 0 and used > 0
    if has_mask:
        source = "mask"
    elif not variants_only:
        source = "all_sites_vcf"
    elif stated:
        source = "stated"
    else:
        source = "assumed"
    out: dict[str, Any] = {
        "variants_only": variants_only,
        "monomorphic_records": int(total.monomorphic),
        "source": source,
        "warn": source == "assumed",
    }
    if callable_sites:
        out["record_coverage"] = round(used / callable_sites, 6)
        out["sparse"] = source == "all_sites_vcf" and used < SPARSE_COVERAGE * callable_sites
    return out


def sites_with_records(total: RegionCounts) -> int:
    """Callable class sites that hold a record (usable in the spectra, or removed by a
    skipped record such as a multiallelic one)."""
    rows = next(iter(total.rows.values()), None)  # every population has every usable record
    used = int(rows[:, 4].sum()) if rows is not None else 0
    return used + int(total.removed[:, 2].sum())


def variants_only_message(vcf: str, absent_sites: int | None = None) -> str:
    """The warning for a variants-only VCF without a callable-sites mask (one line)."""
    many = f" ({absent_sites:,} of them)" if absent_sites is not None else ""
    return (
        f"{vcf} looks variants-only (no monomorphic record at the class sites): every class "
        f"site without a record{many} is counted as callable and monomorphic (entry 0), "
        "which inflates the callable sites and biases theta and the fit wherever coverage "
        "was patchy; give a callable-sites BED (--callable, e.g. from depth filters) or an "
        "all-sites VCF, or state --all-sites-callable if every class site was callable"
    )


def sparse_message(vcf: str, coverage: float, absent_sites: int) -> str:
    """The warning for an all-sites VCF with gaps and no callable-sites BED (one line)."""
    return (
        f"{vcf} holds monomorphic records (an all-sites VCF) but they cover only "
        f"{coverage:.1%} of the callable class sites: the {absent_sites:,} class sites "
        "without a record are counted as callable and monomorphic (entry 0), which "
        "inflates the callable sites and biases theta and the fit if they were not "
        "callable; give a callable-sites BED (--callable) or state --all-sites-callable "
        "if every class site was callable"
    )
