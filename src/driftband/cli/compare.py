"""``driftband compare``: tests between pairs of populations."""

from __future__ import annotations

import argparse
import logging

from .._io import check_outputs
from ..exceptions import InputError, OptionError
from ._common import add_common_arguments, add_subcommand, parse_kv

log = logging.getLogger("driftband")

EXAMPLES = """
driftband compare fit.json -o compare.tsv
driftband compare fit.json --pairs lake:spring --model gamma -o compare.tsv
driftband compare snails.json slugs.json --relative-mutation-rate slugs/north=1.3 -o compare.tsv
"""



def add_parser(subparsers) -> None:
    """Register ``driftband compare``."""
    p = add_subcommand(
        subparsers, "compare", help="test whether populations differ",
        description=(
            "For every pair of populations (or those named): a likelihood-ratio test of one "
            "shared DFE, the difference in the share of new mutations with |Ne*s| < 1 with "
            "its bootstrap interval and p-value (needs fits made with --bootstrap), and the "
            "test that only Ne differs (one distribution of s, S scaled by the Ne ratio "
            "taken from neutral diversity). p-values are adjusted across pairs (Holm)."),
        examples=EXAMPLES)
    p.add_argument("fits", nargs="+", metavar="FIT", help="fit file(s) from 'driftband fit'")
    p.add_argument("--pairs", metavar="A:B,...", help="pairs to compare (default: all)")
    p.add_argument("--model", default="gamma",
                   help="DFE model compared (must be fitted to both; default gamma)")
    p.add_argument("--relative-mutation-rate", action="append", metavar="POP=R",
                   help="mutation rate of POP relative to the others (default 1; repeatable)")
    p.add_argument("--tests", default=",".join(("shared_dfe_lrt", "neutral_share_difference",
                                                 "ne_only_lrt")),
                   help="tests to run (default: all three)")
    p.add_argument("--adjust", default="holm",
                   help="multiple-testing method of statsmodels.stats.multitest "
                        "(default holm; e.g. fdr_bh, bonferroni)")
    p.add_argument("-o", "--output", required=True, help="comparison table (TSV)")
    add_common_arguments(p)
    p.set_defaults(runner=run)


def load_populations(paths: list[str]) -> tuple[dict[str, dict], dict]:
    """Populations of several fit files (names must be unique) and the first options."""
    from ..fit.io import read_fit_json

    pops: dict[str, dict] = {}
    where: dict[str, str] = {}
    options = None
    for path in paths:
        doc = read_fit_json(path)
        options = options or doc["options"]
        for name, p in doc["populations"].items():
            if name in pops:
                raise InputError(f"population {name!r} is in both {where[name]} and {path}; "
                                 "refit with --label FILE=NAME to tell them apart", path)
            pops[name] = p
            where[name] = path
    return pops, options



def run(args: argparse.Namespace) -> int:
    """Run ``driftband compare``."""
    from ..compare import TESTS, adjust_pvalues, compare_pair, resolve_pairs, write_compare_tsv
    from ..fit.models import DfeModel

    check_outputs([args.output], args.force)
    tests = tuple(t.strip() for t in args.tests.split(",") if t.strip())
    bad = [t for t in tests if t not in TESTS]
    if bad:
        raise OptionError(f"--tests: unknown test {bad[0]!r}; choose from {', '.join(TESTS)}")
    fam, _, extra = args.model.partition("+")
    model = DfeModel(fam, extra == "beneficial")
    mu = parse_kv(args.relative_mutation_rate, "--relative-mutation-rate", float)
    pops, options = load_populations(args.fits)
    model = DfeModel(model.family, model.beneficial, tuple(options.get("band_edges_nes",
                                                                        (0, 1, 10, 100))))
    for name, v in mu.items():
        if name not in pops:
            raise OptionError(f"--relative-mutation-rate {name}=...: no population {name!r}")
        if not v > 0:
            raise OptionError(f"--relative-mutation-rate {name}={v}: must be > 0")
    pairs = resolve_pairs(args.pairs.split(",") if args.pairs else None, sorted(pops),
                          "--pairs", "the fit files hold")
    if not pairs:
        raise InputError("compare needs at least two populations; the fit files hold "
                         f"{', '.join(pops) or 'none'}")
    if "neutral_share_difference" in tests and args.tests != ",".join(TESTS):
        for a, b in pairs:
            for nm in (a, b):
                if not pops[nm].get("bootstrap"):
                    raise InputError(f"population {nm!r}: the neutral-share difference needs "
                                     "bootstrap replicates; rerun 'driftband fit' with "
                                     "--bootstrap B")
    rows = []
    cache: dict = {}
    for a, b in pairs:
        log.info("comparing %s and %s", a, b)
        rows += compare_pair(a, b, pops[a], pops[b], model, options, mu, tests, cache)
    if any("no bootstrap" in r.note for r in rows):
        log.warning("neutral_share_difference has no interval or p-value: the fits have no "
                    "bootstrap (rerun 'driftband fit' with --bootstrap B)")
    adjust_pvalues(rows, args.adjust)
    write_compare_tsv(rows, args.output, force=args.force)
    return 0
