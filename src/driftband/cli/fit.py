"""``driftband fit``: DFE models fitted to spectra files."""

from __future__ import annotations

import argparse
import logging
import os
from typing import Any

from .._io import after_commit, check_outputs, file_record, provenance
from ..defaults import DEFAULT_MODELS, HEADLINES, format_edges
from ..effect import DEFAULT_EFFECT, EFFECTS
from ..exceptions import OptionError
from ._common import CommaList, Subparsers, add_common_arguments, add_subcommand, parse_kv

log = logging.getLogger("driftband")

EXAMPLES = """
driftband fit spectra.json -o fit.json --bands-tsv bands.tsv
driftband fit spectra.json --dfe gamma --misorientation fixed:0 --demography equilibrium -o fit.json
driftband fit published_table.tsv --dfe gamma,discrete --bands 0,1,10,100 -o fit.json
driftband fit a.json b.json --label a.json=lakesnail,b.json=pondsnail -o fit.json
"""


def parse_bands(text: str) -> tuple[float, ...]:
    """``0,1,10,100`` → edges on |Ne·s| (validated)."""
    from ..fit.options import check_edges

    try:
        edges = tuple(float(v) for v in text.split(","))
    except ValueError:
        raise OptionError(
            f"--bands {text!r}: give comma-separated numbers, e.g. 0,1,10,100"
        ) from None
    return check_edges(edges)


def add_parser(subparsers: Subparsers) -> None:
    """Register ``driftband fit``."""
    p = add_subcommand(
        subparsers,
        "fit",
        help="fit DFE models to spectra",
        description=(
            "Fit Poisson-random-field models of the distribution of fitness effects (DFE) "
            "of new selected-class mutations, with demographic nuisance parameters, to each "
            "population's neutral and selected spectra; report the share of new mutations "
            "in bands of |Ne*s| (S = 4*Ne*s). Input: spectra JSON from 'driftband spectra' "
            "or a plain TSV table of spectra (see the README, 'Refitting published "
            "spectra')."
        ),
        examples=EXAMPLES,
    )
    p.add_argument(
        "spectra",
        nargs="+",
        metavar="SPECTRA",
        help="spectra file(s): JSON from 'driftband spectra', or a TSV table",
    )
    p.add_argument("--neutral", default="4fold", help="neutral class name (default 4fold)")
    p.add_argument("--selected", default="0fold", help="selected class name (default 0fold)")
    p.add_argument(
        "--dfe",
        default=",".join(DEFAULT_MODELS),
        help="comma-separated DFE families: gamma, lognormal, discrete; "
        "NAME+beneficial adds a beneficial point mass (default: %(default)s)",
    )
    p.add_argument(
        "--beneficial",
        action="store_true",
        help="add a beneficial point mass (beneficial_fraction at beneficial_S > 0) to "
        "every family",
    )
    p.add_argument(
        "--misorientation",
        default="free",
        metavar="free|fixed:E",
        help="ancestral misidentification rate: estimated ('free', default; "
        "unfolded spectra only) or fixed, e.g. fixed:0",
    )
    p.add_argument(
        "--demography",
        default="nuisance",
        metavar="MODEL",
        help="how the size history enters: nuisance (per-class nuisance factors, "
        "default), equilibrium (constant size), one-change, two-change or growth (a "
        "size history fitted to the neutral class; S then refers to the current size), "
        "auto (the history with the lowest AIC, per population) or demes:FILE (a fixed "
        "history from a demes file, one deme per population)",
    )
    p.add_argument(
        "--headline",
        choices=HEADLINES,
        default=HEADLINES[0],
        help="headline shares: averaged over the families by Akaike weight (default; "
        "the interval needs --bootstrap and refits every family) or from the AIC-best "
        "family alone",
    )
    p.add_argument(
        "--bands",
        default=format_edges(),
        metavar="EDGES",
        help="band edges on |Ne*s| (default %(default)s; the last band is open)",
    )
    p.add_argument(
        "--effect",
        choices=EFFECTS,
        default=DEFAULT_EFFECT,
        help="what s in |Ne*s| is: the heterozygote effect (default; fitness 1:1+s:1+2s, "
        "S = 4Ne*s) or the homozygote effect (fitness 1:1+s/2:1+s, S = 2Ne*s)",
    )
    p.add_argument(
        "--populations", metavar="P,...", help="fit only these populations (default: all)"
    )
    p.add_argument(
        "--label",
        action=CommaList,
        metavar="FILE=NAME,...",
        help="prefix the populations of each FILE with NAME/",
    )
    p.add_argument("-o", "--output", required=True, help="fit file (JSON)")
    p.add_argument("--bands-tsv", help="band table (TSV) of the AIC-best models")
    b = p.add_argument_group("bootstrap")
    b.add_argument(
        "--bootstrap",
        type=int,
        default=0,
        metavar="B",
        help="block-bootstrap replicates (default 0: none)",
    )
    b.add_argument(
        "--level",
        type=float,
        default=0.95,
        help="confidence level of percentile intervals (default 0.95)",
    )
    b.add_argument("--seed", type=int, default=1, help="random seed (default 1)")
    b.add_argument(
        "--workers",
        type=int,
        default=None,
        metavar="N",
        help="local worker processes for the refits (default: the cores "
        "available; 1 runs them in this process)",
    )
    b.add_argument(
        "--scheduler",
        metavar="ADDRESS",
        help="run the refits on the dask.distributed scheduler at ADDRESS, e.g. "
        "tcp://HOST:8786 (needs driftband[cluster]; see the README, "
        "'Running on a cluster')",
    )
    add_common_arguments(p)
    p.set_defaults(runner=run)


def run(args: argparse.Namespace) -> int:
    """Run ``driftband fit``."""
    from .._parallel import connect, resolve_workers
    from ..effect import core_edges
    from ..fit.bootstrap import check_bootstrap_settings
    from ..fit.models import parse_models
    from ..fit.options import FitOptions, parse_misorientation

    check_outputs([args.output, args.bands_tsv], args.force)
    edges = core_edges(parse_bands(args.bands), args.effect)
    eps = parse_misorientation(args.misorientation)
    try:
        models = tuple(parse_models(args.dfe, args.beneficial, edges))
    except OptionError as err:
        msg = str(err)
        raise OptionError(msg if msg.startswith("--") else f"--dfe {args.dfe}: {msg}") from None
    options = FitOptions(
        args.neutral,
        args.selected,
        models,
        eps,
        args.demography,
        edges,
        args.headline,
        args.effect,
    )
    check_bootstrap_settings(args.bootstrap, args.level)
    labels = parse_kv(args.label, "--label")
    unknown = [k for k in labels if k not in args.spectra]
    if unknown:
        raise OptionError(
            f"--label {unknown[0]}=...: {unknown[0]} is not one of the spectra files given"
        )
    resolve_workers(args.workers)
    if args.scheduler and not args.bootstrap:
        log.warning("--scheduler is used by the bootstrap only; without --bootstrap it is ignored")
    # connect before the point estimates: an unreachable scheduler fails at once
    client = connect(args.scheduler) if args.scheduler and args.bootstrap else None
    try:
        return _run(args, options, labels, client)
    finally:
        if client is not None:
            client.close()


def _run(args: argparse.Namespace, options: Any, labels: dict[str, str], client: Any) -> int:
    from ..fit.api import LabelledSpectra, block_spectra, covered_bp, fit_spectra
    from ..fit.io import fit_document, write_bands_tsv, write_fit_json
    from ..spectra.io import read_spectra

    sets = [LabelledSpectra(p, read_spectra(p), str(labels.get(p, ""))) for p in args.spectra]
    wanted = args.populations.split(",") if args.populations else None
    fits = fit_spectra(sets, options, wanted)
    for pf in fits:
        log.warning(
            "%s: best model %s, share with |Ne*s| < %g: %.3f",
            pf.population,
            pf.best.model,
            options.shown_edges[1],
            pf.best.shares[0],
        )
    if args.bootstrap:
        from ..fit.bootstrap import bootstrap_fits

        bootstrap_fits(
            fits,
            block_spectra(sets),
            options,
            args.bootstrap,
            covered=covered_bp(sets),
            seed=args.seed,
            level=args.level,
            workers=args.workers,
            scheduler=client,
        )
    opts = options.to_dict() | {"bootstrap": args.bootstrap, "seed": args.seed, "level": args.level}
    prov = provenance(opts, {"spectra": [file_record(p) for p in args.spectra]})
    if args.bootstrap:  # how the refits ran (does not change the results)
        prov["execution"] = {
            "scheduler": args.scheduler or None,
            "workers": None if args.scheduler else args.workers,
        }
    write_fit_json(fit_document(fits, opts, prov), args.output, force=args.force)
    if args.bands_tsv:
        write_bands_tsv(fits, args.bands_tsv, options.effect, force=args.force)
    if not args.quiet:
        after_commit(lambda: print(os.path.abspath(args.output)))
    return 0
