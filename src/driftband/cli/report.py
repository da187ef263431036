"""``driftband report``: the HTML report (and a Markdown summary) of fitted populations."""

from __future__ import annotations

import argparse
import logging
import os
from typing import Any

from .._io import after_commit, atomic_output, check_outputs, file_record, provenance
from ..exceptions import OptionError
from ._common import CommaList, Subparsers, add_common_arguments, add_subcommand

log = logging.getLogger("driftband")

EXAMPLES = r"""
driftband report fit.json -o report.html
driftband report fit.json --compare compare.tsv --spectra spectra.json -o report.html \
    --summary summary.md
driftband report fit.json --spectra snails=snails.json --spectra slugs=slugs.json -o report.html
"""


def add_parser(subparsers: Subparsers) -> None:
    """Register ``driftband report``."""
    p = add_subcommand(
        subparsers,
        "report",
        help="write the HTML report of a study",
        description=(
            "One self-contained HTML file for people deciding from the results: the share "
            "of new selected-class mutations with |Ne*s| < 1 per population with its "
            "interval, the comparisons between populations in plain words, per population "
            "the fit to the spectra, model comparison, DFE parameters, diversity and "
            "McDonald-Kreitman/alpha, then provenance, conventions and cautions. Plots are "
            "embedded; the file opens from disk without network access. The report "
            "renders the numbers of its input files and computes no statistics itself."
        ),
        examples=EXAMPLES,
    )
    p.add_argument("fit", metavar="FIT", help="fit file (JSON) from 'driftband fit'")
    p.add_argument("--compare", metavar="TSV", help="comparison table from 'driftband compare'")
    p.add_argument(
        "--spectra",
        action=CommaList,
        metavar="[LABEL=]FILE,...",
        help="spectra file(s) from 'driftband spectra', comma-separated, for diversity "
        "statistics; "
        "LABEL= as given to 'driftband fit --label' when the fit pooled "
        "several files",
    )
    p.add_argument("-o", "--output", required=True, help="the HTML report")
    p.add_argument("--summary", metavar="MD", help="also write a Markdown summary")
    add_common_arguments(p)
    p.set_defaults(runner=run)


def _spectra_args(items: list[str] | None) -> list[tuple[str, str]]:
    """``[LABEL=]FILE`` items → (key, path); the key is the label or the path."""
    out: list[tuple[str, str]] = []
    for it in items or []:
        label, sep, path = it.partition("=")
        if sep and label and path and not os.path.exists(it):
            out.append((label, path))
        else:
            out.append((it, it))
    keys = [k for k, _ in out]
    dup = next((k for k in keys if keys.count(k) > 1), None)
    if dup is not None:
        raise OptionError(f"--spectra {dup}: given twice")
    return out


def run(args: argparse.Namespace) -> int:
    """Run ``driftband report``."""
    import matplotlib

    from ..report import (
        build_report,
        build_summary_md,
        read_compare_tsv,
        read_fit_doc,
        read_spectra_doc,
    )

    outputs = [args.output, args.summary]
    if args.summary and os.path.abspath(args.summary) == os.path.abspath(args.output):
        raise OptionError("--summary and -o name the same file")
    check_outputs(outputs, args.force)
    spectra_args = _spectra_args(args.spectra)
    fit_doc = read_fit_doc(args.fit)
    rows = read_compare_tsv(args.compare) if args.compare else None
    spectra: dict[str, Any] = {}
    for key, path in spectra_args:
        doc = read_spectra_doc(path)
        if key == path:
            spectra[path] = doc
        else:
            spectra[key] = doc
    inputs: dict[str, Any] = {"fit": file_record(args.fit)}
    if args.compare:
        inputs["compare"] = file_record(args.compare)
    if spectra_args:
        inputs["spectra"] = [
            file_record(p) | ({"label": k} if k != p else {}) for k, p in spectra_args
        ]
    prov = provenance({"output": args.output, "summary": args.summary}, inputs)
    prov["environment"]["matplotlib"] = matplotlib.__version__
    html_text = build_report(fit_doc, rows, spectra, prov)
    md_text = build_summary_md(fit_doc, rows, spectra, prov) if args.summary else None
    with atomic_output(args.output, force=args.force) as fh:
        fh.write(html_text)
    if md_text is not None:
        with atomic_output(args.summary, force=args.force) as fh:
            fh.write(md_text)
    if not args.quiet:
        after_commit(lambda: print(os.path.abspath(args.output)))
    return 0
