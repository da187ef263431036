"""``driftband compare``: tests between pairs of populations."""

from __future__ import annotations

import argparse
import logging

from .._io import check_outputs
from ..defaults import COMPARE_TESTS
from ..exceptions import OptionError
from ._common import CommaList, Subparsers, add_common_arguments, add_subcommand, parse_kv

log = logging.getLogger("driftband")

EXAMPLES = """
driftband compare fit.json -o compare.tsv
driftband compare fit.json --pairs lake:spring --model gamma -o compare.tsv
driftband compare snails.json slugs.json --relative-mutation-rate slugs/north=1.3 -o compare.tsv
"""


def add_parser(subparsers: Subparsers) -> None:
    """Register ``driftband compare``."""
    p = add_subcommand(
        subparsers,
        "compare",
        help="test whether populations differ",
        description=(
            "For every pair of populations (or those named): a likelihood-ratio test of one "
            "shared DFE (shared_dfe_lrt), the difference in the share of new mutations with "
            "|Ne*s| < 1 with its bootstrap interval and p-value (neutral_share_difference; "
            "needs fits made with --bootstrap), and two tests that only Ne differs (one "
            "distribution of s, S scaled by an Ne ratio fitted freely, ne_only_free_lrt, or "
            "taken from neutral diversity, ne_only_lrt). p-values of the likelihood-ratio "
            "tests are adjusted for linked sites when the fits have a bootstrap of enough "
            "blocks, and across pairs (Holm by default)."
        ),
        examples=EXAMPLES,
    )
    p.add_argument("fits", nargs="+", metavar="FIT", help="fit file(s) from 'driftband fit'")
    p.add_argument("--pairs", metavar="A:B,...", help="pairs to compare (default: all)")
    p.add_argument(
        "--model",
        default="auto",
        help="DFE model compared: 'auto' (default: the lowest AIC summed over all "
        "populations, as in 'driftband run') or a model fitted to every population",
    )
    p.add_argument(
        "--relative-mutation-rate",
        action=CommaList,
        metavar="POP=R,...",
        help="mutation rate of each POP relative to the others (default 1)",
    )
    p.add_argument(
        "--tests",
        default=",".join(COMPARE_TESTS),
        help=f"tests to run, comma-separated (default: all, {', '.join(COMPARE_TESTS)})",
    )
    p.add_argument(
        "--adjust",
        default="holm",
        help="multiple-testing method of statsmodels.stats.multitest "
        "(default holm; e.g. fdr_bh, bonferroni)",
    )
    p.add_argument("-o", "--output", required=True, help="comparison table (TSV)")
    add_common_arguments(p)
    p.set_defaults(runner=run)


def run(args: argparse.Namespace) -> int:
    """Run ``driftband compare``."""
    from ..compare import compare_fits, write_compare_tsv
    from ..compare.api import study_model
    from ..fit.io import read_fit_files

    check_outputs([args.output], args.force)
    tests = tuple(t.strip() for t in args.tests.split(",") if t.strip())
    mu = parse_kv(args.relative_mutation_rate, "--relative-mutation-rate", float)
    options, fits = read_fit_files(args.fits)
    model = args.model
    if model == "auto":
        model = study_model(fits, [m.name for m in options.models])
    else:
        try:
            options.model(model)
        except OptionError as err:
            raise OptionError(f"--model {model}: {err}") from None
    rows = compare_fits(
        sorted(fits, key=lambda pf: pf.population),
        options,
        model,
        pairs=args.pairs.split(",") if args.pairs else None,
        tests=tests,
        relative_mu=mu,
        adjust=args.adjust,
        require_bootstrap=args.tests != ",".join(COMPARE_TESTS),
    )
    write_compare_tsv(rows, args.output, force=args.force)
    return 0
