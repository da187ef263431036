"""``driftband run``: the whole job of a study, from a study file or flags, into one folder."""

from __future__ import annotations

import argparse
import sys
from typing import TYPE_CHECKING

from ..defaults import HEADLINES
from ..effect import EFFECTS
from ..exceptions import OptionError
from ._common import CommaList, Subparsers, add_common_arguments, add_subcommand, progress_on_stderr

if TYPE_CHECKING:
    from ..run import Study

__all__ = ["add_parser", "add_study_arguments", "run", "study_from_args"]

DESCRIPTION = """\
The whole job in one command: classify sites (when a FASTA + GFF3 is given), count the
spectra, fit every DFE family to every population (AIC choice), block-bootstrap the fits,
compare every pair of populations and write the report, all into one output folder:

  report.html, summary.md        the answer, for people
  bands.tsv, fit.json            shares per |Ne*s| band with intervals; all fits
  compare.tsv                    tests between pairs of populations
  sites.bed, spectra.json        site classes and spectra (DATASET.* with several datasets)
  run.log, provenance/           the log of every run; checksums, options, study record

The study comes from a study file (TOML; its keys are listed in the README, section
"Study files") or, for one dataset, from the flags below. A study file may hold several
datasets (e.g. two species, each with its own VCF, genome or sites BED, sample table and
polarisation); their populations are named DATASET/POP and all meet in one comparison.

A rerun reuses every stage whose inputs (by SHA-256) and options are unchanged and whose
outputs are intact; --force redoes them all. An interrupted run resumes where it stopped.
An output folder holding another study is refused without --force."""

EXAMPLES = r"""
driftband run study.toml --out-dir results
driftband run --vcf calls.vcf.gz --samples pops.tsv --fasta ref.fa.gz --gff genes.gff3 \
    --ancestral outgroup:sister --out-dir results
driftband run --vcf calls.bcf --samples pops.tsv --sites classes.bed --callable mask.bed \
    --bootstrap 200 --workers 4 --out-dir results
driftband run study.toml --out-dir results --bootstrap 500 --seed 7   # same study, more reps
"""

#: Flags of the dataset and the fit (only without a study file), by study-file key.
_DATASET_FLAGS = {
    "vcf": "--vcf",
    "samples": "--samples",
    "sites": "--sites",
    "fasta": "--fasta",
    "gff": "--gff",
    "callable": "--callable",
    "all_sites_callable": "--all-sites-callable",
    "ancestral": "--ancestral",
    "exclude_lowercase_ancestral": "--exclude-lowercase-ancestral",
    "project": "--project",
    "block_size": "--block-size",
    "blocks": "--blocks",
    "regions": "--regions",
    "min_gq": "--min-gq",
    "min_dp": "--min-dp",
    "pass_only": "--pass-only",
    "code": "--code",
    "name": "--name",
}
_FIT_FLAGS = {
    "dfe": "--dfe",
    "bands": "--bands",
    "misorientation": "--misorientation",
    "demography": "--demography",
    "beneficial": "--beneficial",
    "headline": "--headline",
    "effect": "--effect",
}


def add_parser(subparsers: Subparsers) -> argparse.ArgumentParser:
    """Register the ``run`` subcommand."""
    p = add_subcommand(
        subparsers,
        "run",
        help="the whole job of a study into one output folder (report, tables, provenance)",
        description=DESCRIPTION,
        examples=EXAMPLES,
    )
    p.add_argument(
        "--out-dir", metavar="DIR", help="output folder (default: out_dir of the study file)"
    )
    add_study_arguments(p)
    b = p.add_argument_group("bootstrap (these also override a study file)")
    b.add_argument(
        "--bootstrap",
        type=int,
        metavar="B",
        help="block-bootstrap replicates (default 200; 0: none)",
    )
    b.add_argument("--seed", type=int, help="random seed of the bootstrap (default 1)")
    b.add_argument("--level", type=float, help="confidence level (default 0.95)")
    b.add_argument(
        "--workers", type=int, metavar="N", help="worker processes (default: the cores available)"
    )
    b.add_argument(
        "--scheduler",
        metavar="ADDRESS",
        help="run every stage's tasks on the dask.distributed scheduler at ADDRESS, e.g. "
        "tcp://HOST:8786 (needs driftband[cluster]; same results; see the README, "
        "'Running on a cluster')",
    )
    add_common_arguments(p)
    p.set_defaults(runner=run, commit_at_end=False)
    return p


def add_study_arguments(p: argparse.ArgumentParser) -> None:
    """The study file or one dataset's flags, and the fit flags (``run`` and ``check``)."""
    p.add_argument(
        "study",
        nargs="?",
        metavar="STUDY.toml",
        help="study file (TOML); or give one dataset with the flags below",
    )
    d = p.add_argument_group("one dataset from flags (instead of a study file)")
    d.add_argument("--vcf", metavar="VCF", help="VCF/BCF of all samples")
    d.add_argument(
        "--samples", metavar="TABLE.tsv", help="sample table: TSV of sample and population"
    )
    d.add_argument("--sites", metavar="BED", help="BED4 of site classes (0fold, 4fold)")
    d.add_argument("--fasta", metavar="REF.fa", help="reference FASTA, with --gff")
    d.add_argument("--gff", metavar="GENES.gff3", help="GFF3 annotation of that reference")
    d.add_argument("--code", type=int, metavar="N", help="NCBI translation table (default 1)")
    d.add_argument("--callable", metavar="BED", help="BED of callable sites")
    d.add_argument(
        "--all-sites-callable",
        action="store_true",
        default=None,
        help="state that every class site was callable (a variants-only VCF without "
        "--callable is warned about otherwise)",
    )
    d.add_argument(
        "--ancestral",
        metavar="aa|fold|outgroup:POP|fasta:FILE",
        help="polarisation (default aa: INFO/AA; fasta:FILE an ancestral sequence)",
    )
    d.add_argument(
        "--exclude-lowercase-ancestral",
        action="store_true",
        default=None,
        help="with fasta:FILE, drop sites whose ancestral base is lower case",
    )
    d.add_argument(
        "--project",
        action=CommaList,
        metavar="N|POP=N,...",
        help="project to N gene copies: all populations (N) and/or single ones (POP=N)",
    )
    g = d.add_mutually_exclusive_group()
    g.add_argument(
        "--block-size", type=int, metavar="BP", help="bootstrap block length (default 100000)"
    )
    g.add_argument("--blocks", metavar="BED", help="BED of bootstrap blocks instead")
    d.add_argument(
        "--regions",
        action=CommaList,
        metavar="REGION,...",
        help="only these regions, comma-separated: CHROM, CHROM:START-END or BED files",
    )
    d.add_argument("--min-gq", type=int, metavar="Q", help="genotypes with GQ < Q missing")
    d.add_argument("--min-dp", type=int, metavar="D", help="genotypes with DP < D missing")
    d.add_argument(
        "--pass-only",
        action="store_true",
        default=None,
        help="keep only FILTER PASS or '.' records",
    )
    d.add_argument("--name", help="name of the study and dataset (default: the VCF's name)")
    f = p.add_argument_group("fit (without a study file)")
    f.add_argument("--dfe", metavar="NAMES", help="DFE families (default gamma,lognormal,discrete)")
    f.add_argument(
        "--headline",
        choices=HEADLINES,
        help="headline shares averaged over the families (default) or the AIC-best one",
    )
    f.add_argument("--bands", metavar="EDGES", help="band edges on |Ne*s| (default 0,1,10,100)")
    f.add_argument(
        "--effect",
        choices=EFFECTS,
        help="s in |Ne*s| is the heterozygote effect (default; S = 4Ne*s) or the "
        "homozygote effect (S = 2Ne*s)",
    )
    f.add_argument(
        "--misorientation",
        metavar="free|fixed:E",
        help="ancestral misidentification rate (default free)",
    )
    f.add_argument(
        "--demography",
        metavar="MODEL",
        help="nuisance (default), equilibrium, one-change, two-change, growth, auto or "
        "demes:FILE (see 'driftband fit --help')",
    )
    f.add_argument(
        "--beneficial",
        action="store_true",
        default=None,
        help="add a beneficial class to every family",
    )


def study_from_args(args: argparse.Namespace) -> Study:
    """The :class:`~driftband.run.Study` of the parsed arguments (file or flags)."""
    from ..run import read_study, study_from_dict

    given = {
        k: getattr(args, k)
        for k in (*_DATASET_FLAGS, *_FIT_FLAGS)
        if getattr(args, k, None) is not None
    }
    if args.study is not None:
        if given:
            key = next(iter(given))
            flag = _DATASET_FLAGS.get(key) or _FIT_FLAGS[key]
            raise OptionError(
                f"{flag}: with a study file, give the datasets and fit "
                f"options in the file ({args.study})"
            )
        return read_study(args.study)
    if args.vcf is None or args.samples is None:
        raise OptionError(
            "give a study file, or --vcf and --samples with --sites or "
            "--fasta and --gff (see 'driftband run --help')"
        )
    from .fit import parse_bands
    from .spectra import parse_project

    ds = {k: v for k, v in given.items() if k in _DATASET_FLAGS}
    name = ds.pop("name", None)
    if name is not None:
        ds["name"] = name
    if "project" in ds:
        ds["project"] = parse_project(ds["project"])
    fit = {k: v for k, v in given.items() if k in _FIT_FLAGS}
    if "bands" in fit:
        fit["bands"] = list(parse_bands(fit["bands"]))
    doc = {"dataset": [ds], "fit": fit}
    if name is not None:
        doc["study"] = {"name": name}
    return study_from_dict(doc, None, flags={**_DATASET_FLAGS, **_FIT_FLAGS})


def run(args: argparse.Namespace) -> int:
    """Run ``driftband run``."""
    from ..run import run_study

    study = study_from_args(args)
    progress_on_stderr(args)
    res = run_study(
        study,
        args.out_dir,
        force=args.force,
        replicates=args.bootstrap,
        workers=args.workers,
        seed=args.seed,
        level=args.level,
        scheduler=args.scheduler,
    )
    print(res.report, file=sys.stdout)
    return 0
