"""Files of a simulated study: spectra, and a VCF + sites BED + sample table on synthetic
chromosomes.

VCF layout (``PREFIX.vcf.gz`` with a tabix index ``PREFIX.vcf.gz.tbi``):

* one record per site that is variable in the sample of some population (or a
  substitution within the divergence window); each population's variable sites lie at
  positions of their own (no two populations share a variable site);
* ``INFO/AA`` is the ancestral base; ``REF`` is the ancestral base, except for a chosen
  fraction of records (``ref_derived``) where the reference carries the derived base;
* diploid samples ``POP_01``, ``POP_02``, ... (consecutive sampled gene copies are paired
  into an individual; unphased); FORMAT ``GT:DP:GQ`` with depth ~ Poisson(``depth``)
  (at least 1) and a genotype quality that grows with depth; a fraction ``missing`` of
  genotypes is set to ``./.``;
* an optional outgroup population, homozygous for the ancestral base at every record, so
  that at a substitution it differs from the population that fixed the derived base.

``PREFIX.sites.bed`` is the BED4 of every callable site with its class (all simulated
sites are callable) and ``PREFIX.samples.tsv`` maps each sample to its population (with
the header line ``sample<TAB>population``). The spectra written beside them are the
complete-data truth: with missing genotypes, spectra recounted from the VCF differ by
the projection to a common n.
"""

from __future__ import annotations

import contextlib
import logging
import os
from collections.abc import Iterator, Sequence
from pathlib import Path
from typing import Any

import numpy as np

from .._io import atomic_output, check_output_path, check_outputs, commit_output, temporary_output
from .._version import __version__
from ..exceptions import OptionError
from ..sites.bed import write_bed4
from ..spectra.io import write_spectra_json, write_spectra_tsv
from ._genome import build_reference, fasta_index, write_fasta, write_gff3
from ._model import PopulationModel
from ._study import CLASSES, SimulatedStudy, _seed_stream

__all__ = [
    "check_genome_option",
    "check_vcf_options",
    "study_paths",
    "write_study",
    "write_study_vcf",
]

log = logging.getLogger("driftband")

_BASES = np.array(list("ACGT"))
_GT = np.array(["0/0", "0/1", "1/1"])


def study_paths(vcf_prefix: str | os.PathLike, genome: bool = False) -> dict[str, str]:
    """Output paths of the VCF set for a prefix: ``vcf``, ``tbi``, ``bed``, ``samples``
    and, with ``genome``, ``fasta``, ``fai``, ``gff``."""
    p = os.fspath(vcf_prefix)
    out = {
        "vcf": p + ".vcf.gz",
        "tbi": p + ".vcf.gz.tbi",
        "bed": p + ".sites.bed",
        "samples": p + ".samples.tsv",
    }
    if genome:
        out.update({"fasta": p + ".fa", "fai": p + ".fa.fai", "gff": p + ".gff3"})
    return out


def _sample_names(name: str, count: int) -> list[str]:
    width = max(2, len(str(count)))
    return [f"{name}_{i + 1:0{width}d}" for i in range(count)]


def write_study_vcf(
    study: SimulatedStudy,
    prefix: str | os.PathLike,
    missing: float = 0.0,
    outgroup: tuple[str, int] | None = None,
    ref_derived: float = 0.0,
    depth: float = 20.0,
    genome: bool = False,
    force: bool = False,
    command: str | None = None,
) -> dict[str, str]:
    """Write ``PREFIX.vcf.gz`` (+ ``.tbi``), ``PREFIX.sites.bed`` and ``PREFIX.samples.tsv``.

    Parameters
    ----------
    study : SimulatedStudy
        Every population's sample size must be even (diploid individuals).
    prefix : path-like
    missing : float
        Probability that a genotype is missing, in [0, 1).
    outgroup : (str, int), optional
        Name and gene copies (even) of an outgroup fixed for the ancestral base.
    ref_derived : float
        Fraction of records whose REF is the derived base, in [0, 1].
    depth : float
        Mean read depth of a called genotype (> 0).
    genome : bool
        Also write the reference ``PREFIX.fa`` (+ ``.fai``) and ``PREFIX.gff3``, whose
        classification gives back ``PREFIX.sites.bed`` (see :mod:`._genome`).
    force : bool
        Overwrite existing outputs.
    command : str, optional
        Recorded in the VCF header.

    Returns
    -------
    dict of str to str
        The paths written (keys as in :func:`study_paths`).
    """
    paths = study_paths(prefix, genome)
    check_vcf_options(study.populations, missing, outgroup, ref_derived, depth)
    if genome:
        check_genome_option(study.layout.block_sites.sum(axis=0))
    check_outputs(paths.values(), force)
    rng = _seed_stream(study.seed, 2)
    lay = study.layout
    pops = study.populations
    # Records: class, population, site index -> chromosome and position.
    rec_chrom, rec_pos, rec_pop, rec_k = [], [], [], []
    for ci, c in enumerate(CLASSES):
        for pi, samp in enumerate(study.samples):
            idx = study.site_index[c][pi]
            rec_chrom.append(lay.block_chrom[lay.block_of(ci, idx)])
            rec_pos.append(lay.site_positions(ci, idx))
            rec_pop.append(np.full(idx.size, pi, np.int64))
            rec_k.append(samp.classes[c].derived)
    chrom = np.concatenate(rec_chrom) if rec_chrom else np.empty(0, np.int64)
    pos0 = np.concatenate(rec_pos)
    rpop = np.concatenate(rec_pop)
    rk = np.concatenate(rec_k)
    order = np.lexsort((pos0, chrom))
    chrom, pos0, rpop, rk = chrom[order], pos0[order], rpop[order], rk[order]
    m = chrom.size
    # Ancestral bases from a reference of real codons; derived bases at random.
    genome_ref = build_reference(lay, _seed_stream(study.seed, 3))
    anc = np.array(
        [genome_ref.seqs[c][p] for c, p in zip(chrom.tolist(), pos0.tolist())], dtype=np.int64
    )
    der = (anc + rng.integers(1, 4, m)) % 4
    # REF carries the derived base for a share of records, where the reference codon
    # keeps its classes with it.
    flip = np.zeros(m, dtype=bool)
    for i in np.flatnonzero(rng.random(m) < ref_derived).tolist():
        ch, ps = int(chrom[i]), int(pos0[i])
        k = int(genome_ref.phase[ch][ps])
        b = genome_ref.pick_ref_derived(ch, ps - k, k, int(anc[i]), rng) if k >= 0 else -1
        if b >= 0:
            der[i] = b
            flip[i] = True
            genome_ref.seqs[ch][ps] = b
    ref = np.where(flip, der, anc)
    alt = np.where(flip, anc, der)
    # Gene copies: populations in order, then the outgroup; 1 = carries the derived base.
    ns = [p.n for p in pops]
    n_out = outgroup[1] if outgroup else 0
    offs = np.concatenate([[0], np.cumsum(ns)])
    copies = np.zeros((m, int(offs[-1]) + n_out), dtype=np.int8)
    for pi, n in enumerate(ns):
        sel = np.flatnonzero(rpop == pi)
        if sel.size:
            u = rng.random((sel.size, n))
            rank = u.argsort(axis=1).argsort(axis=1)
            copies[sel[:, None], offs[pi] + np.arange(n)] = rank < rk[sel, None]
    # Allele index in the VCF: derived is ALT (1) unless REF is derived.
    allele = np.where(flip[:, None], 1 - copies, copies).astype(np.int8)
    gt = allele[:, 0::2] + allele[:, 1::2]  # 0, 1, 2 ALT copies per individual
    n_ind = gt.shape[1]
    miss = rng.random((m, n_ind)) < missing if missing > 0 else np.zeros((m, n_ind), bool)
    dp = np.maximum(rng.poisson(depth, (m, n_ind)), 1)
    gq = np.clip(np.rint(3.0 * dp - 3.0 + rng.normal(0.0, 4.0, (m, n_ind))), 0, 99)
    gq = np.where(gt == 1, np.minimum(gq, np.maximum(dp * 2, 3)), gq).astype(np.int64)
    samples = [s for p in pops for s in _sample_names(p.name, p.n // 2)]
    if outgroup:
        samples += _sample_names(outgroup[0], n_out // 2)
    fmt = np.char.add(
        np.char.add(np.char.add(_GT[gt], ":"), dp.astype(str)), np.char.add(":", gq.astype(str))
    )
    if miss.any():
        fmt[miss] = "./.:.:."
    header = _header(study, samples, command)
    _write_vcf(paths["vcf"], paths["tbi"], header, chrom, pos0, ref, alt, anc, fmt, lay)
    write_bed4(paths["bed"], lay.bed_rows(), force=force)
    if genome:
        with _atomic_with_index(paths["fasta"], paths["fai"]) as (tmp, _tmp_fai):
            with open(tmp, "w", encoding="ascii", newline="") as fh:
                write_fasta(fh, lay.chrom_names, genome_ref.seqs)
            fasta_index(tmp)
        with atomic_output(paths["gff"], force=force, newline="") as fh:
            write_gff3(fh, lay.chrom_names, lay.chrom_lengths.tolist(), genome_ref)
    with atomic_output(paths["samples"], force=force, newline="") as fh:
        fh.write("sample\tpopulation\n")
        for p in pops:
            for s in _sample_names(p.name, p.n // 2):
                fh.write(f"{s}\t{p.name}\n")
        if outgroup:
            for s in _sample_names(outgroup[0], n_out // 2):
                fh.write(f"{s}\t{outgroup[0]}\n")
    log.info("wrote %d VCF records for %d samples to %s", m, len(samples), paths["vcf"])
    return paths


def check_vcf_options(
    populations: Sequence[PopulationModel],
    missing: float = 0.0,
    outgroup: tuple[str, int] | None = None,
    ref_derived: float = 0.0,
    depth: float = 20.0,
) -> None:
    """Check the VCF options against the populations before any work.

    Raises
    ------
    OptionError
        An odd sample size, a rate outside its range, or a bad outgroup.
    """
    for p in populations:
        if p.n % 2:
            raise OptionError(
                f"population {p.name!r}: n={p.n} is odd; a VCF needs diploid "
                "individuals (an even number of gene copies)"
            )
    if not 0.0 <= missing < 1.0:
        raise OptionError(f"--missing {missing}: must be in [0, 1)")
    if not 0.0 <= ref_derived <= 1.0:
        raise OptionError(f"--ref-derived {ref_derived}: must be in [0, 1]")
    if not depth > 0:
        raise OptionError(f"--depth {depth}: must be > 0")
    if outgroup is not None:
        name, n = outgroup
        if name in {p.name for p in populations}:
            raise OptionError(f"--outgroup {name!r}: a population of that name exists")
        if n < 2 or n % 2:
            raise OptionError(f"--outgroup {name}: n={n} must be an even number >= 2")


def _header(study: SimulatedStudy, samples: list[str], command: str | None) -> str:
    lay = study.layout
    lines = [
        "##fileformat=VCFv4.2",
        f"##source=driftband-simulate-{__version__}",
        f"##driftband_simulate_seed={study.seed}",
    ]
    if command:
        lines.append(f"##driftband_simulate_command={command}")
    lines += [
        f"##contig=<ID={c},length={int(n)}>" for c, n in zip(lay.chrom_names, lay.chrom_lengths)
    ]
    lines += [
        '##FILTER=<ID=PASS,Description="All filters passed">',
        '##INFO=<ID=AA,Number=1,Type=String,Description="Ancestral allele">',
        '##FORMAT=<ID=GT,Number=1,Type=String,Description="Genotype">',
        '##FORMAT=<ID=DP,Number=1,Type=Integer,Description="Read depth">',
        '##FORMAT=<ID=GQ,Number=1,Type=Integer,Description="Genotype quality (phred-scaled)">',
        "\t".join(
            ["#CHROM", "POS", "ID", "REF", "ALT", "QUAL", "FILTER", "INFO", "FORMAT", *samples]
        ),
    ]
    return "\n".join(lines) + "\n"


def check_genome_option(class_sites: np.ndarray) -> None:
    """A genome needs at least as many 0fold as 4fold sites (real codons do)."""
    if int(class_sites[0]) < int(class_sites[1]):
        raise OptionError(
            "--genome needs at least as many 0fold as 4fold sites (every "
            "codon's second position is 0-fold); raise --class-sites-0fold"
        )


@contextlib.contextmanager
def _atomic_with_index(
    path: str, index_path: str, suffix: str = ".tmp"
) -> Iterator[tuple[str, str]]:
    """Temporary paths for a file and its index, renamed into place together on success.

    The block writes the file at the first path and its index at the second (the
    temporary name plus the index's extension, e.g. ``.tbi``, where indexers put it). On
    success both get the umask's permissions and replace ``path`` and ``index_path``; if
    the block raises, both temporary files are removed and the outputs are untouched.
    """
    check_output_path(path, force=True)
    check_output_path(index_path, force=True)
    tmp = temporary_output(path, suffix=suffix)
    tmp_index = tmp + Path(index_path).name[len(Path(path).name) :]
    try:
        yield tmp, tmp_index
        os.chmod(tmp_index, 0o666 & ~_umask())
    except BaseException:
        for f in (tmp, tmp_index):
            with contextlib.suppress(FileNotFoundError):
                os.unlink(f)
        raise
    commit_output(tmp, path)
    commit_output(tmp_index, index_path)


def _umask() -> int:
    cur = os.umask(0)
    os.umask(cur)
    return cur


def _write_vcf(
    path: str,
    tbi: str,
    header: str,
    chrom: np.ndarray,
    pos0: np.ndarray,
    ref: np.ndarray,
    alt: np.ndarray,
    anc: np.ndarray,
    fmt: np.ndarray,
    lay: Any,
) -> None:
    """bgzip-compressed VCF and its tabix index, written atomically (temp then rename)."""
    import pysam

    with _atomic_with_index(path, tbi, suffix=".tmp.gz") as (tmp, tmp_tbi):
        with pysam.BGZFile(tmp, "wb", index=None) as fh:
            fh.write(header.encode())
            names = np.array(lay.chrom_names)[chrom] if chrom.size else np.empty(0, str)
            chunk = 5000
            for a in range(0, chrom.size, chunk):
                b = min(a + chunk, chrom.size)
                rows = [
                    f"{names[i]}\t{pos0[i] + 1}\t.\t{_BASES[ref[i]]}\t{_BASES[alt[i]]}\t100\t"
                    f"PASS\tAA={_BASES[anc[i]]}\tGT:DP:GQ\t" + "\t".join(fmt[i].tolist())
                    for i in range(a, b)
                ]
                fh.write(("\n".join(rows) + "\n").encode())
        pysam.tabix_index(tmp, preset="vcf", index=tmp_tbi, force=True)


def write_study(
    study: SimulatedStudy,
    output: str | os.PathLike | None = None,
    tsv: str | os.PathLike | None = None,
    vcf_prefix: str | os.PathLike | None = None,
    force: bool = False,
    **vcf_options: Any,
) -> dict[str, str]:
    """Write a simulated study's spectra (JSON, optional TSV) and optionally its VCF set.

    Every output path is checked before anything is written.

    Parameters
    ----------
    study : SimulatedStudy
    output : path-like, optional
        Spectra JSON.
    tsv : path-like, optional
        Long spectra table.
    vcf_prefix : path-like, optional
        Prefix of the VCF set (see :func:`write_study_vcf`).
    force : bool
    **vcf_options
        ``missing``, ``outgroup``, ``ref_derived``, ``depth``, ``genome``, ``command``.

    Returns
    -------
    dict of str to str
        Paths written, by kind (``spectra``, ``tsv``, ``vcf``, ``tbi``, ``bed``, ``samples``).
    """
    out: dict[str, str] = {}
    planned = [output, tsv]
    genome = bool(vcf_options.get("genome", False))
    if genome and vcf_prefix is None:
        raise OptionError("--genome needs --write-vcf PREFIX (the genome is written beside it)")
    if vcf_prefix is not None:
        if genome:
            check_genome_option(study.layout.block_sites.sum(axis=0))
        check_vcf_options(
            study.populations,
            vcf_options.get("missing", 0.0),
            vcf_options.get("outgroup"),
            vcf_options.get("ref_derived", 0.0),
            vcf_options.get("depth", 20.0),
        )
        planned += list(study_paths(vcf_prefix, genome).values())
    check_outputs(planned, force)
    if vcf_prefix is not None:
        out.update(write_study_vcf(study, vcf_prefix, force=force, **vcf_options))
    if tsv is not None:
        write_spectra_tsv(study.spectra, tsv, force=force)
        out["tsv"] = os.fspath(tsv)
    if output is not None:
        write_spectra_json(study.spectra, output, force=force)
        out["spectra"] = os.fspath(output)
    return out
