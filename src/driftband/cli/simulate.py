"""``driftband simulate``: forward Wright–Fisher simulation of a study (thin layer)."""

from __future__ import annotations

import argparse
import logging
import os
import shlex
import sys
import warnings
from collections.abc import Callable

from ..exceptions import DriftbandWarning, OptionError
from ._common import Subparsers, add_common_arguments, add_subcommand

log = logging.getLogger("driftband")

DESCRIPTION = """\
Simulate a study forward in time: diploid Wright-Fisher populations of many unlinked
sites of a selected class (0fold) and a neutral class (4fold), genotype fitnesses
1 : 1+s : 1+2s (S = 4Ns). Each generation every segregating mutation goes through
selection, p' = p(1+s+sp)/(1+2sp), then binomial drift; new mutations enter at a Poisson
rate of 2N*mu per site (theta = 4N*mu) with s drawn from the DFE (0fold) or s = 0 (4fold).
After a burn-in at the ancestral size (default 10N generations) and an optional size
history, n gene copies are sampled per population and their spectra written (entry 0:
monomorphic ancestral sites; entry n: sites fixed in the sample, plus substitutions of the
last --divergence-generations generations). With --write-vcf the study is also written as a
VCF on synthetic chromosomes, with its sites BED and sample table, and with --genome also
as a reference FASTA and GFF3 of real codons whose classification gives back that BED.

Conventions:
  --population NAME:N=SIZE,n=COPIES[,theta=T]   N = present diploid size, n = sampled
      gene copies (even for --write-vcf); theta overrides --theta for this population (taken
      at its ancestral size).
  --history [NAME=]AGO:SIZE,...   sizes in generations BEFORE the sample: SIZE holds
      from AGO generations ago back to the next older change; the oldest size is the
      ancestral size (burn-in). 0:4000,200:1000 = four-fold expansion 200 generations
      ago. Without NAME= it applies to every population.
  --true-dfe on S = 4*Nref*s for the reference size Nref (--reference-size, default the
      first population's ancestral size); all populations share the distribution of s,
      so their S scale with their own N. s is clipped at -0.5 (homozygote fitness >= 0).
  --theta is per site at Nref; the mutation rate mu = theta/(4*Nref) is shared by every
      population and epoch.
Simulated spectra are model truths, not estimates; they are meant for power analysis,
tests and demonstrations."""

EXAMPLES = """\
# one population at equilibrium, gamma DFE, 10^5 sites per class
driftband simulate --population lake:N=1000,n=20 --true-dfe gamma:shape=0.3,mean=200 \\
    --class-sites 100000 --seed 1 -o lake.spectra.json

# "only Ne differs": a large and a small population, with divergence and a VCF
driftband simulate --population lake:N=2000,n=20 --population spring:N=200,n=16 \\
    --true-dfe gamma:shape=0.3,mean=400 --divergence-generations 4000 \\
    --class-sites-0fold 200000 --class-sites-4fold 80000 --write-vcf study --genome \\
    --outgroup sister:n=4 --missing 0.02 --ref-derived 0.05 --seed 7 -o study.spectra.json

# a four-fold expansion 500 generations ago, beneficial mutations 1 %
driftband simulate --population pop:N=4000,n=30 --history 0:4000,500:1000 \\
    --true-dfe gamma:shape=0.2,mean=1000 --true-beneficial p=0.01,S=50 --seed 3 -o exp.json"""


def add_parser(subparsers: Subparsers) -> None:
    """Register ``driftband simulate``."""
    p = add_subcommand(
        subparsers,
        "simulate",
        help="forward Wright-Fisher simulation of a study (spectra, VCF)",
        description=DESCRIPTION,
        examples=EXAMPLES,
    )
    g = p.add_argument_group("populations and model")
    g.add_argument(
        "--population",
        action="append",
        default=[],
        metavar="NAME:N=SIZE,n=COPIES",
        help="a population (repeat for several); see the conventions above",
    )
    g.add_argument(
        "--history",
        action="append",
        default=[],
        metavar="[NAME=]AGO:SIZE,...",
        help="piecewise-constant size history in generations before the sample",
    )
    g.add_argument(
        "--theta", type=float, default=0.01, help="per-site theta = 4*Nref*mu (default: 0.01)"
    )
    g.add_argument(
        "--class-sites",
        type=int,
        default=100_000,
        metavar="L",
        help="sites per class (default: 100000)",
    )
    g.add_argument(
        "--class-sites-0fold",
        type=int,
        default=None,
        metavar="L",
        help="0fold sites (default: --class-sites)",
    )
    g.add_argument(
        "--class-sites-4fold",
        type=int,
        default=None,
        metavar="L",
        help="4fold sites (default: --class-sites)",
    )
    g.add_argument(
        "--true-dfe",
        default="gamma:shape=0.3,mean=200",
        metavar="DFE",
        help="DFE of 0fold mutations on S = 4*Nref*s: gamma:shape=B,mean=M (M = "
        "mean of -S), lognormal:mu=M,sigma=SD (of ln(-S)), fixed:S=X, or "
        "neutral (default: gamma:shape=0.3,mean=200)",
    )
    g.add_argument(
        "--true-beneficial",
        default=None,
        metavar="p=P,S=S",
        help="a share P of 0fold mutations is beneficial with S > 0",
    )
    g.add_argument(
        "--reference-size",
        type=float,
        default=None,
        metavar="NREF",
        help="Nref of the DFE's S axis and of --theta (default: the first "
        "population's ancestral size)",
    )
    g.add_argument(
        "--burn-in",
        type=int,
        default=None,
        metavar="GENERATIONS",
        help="generations at the ancestral size before the history (default: "
        "10 x each population's ancestral size)",
    )
    g.add_argument(
        "--divergence-generations",
        type=int,
        default=0,
        metavar="T",
        help="substitutions fixed in the last T generations count in entry n "
        "(time since the split from the outgroup; default: 0)",
    )
    g.add_argument(
        "--block-count",
        type=int,
        default=100,
        help="equal blocks per class, the bootstrap units (default: 100)",
    )
    g.add_argument(
        "--chromosomes",
        type=int,
        default=4,
        help="synthetic chromosomes of the layout (default: 4)",
    )
    g.add_argument(
        "--gene-codons",
        type=int,
        default=300,
        metavar="CODONS",
        help="codons per gene at most, in the layout (default: 300)",
    )
    g.add_argument(
        "--intergenic",
        type=int,
        default=300,
        metavar="BASES",
        help="non-coding bases before each gene (default: 300; raise it for a "
        "genome of realistic gene density)",
    )
    g.add_argument(
        "--seed", type=int, default=None, help="random seed (default: drawn at random and recorded)"
    )
    o = p.add_argument_group("outputs")
    o.add_argument(
        "-o", "--output", default=None, metavar="SPECTRA.json", help="spectra file (JSON)"
    )
    o.add_argument(
        "--tsv", default=None, metavar="SPECTRA.tsv", help="also write the long spectra table"
    )
    o.add_argument(
        "--write-vcf",
        default=None,
        metavar="PREFIX",
        help="also write PREFIX.vcf.gz (+ .tbi), PREFIX.sites.bed, PREFIX.samples.tsv",
    )
    o.add_argument(
        "--genome",
        action="store_true",
        help="with --write-vcf, also write the reference PREFIX.fa (+ .fai) and its "
        "genes PREFIX.gff3 (real codons: classifying them gives back "
        "PREFIX.sites.bed); needs at least as many 0fold as 4fold sites",
    )
    o.add_argument(
        "--missing",
        type=float,
        default=0.0,
        metavar="RATE",
        help="share of missing genotypes in the VCF (default: 0)",
    )
    o.add_argument(
        "--outgroup",
        default=None,
        metavar="NAME:n=COPIES",
        help="add outgroup samples fixed for the ancestral allele",
    )
    o.add_argument(
        "--ref-derived",
        type=float,
        default=0.0,
        metavar="FRACTION",
        help="share of VCF records whose REF is the derived base (INFO/AA stays "
        "correct; default: 0)",
    )
    o.add_argument(
        "--depth",
        type=float,
        default=20.0,
        help="mean read depth of the VCF genotypes (default: 20)",
    )
    add_common_arguments(p)
    p.set_defaults(runner=run, output_dests=("write_vcf",))


def _parse_outgroup(text: str | None) -> tuple[str, int] | None:
    if text is None:
        return None
    name, sep, rest = text.partition(":")
    key, eq, val = rest.partition("=")
    if not sep or not name or key.strip() != "n" or not eq:
        raise OptionError(f"--outgroup expects NAME:n=COPIES, got {text!r}")
    try:
        return name.strip(), int(val)
    except ValueError:
        raise OptionError(f"--outgroup {text!r}: n={val!r} is not a whole number") from None


def _progress_printer() -> Callable[[str, int, int], None] | None:
    if not sys.stderr.isatty():
        return None

    def show(pop: str, done: int, total: int) -> None:
        end = "\n" if done >= total else ""
        sys.stderr.write(f"\rdriftband: simulating {pop}: {100 * done // total:3d}%{end}")
        sys.stderr.flush()

    return show


def run(args: argparse.Namespace) -> int:
    """Run ``driftband simulate`` from parsed arguments; returns the exit code."""
    from .. import simulate as sim

    if args.output is None and args.write_vcf is None:
        raise OptionError("nothing to write: give -o SPECTRA.json and/or --write-vcf PREFIX")
    pops = sim.build_populations(args.population, args.history)
    dfe = sim.parse_dfe(args.true_dfe, args.true_beneficial)
    sites = {
        "0fold": args.class_sites_0fold if args.class_sites_0fold is not None else args.class_sites,
        "4fold": args.class_sites_4fold if args.class_sites_4fold is not None else args.class_sites,
    }
    for c, L in sites.items():
        if L < 1:
            raise OptionError(f"--class-sites for {c}: {L} must be >= 1")
    outgroup = _parse_outgroup(args.outgroup)
    if args.genome and args.write_vcf is None:
        raise OptionError("--genome needs --write-vcf PREFIX (the genome is written beside it)")
    vcf_opts = {
        "missing": args.missing,
        "outgroup": outgroup,
        "ref_derived": args.ref_derived,
        "depth": args.depth,
        "genome": args.genome,
        "command": shlex.join([os.path.basename(sys.argv[0]), *sys.argv[1:]]),
    }
    # Check every output (and the VCF options) before the simulation runs.
    outputs = [args.output, args.tsv]
    if args.write_vcf is not None:
        outputs += list(sim.study_paths(args.write_vcf, args.genome).values())
        sim.check_vcf_options(pops, args.missing, outgroup, args.ref_derived, args.depth)
        if args.genome:
            import numpy as np

            sim.check_genome_option(np.asarray([sites["0fold"], sites["4fold"]]))
    from .._io import after_commit, check_outputs

    check_outputs(outputs, args.force)
    options = {k: v for k, v in vars(args).items() if k not in ("runner", "subcommand")}
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", DriftbandWarning)
        study = sim.simulate_study(
            pops,
            dfe,
            theta=args.theta,
            sites=sites,
            blocks=args.block_count,
            reference_size=args.reference_size,
            burn_in=args.burn_in,
            divergence_generations=args.divergence_generations,
            seed=args.seed,
            chromosomes=args.chromosomes,
            gene_codons=args.gene_codons,
            intergenic=args.intergenic,
            options=options,
            progress=None if args.quiet else _progress_printer(),
        )
    for w in caught:  # one line each on stderr
        log.warning("warning: %s", w.message)
    written = sim.write_study(
        study,
        args.output,
        args.tsv,
        args.write_vcf,
        force=args.force,
        **(vcf_opts if args.write_vcf is not None else {}),
    )
    after_commit(lambda: log.info("seed %d; wrote %s", study.seed, ", ".join(written.values())))
    return 0
