"""The report stage: a self-contained HTML report and a Markdown summary of a study.

The report computes nothing statistical: it renders the numbers held in a fit file
(``driftband fit``), a comparison table (``driftband compare``) and spectra files
(``driftband spectra``) — the answer first (the effectively neutral share per population),
then the comparisons in plain words, the per-population details, provenance, conventions
and cautions.

Examples
--------
>>> from driftband.report import build_report, read_fit_doc      # doctest: +SKIP
>>> html = build_report(read_fit_doc("fit.json"), None, None, {})  # doctest: +SKIP
"""

from __future__ import annotations

from typing import Any

from ._inputs import (
    check_compare_rows,
    check_fit_doc,
    check_spectra_doc,
    read_compare_tsv,
    read_fit_doc,
    read_spectra_doc,
)

__all__ = [
    "build_report",
    "build_summary_md",
    "check_compare_rows",
    "check_fit_doc",
    "check_spectra_doc",
    "read_compare_tsv",
    "read_fit_doc",
    "read_spectra_doc",
]


def build_report(
    fit_doc: dict[str, Any],
    compare_rows: list[dict[str, Any]] | None,
    spectra_docs: dict[str, dict[str, Any]] | None,
    provenance: dict[str, Any],
) -> str:
    """The HTML report of a study, as one self-contained document.

    Plots are SVG images embedded as ``data:`` URIs; the page needs no network access and
    no script. Every string taken from the inputs is HTML-escaped.

    Parameters
    ----------
    fit_doc : dict
        A fit document (schema ``driftband-fit``; see :mod:`driftband.fit.io`).
    compare_rows : list of dict or None
        Rows of ``compare.tsv`` as read by :func:`read_compare_tsv` (numeric columns as
        float or None); None when no comparison was made.
    spectra_docs : dict of str to dict, or None
        Spectra documents (schema ``driftband-spectra``) keyed by the label the fit gave
        their populations (``--label FILE=LABEL``) or by their path; they supply the
        diversity statistics. None or empty: none shown.
    provenance : dict
        Provenance of the report itself (as :func:`driftband._io.provenance` makes it:
        ``software``, ``version``, ``date``, ``command``, ``options``, ``inputs`` with
        checksums, ``environment``), shown and embedded as JSON.

    Returns
    -------
    str
        The HTML document (UTF-8 text).

    Raises
    ------
    InputError
        Documents that are not of their kind or do not fit together (the message names
        the record).
    """
    from ._html import render_html
    from ._view import collect

    return render_html(collect(fit_doc, compare_rows, spectra_docs, provenance))


def build_summary_md(
    fit_doc: dict[str, Any],
    compare_rows: list[dict[str, Any]] | None,
    spectra_docs: dict[str, dict[str, Any]] | None,
    provenance: dict[str, Any],
) -> str:
    """The Markdown summary: the report's headline numbers, comparisons and warnings.

    Parameters
    ----------
    fit_doc, compare_rows, spectra_docs, provenance
        As for :func:`build_report`.

    Returns
    -------
    str
        Markdown text; its second paragraph (``Generated ...``) holds the only volatile
        values (date and version).

    Raises
    ------
    InputError
        As for :func:`build_report`.
    """
    from ._markdown import render_markdown
    from ._view import collect

    return render_markdown(collect(fit_doc, compare_rows, spectra_docs, provenance))
