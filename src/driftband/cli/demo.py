"""``driftband demo``: ``driftband run`` on the invented demo study shipped with the package."""

from __future__ import annotations

import argparse
import sys

from ._common import Subparsers, add_common_arguments, add_subcommand, progress_on_stderr

__all__ = ["add_parser", "run"]

DESCRIPTION = """\
Run the whole job on the demo study shipped with driftband: an imaginary freshwater snail
with a large lake population and a small, isolated spring population (about 7 times
fewer individuals, the same distribution of s), plus outgroup samples of a sister species;
a 2.1 Mb reference with 420 genes, a VCF of 34 samples, all simulated with
'driftband simulate' (invented data, nothing real). The bootstrap is reduced to 50
replicates on 2 workers so that the demo takes a few minutes; the small population's
effectively neutral share comes out clearly larger than the large one's, as the
simulation's truth says it should (lake 0.19, spring 0.34). Prints where the report is."""

EXAMPLES = """
driftband demo
driftband demo --out-dir /tmp/driftband-demo
driftband demo --out-dir demo-full --bootstrap 200 --workers 4
"""


def add_parser(subparsers: Subparsers) -> argparse.ArgumentParser:
    """Register the ``demo`` subcommand."""
    p = add_subcommand(
        subparsers,
        "demo",
        help="run the whole job on the shipped demo study and print where the report is",
        description=DESCRIPTION,
        examples=EXAMPLES,
    )
    p.add_argument(
        "--out-dir",
        default="driftband-demo",
        metavar="DIR",
        help="output folder (default: ./driftband-demo)",
    )
    p.add_argument(
        "--bootstrap",
        type=int,
        default=50,
        metavar="B",
        help="bootstrap replicates (default 50; the study file says 200)",
    )
    p.add_argument(
        "--workers", type=int, default=2, metavar="N", help="worker processes (default 2)"
    )
    add_common_arguments(p)
    p.set_defaults(runner=run, commit_at_end=False)
    return p


def run(args: argparse.Namespace) -> int:
    """Run ``driftband demo``."""
    from ..run import demo_study, run_study

    study = demo_study()
    progress_on_stderr(args)
    res = run_study(
        study, args.out_dir, force=args.force, replicates=args.bootstrap, workers=args.workers
    )
    print(
        f"The demo report is at {res.report}\n(summary for the terminal: "
        f"{res.paths['summary']}; all results in {res.out_dir})",
        file=sys.stdout,
    )
    return 0
