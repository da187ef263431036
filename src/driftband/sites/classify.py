"""0-fold and 4-fold degenerate sites from a reference genome and its GFF3 annotation.

Each transcript's coding sequence is assembled from its CDS parts in transcript order
(ascending coordinates on ``+``, descending on ``-``, reverse-complemented), every coding
base keeping its genome position. The GFF3 phase of each part fixes the codon position of
its bases (``(i - phase) mod 3`` for the i-th base of the part), so a codon is three
consecutive coding bases at codon positions 0, 1, 2; bases left without a complete codon
(at the ends, or where the phases of two parts disagree) are counted as incomplete codons.
Every position of a sense codon gets its class from the table of
:mod:`driftband.sites.codes`: the number of synonymous changes (0 → ``0fold``,
3 → ``4fold``; 1 and 2 → ``2fold``/``3fold``, which are counted but not written).

Excluded, and counted by reason: transcripts with an internal stop codon, pseudogene CDSs
(``pseudo=true``), transcripts spread over two strands or sequences; codons with a base
other than A, C, G, T (soft-masked lowercase bases are used unless asked otherwise);
incomplete codons; the terminal stop codon. Where several transcripts cover a site, the
site is written only when every one of them gives the same class (``agree``), or only the
longest CDS of each gene is used (``longest``); sites where transcripts disagree, or where
one transcript gives a class and another cannot classify the site, are counted as
conflicts (``class_conflict``). The written classes of all chromosomes are disjoint.

The work is vectorised per chromosome: all coding bases of the chromosome's transcripts
form one array, codons become indices 0..63 and classes are read from a 64 × 3 table.
Memory is bounded by the largest chromosome and its coding bases.

Longer than the ~600-line guide (about 630 lines after formatting): the codon walk of a
chromosome and the reconciliation of transcripts that disagree are one concern; the
FASTA reading lives in :mod:`driftband.sites.fasta`.
"""

from __future__ import annotations

import logging
import os
from collections.abc import Iterable, Iterator, Sequence
from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import numpy as np

from .._io import atomic_output, provenance
from .._progress import Progress
from ..exceptions import InputError, OptionError
from .bed import IntervalSet, SiteClasses
from .codes import DEGENERACY_NAMES, GeneticCode, genetic_code
from .fasta import open_fasta
from .gff import Annotation, Transcript, read_gff3

if TYPE_CHECKING:
    import pysam

__all__ = [
    "EXCLUSION_REASONS",
    "WRITTEN_CLASSES",
    "ChromClasses",
    "ClassifyResult",
    "classify_chromosome",
    "classify_sites",
    "coding_sequences",
    "open_fasta",
    "write_summary",
]

log = logging.getLogger("driftband")

#: Classes written to the BED, in the order of the ``classes`` codes of ChromClasses.
WRITTEN_CLASSES = ("0fold", "4fold")

#: Exclusion reasons and their unit, in the order of the summary table.
EXCLUSION_REASONS: dict[str, str] = {
    "pseudo": "transcripts",
    "mixed_strand": "transcripts",
    "mixed_seqid": "transcripts",
    "internal_stop": "transcripts",
    "not_longest": "transcripts",
    "non_acgt": "codons",
    "incomplete_codon": "codons",
    "stop_codon": "codons",
    "class_conflict": "sites",
    "softmasked": "sites",
}

_UNKNOWN = 4  # base of a codon that cannot be classified (non-ACGT, incomplete)
_STOP = 5  # base of the terminal stop codon

# ASCII -> base code (A, C, G, T = 0..3 in either case; anything else 4).
_BASE_CODE = np.full(256, 4, dtype=np.int8)
for _i, _b in enumerate("ACGT"):
    _BASE_CODE[ord(_b)] = _i
    _BASE_CODE[ord(_b.lower())] = _i
# Bit pattern of class codes at a site -> the class code when only one bit is set, else -1.
_SINGLE_CLASS = np.full(256, -1, dtype=np.int8)
for _k in range(8):
    _SINGLE_CLASS[1 << _k] = _k
_COMPLEMENT = np.arange(256, dtype=np.uint8)
for _a, _b in zip("ACGTNacgtnRYKMBVDHrykmbvdh", "TGCANtgcanYRMKVBHDyrmkvbhd"):
    _COMPLEMENT[ord(_a)] = ord(_b)


@dataclass
class ChromClasses:
    """Site classes of one chromosome.

    Attributes
    ----------
    chrom : str
        Chromosome name as in the FASTA.
    length : int
        Chromosome length in bases.
    starts, ends : ndarray of int64, shape (m,)
        Merged runs of written sites, 0-based half-open, sorted by start, disjoint.
    classes : ndarray of uint8, shape (m,)
        Index into :data:`WRITTEN_CLASSES` of each run.
    class_sites : dict of str to int
        Sites of each degeneracy class (``0fold``, ``2fold``, ``3fold``, ``4fold``) after
        all exclusions; only ``0fold`` and ``4fold`` are written.
    excluded : dict of str to int
        Counts by reason (units in :data:`EXCLUSION_REASONS`).
    transcripts_used : int
        Transcripts whose codons were classified.
    coding_sites : int
        Distinct genome positions covered by the CDS of the transcripts used.
    """

    chrom: str
    length: int
    starts: np.ndarray
    ends: np.ndarray
    classes: np.ndarray
    class_sites: dict[str, int]
    excluded: dict[str, int]
    transcripts_used: int = 0
    coding_sites: int = 0


@dataclass
class ClassifyResult:
    """Result of :func:`classify_sites`: written runs and counts per chromosome.

    Attributes
    ----------
    chroms : list of ChromClasses
        In FASTA order; only chromosomes with CDS in the annotation.
    code : int
        NCBI translation table used.
    transcripts : str
        ``"agree"`` or ``"longest"``.
    exclude_softmasked : bool
    fasta, gff : str or None
        Input paths.
    """

    chroms: list[ChromClasses]
    code: int = 1
    transcripts: str = "agree"
    exclude_softmasked: bool = False
    fasta: str | None = None
    gff: str | None = None
    options: dict = field(default_factory=dict)

    def rows(self) -> Iterator[tuple[str, int, int, str]]:
        """BED4 rows ``(chrom, start, end, class)`` in FASTA order, sorted by start."""
        for c in self.chroms:
            names = [WRITTEN_CLASSES[k] for k in c.classes.tolist()]
            yield from zip([c.chrom] * len(names), c.starts.tolist(), c.ends.tolist(), names)

    def total(self, name: str) -> int:
        """Sites of a class (``0fold``, ``2fold``, ``3fold``, ``4fold``) over all
        chromosomes, or the count of an exclusion reason."""
        if name in DEGENERACY_NAMES:
            return sum(c.class_sites[name] for c in self.chroms)
        if name in EXCLUSION_REASONS:
            return sum(c.excluded[name] for c in self.chroms)
        raise ValueError(f"`name` must be a class or an exclusion reason, got {name!r}")

    def summary_rows(self) -> list[tuple[str, str, str, int, str]]:
        """Summary table rows ``(chrom, kind, name, count, unit)``.

        ``kind`` is ``written`` (0fold, 4fold sites in the BED), ``not_written`` (2fold,
        3fold sites), ``excluded`` (by reason) or ``info`` (transcripts used, coding
        sites). Per chromosome, then totals under the chromosome name ``all``.
        """
        out = []

        def block(name, class_sites, excluded, used, coding):
            for k in DEGENERACY_NAMES:
                kind = "written" if k in WRITTEN_CLASSES else "not_written"
                out.append((name, kind, k, class_sites[k], "sites"))
            for r, unit in EXCLUSION_REASONS.items():
                out.append((name, "excluded", r, excluded[r], unit))
            out.append((name, "info", "transcripts_used", used, "transcripts"))
            out.append((name, "info", "coding_sites", coding, "sites"))

        for c in self.chroms:
            block(c.chrom, c.class_sites, c.excluded, c.transcripts_used, c.coding_sites)
        block(
            "all",
            {k: self.total(k) for k in DEGENERACY_NAMES},
            {r: self.total(r) for r in EXCLUSION_REASONS},
            sum(c.transcripts_used for c in self.chroms),
            sum(c.coding_sites for c in self.chroms),
        )
        return out

    def summary_lines(self) -> list[str]:
        """Human-readable summary for stderr: sites per class, exclusions, per chromosome.

        Returns
        -------
        list of str
            Totals of the written classes (0fold, 4fold) and of the classes not written
            (2fold, 3fold), the excluded sites or codons by reason, the transcripts used,
            and one line per chromosome.
        """
        written = ", ".join(f"{k} {self.total(k):,}" for k in WRITTEN_CLASSES)
        other = ", ".join(
            f"{k} {self.total(k):,}" for k in DEGENERACY_NAMES if k not in WRITTEN_CLASSES
        )
        used = sum(c.transcripts_used for c in self.chroms)
        out = [
            f"classified {len(self.chroms)} chromosome(s), {used:,} transcripts "
            f"(code {self.code}, transcripts {self.transcripts}): {written} sites written "
            f"({other} not written)"
        ]
        excl = [(r, self.total(r), unit) for r, unit in EXCLUSION_REASONS.items()]
        if any(n for _r, n, _u in excl):
            out.append("excluded: " + ", ".join(f"{r} {n:,} {u}" for r, n, u in excl if n))
        for c in self.chroms:
            out.append(
                f"  {c.chrom}: "
                + ", ".join(f"{k} {c.class_sites[k]:,}" for k in WRITTEN_CLASSES)
                + f" from {c.transcripts_used:,} transcripts"
            )
        return out

    def to_site_classes(self) -> SiteClasses:
        """The written sites as :class:`driftband.sites.bed.SiteClasses` (no file)."""
        classes: dict[str, IntervalSet] = {}
        for k, name in enumerate(WRITTEN_CLASSES):
            sets = {}
            for c in self.chroms:
                m = c.classes == k
                if m.any():
                    sets[c.chrom] = (c.starts[m].copy(), c.ends[m].copy())
            classes[name] = IntervalSet(sets)
        return SiteClasses(classes, None)


# ---------------------------------------------------------------------------------------
# Core (no I/O): one chromosome sequence and its transcripts.


@dataclass
class _Layout:
    pos: np.ndarray  # genome position of each coding base, transcript order
    tx: np.ndarray  # transcript index (into the list given) of each base
    cpos: np.ndarray  # codon position 0..2 from the part's phase
    minus: np.ndarray  # bool per base
    tx_first: np.ndarray  # first base index of each transcript, shape (n_tx + 1,)


def _layout(transcripts: Sequence[Transcript]) -> _Layout:
    """Genome position, transcript and codon position of every coding base."""
    starts, ends, phases, minus, txi = [], [], [], [], []
    for k, t in enumerate(transcripts):
        s, e, ph, _ = t.ordered()
        starts.append(s)
        ends.append(e)
        phases.append(ph)
        minus.append(np.full(s.size, t.strand == "-"))
        txi.append(np.full(s.size, k, dtype=np.int64))
    if not starts:
        z = np.empty(0, np.int64)
        return _Layout(z, z, z.astype(np.int8), z.astype(bool), np.zeros(1, np.int64))
    s = np.concatenate(starts)
    e = np.concatenate(ends)
    ph = np.concatenate(phases)
    mi = np.concatenate(minus)
    tp = np.concatenate(txi)
    lengths = e - s
    first = np.zeros(lengths.size, dtype=np.int64)
    np.cumsum(lengths[:-1], out=first[1:])
    total = int(lengths.sum())
    i = np.arange(total, dtype=np.int64) - np.repeat(first, lengths)
    base_minus = np.repeat(mi, lengths)
    pos = np.where(base_minus, np.repeat(e - 1, lengths) - i, np.repeat(s, lengths) + i)
    cpos = ((i - np.repeat(ph, lengths)) % 3).astype(np.int8)
    tx = np.repeat(tp, lengths)
    per_tx = np.bincount(tx, minlength=len(transcripts))
    tx_first = np.zeros(len(transcripts) + 1, dtype=np.int64)
    np.cumsum(per_tx, out=tx_first[1:])
    return _Layout(pos, tx, cpos, base_minus, tx_first)


def _empty_counts() -> dict[str, int]:
    return dict.fromkeys(EXCLUSION_REASONS, 0)


def classify_chromosome(
    seq: np.ndarray,
    transcripts: Sequence[Transcript],
    code: GeneticCode,
    mode: str = "agree",
    exclude_softmasked: bool = False,
    chrom: str = "",
) -> ChromClasses:
    """Classify the coding sites of one chromosome (no I/O).

    Parameters
    ----------
    seq : ndarray of uint8, shape (length,)
        The chromosome as ASCII codes (any case; lowercase = soft-masked).
    transcripts : sequence of Transcript
        Transcripts on this chromosome; every part must lie within ``seq``.
    code : GeneticCode
        Genetic code (see :func:`driftband.sites.codes.genetic_code`).
    mode : {"agree", "longest"}
        How sites covered by several transcripts are resolved (see module docstring).
    exclude_softmasked : bool
        Drop sites whose base is lowercase.
    chrom : str
        Name stored in the result.

    Returns
    -------
    ChromClasses
    """
    if mode not in ("agree", "longest"):
        raise OptionError(f"--transcripts must be 'agree' or 'longest', got {mode!r}")
    seq = np.asarray(seq, dtype=np.uint8)
    excluded = _empty_counts()
    usable = []
    for t in transcripts:
        if t.pseudo:
            excluded["pseudo"] += 1
        elif t.problem is not None:
            excluded[t.problem] += 1
        else:
            usable.append(t)
    lay = _layout(usable)
    n_tx = len(usable)
    total = lay.pos.size

    # Bases on the coding strand, as codes 0..3 (4 = not A/C/G/T).
    b = _BASE_CODE[seq[lay.pos]]
    b = np.where(lay.minus & (b < 4), 3 - b, b).astype(np.int8)

    # Complete codons: three consecutive coding bases of one transcript at codon
    # positions 0, 1, 2.
    if total >= 3:
        j = np.flatnonzero(
            (lay.cpos[:-2] == 0)
            & (lay.cpos[1:-1] == 1)
            & (lay.cpos[2:] == 2)
            & (lay.tx[:-2] == lay.tx[2:])
        )
    else:
        j = np.empty(0, np.int64)
    b0, b1, b2 = b[j], b[j + 1], b[j + 2]
    acgt = (b0 < 4) & (b1 < 4) & (b2 < 4)
    cidx = np.where(acgt, 16 * b0.astype(np.int64) + 4 * b1 + b2, 0)
    stop = acgt & code.is_stop[cidx]
    last_base = lay.tx_first[1:][lay.tx[j]] - 1 if j.size else j
    terminal = stop & (j + 2 == last_base)
    internal = stop & ~terminal

    # Transcripts kept: no internal stop; with "longest", the longest CDS of each gene.
    keep_tx = np.ones(n_tx, dtype=bool)
    keep_tx[np.unique(lay.tx[j[internal]])] = False
    excluded["internal_stop"] = int(n_tx - keep_tx.sum())
    if mode == "longest":
        best: dict[str, int] = {}
        for k, t in enumerate(usable):
            if not keep_tx[k]:
                continue
            cur = best.get(t.gene)
            if cur is None or t.cds_length > usable[cur].cds_length:
                best[t.gene] = k
        chosen = np.zeros(n_tx, dtype=bool)
        chosen[list(best.values())] = True
        excluded["not_longest"] = int((keep_tx & ~chosen).sum())
        keep_tx &= chosen

    # Class code of every coding base.
    cls = np.full(total, _UNKNOWN, dtype=np.int8)
    deg = code.degeneracy
    sense = acgt & ~stop
    for p in range(3):
        cls[j + p] = np.where(sense, deg[cidx, p], np.where(terminal, _STOP, _UNKNOWN))
    keep_base = keep_tx[lay.tx] if n_tx else np.zeros(0, bool)
    kept_codon = keep_tx[lay.tx[j]] if j.size else np.zeros(0, bool)
    excluded["non_acgt"] = int((kept_codon & ~acgt).sum())
    excluded["stop_codon"] = int((kept_codon & terminal).sum())
    in_codon = np.zeros(total, dtype=bool)
    for p in range(3):
        in_codon[j + p] = True
    frag = keep_base & ~in_codon
    if frag.any():
        idx = np.flatnonzero(frag)
        new = np.ones(idx.size, dtype=bool)
        new[1:] = (idx[1:] != idx[:-1] + 1) | (lay.tx[idx[1:]] != lay.tx[idx[:-1]])
        excluded["incomplete_codon"] = int(new.sum())

    # Resolve sites over transcripts: a bit per class code at each genome position.
    mask = np.zeros(seq.size, dtype=np.uint8)
    kpos, kcls = lay.pos[keep_base], cls[keep_base]
    for k in range(_STOP + 1):
        mask[kpos[kcls == k]] |= np.uint8(1 << k)
    sites = np.flatnonzero(mask)
    bits = mask[sites]
    del mask
    single = _SINGLE_CLASS[bits]
    # A conflict: transcripts give different classes, or one gives a class and another
    # cannot classify the site (sites no transcript can classify are counted by codon).
    excluded["class_conflict"] = int(((single < 0) & ((bits & 0x0F) != 0)).sum())
    good = (single >= 0) & (single < 4)
    if exclude_softmasked:
        soft = seq[sites] >= ord("a")
        excluded["softmasked"] = int((good & soft).sum())
        good &= ~soft
    site_cls = single[good]
    class_sites = {name: int((site_cls == k).sum()) for k, name in enumerate(DEGENERACY_NAMES)}

    # Runs of written classes (0fold = degeneracy 0, 4fold = degeneracy 3).
    w = (site_cls == 0) | (site_cls == 3)
    wpos = sites[good][w]
    wcls = np.where(site_cls[w] == 0, 0, 1).astype(np.uint8)
    if wpos.size:
        brk = np.ones(wpos.size, dtype=bool)
        brk[1:] = (wpos[1:] != wpos[:-1] + 1) | (wcls[1:] != wcls[:-1])
        si = np.flatnonzero(brk)
        ei = np.append(si[1:] - 1, wpos.size - 1)
        starts, ends, classes = wpos[si], wpos[ei] + 1, wcls[si]
    else:
        starts = ends = np.empty(0, np.int64)
        classes = np.empty(0, np.uint8)
    return ChromClasses(
        chrom=chrom,
        length=int(seq.size),
        starts=starts,
        ends=ends,
        classes=classes,
        class_sites=class_sites,
        excluded=excluded,
        transcripts_used=int(keep_tx.sum()),
        coding_sites=int(sites.size),
    )


# ---------------------------------------------------------------------------------------
# I/O layer: FASTA through pysam (sites/fasta.py), GFF3 through read_gff3.


def _missing_seqid_error(
    ann: Annotation, missing: list[str], refs: Sequence[str], fasta: str
) -> InputError:
    s = missing[0]
    line = ann.seqid_lines[s]
    hint = ""
    ref_set = set(refs)
    lower = {r.lower(): r for r in refs}
    if "chr" + s in ref_set:
        hint = f"; the FASTA has 'chr{s}': add the 'chr' prefix to the GFF3 seqids"
    elif s.startswith("chr") and s[3:] in ref_set:
        hint = f"; the FASTA has '{s[3:]}': remove the 'chr' prefix from the GFF3 seqids"
    elif s.lower() in lower:
        hint = f"; the FASTA has '{lower[s.lower()]}' (names are case-sensitive)"
    more = f" (and {len(missing) - 1} more seqids)" if len(missing) > 1 else ""
    shown = ", ".join(refs[:3]) + (", ..." if len(refs) > 3 else "")
    return InputError(
        f"CDS seqid {s!r}{more} is not a sequence of the FASTA {fasta} (which has {shown}){hint}",
        ann.path,
        line,
    )


def _check_bounds(
    transcripts: Iterable[Transcript], chrom: str, length: int, path: str | None
) -> None:
    for t in transcripts:
        if t.ends.size and int(t.ends.max()) > length:
            k = int(np.argmax(t.ends))
            raise InputError(
                f"CDS {int(t.starts[k]) + 1}-{int(t.ends[k])} runs beyond the "
                f"end of {chrom} (length {length}); the annotation does not "
                "match this FASTA",
                path,
                int(t.lines[k]),
            )


def _prepare(
    fasta: str | os.PathLike, gff: str | os.PathLike | Annotation, chroms: Iterable[str] | None
) -> tuple[Annotation, pysam.FastaFile, dict[str, list[Transcript]], list[str]]:
    ann = gff if isinstance(gff, Annotation) else read_gff3(gff)
    fa = open_fasta(fasta)
    refs = list(fa.references)
    missing = [s for s in ann.seqids() if s not in set(refs)]
    if missing:
        fa.close()
        raise _missing_seqid_error(ann, missing, refs, os.fsdecode(fa.filename))
    by_chrom: dict[str, list[Transcript]] = {}
    for t in ann.transcripts:
        by_chrom.setdefault(t.seqid, []).append(t)
    if chroms is not None:
        want = list(chroms)
        unknown = [c for c in want if c not in set(refs)]
        if unknown:
            fa.close()
            raise OptionError(f"chromosome {unknown[0]!r} is not in the FASTA")
        by_chrom = {c: v for c, v in by_chrom.items() if c in set(want)}
    order = [c for c in refs if c in by_chrom]
    return ann, fa, by_chrom, order


def _chrom_array(fa: pysam.FastaFile, chrom: str) -> np.ndarray:
    return np.frombuffer(fa.fetch(chrom).encode("ascii"), dtype=np.uint8)


def classify_sites(
    fasta: str | os.PathLike,
    gff: str | os.PathLike | Annotation,
    code: int = 1,
    transcripts: str = "agree",
    exclude_softmasked: bool = False,
    chroms: Iterable[str] | None = None,
) -> ClassifyResult:
    """Classify 0-fold and 4-fold degenerate sites of a genome from its GFF3 annotation.

    Parameters
    ----------
    fasta : path-like
        Reference FASTA, plain or bgzipped (``.fai``/``.gzi`` are created when absent).
    gff : path-like or Annotation
        GFF3 annotation (plain or gzip), or one already read by
        :func:`driftband.sites.gff.read_gff3`.
    code : int
        NCBI translation-table number (1 standard, 2 vertebrate mitochondrial, 11
        plastid/bacterial, ...).
    transcripts : {"agree", "longest"}
        ``agree``: a site covered by several transcripts is kept only when all give the
        same class; ``longest``: only the longest CDS of each gene is used.
    exclude_softmasked : bool
        Drop sites whose reference base is lowercase.
    chroms : iterable of str, optional
        Classify only these chromosomes.

    Returns
    -------
    ClassifyResult
        Written runs per chromosome and counts of classes and exclusions.

    Raises
    ------
    InputError
        For the input problems listed in :func:`read_gff3` and :func:`open_fasta`, a CDS
        seqid absent from the FASTA, a CDS beyond the end of its sequence, or no 0-fold or
        4-fold site at all.
    OptionError
        For an unknown table number or ``transcripts`` mode.

    Examples
    --------
    >>> res = classify_sites("ref.fa", "genes.gff3")          # doctest: +SKIP
    >>> res.total("0fold"), res.total("4fold")                 # doctest: +SKIP
    (1234567, 345678)
    """
    table = genetic_code(code)
    if transcripts not in ("agree", "longest"):
        raise OptionError(f"--transcripts must be 'agree' or 'longest', got {transcripts!r}")
    ann, fa, by_chrom, order = _prepare(fasta, gff, chroms)
    out = []
    prog = Progress("classify", len(order), "chromosomes")
    try:
        for chrom in order:
            length = fa.get_reference_length(chrom)
            _check_bounds(by_chrom[chrom], chrom, length, ann.path)
            seq = _chrom_array(fa, chrom)
            res = classify_chromosome(
                seq, by_chrom[chrom], table, transcripts, exclude_softmasked, chrom
            )
            log.info(
                "%s: %d 0-fold and %d 4-fold sites from %d transcripts",
                chrom,
                res.class_sites["0fold"],
                res.class_sites["4fold"],
                res.transcripts_used,
            )
            out.append(res)
            del seq
            prog.advance()
    finally:
        fa.close()
    prog.close()
    result = ClassifyResult(
        out,
        code=table.number,
        transcripts=transcripts,
        exclude_softmasked=exclude_softmasked,
        fasta=os.fspath(fasta),
        gff=ann.path,
        options={
            "code": table.number,
            "transcripts": transcripts,
            "exclude_softmasked": exclude_softmasked,
        },
    )
    if result.total("0fold") + result.total("4fold") == 0:
        ex = {r: result.total(r) for r in EXCLUSION_REASONS if result.total(r)}
        why = ", ".join(f"{r}={n}" for r, n in ex.items()) or "nothing classifiable"
        raise InputError(
            f"no 0-fold or 4-fold site found ({why}); check that the GFF3 "
            "matches this FASTA and the genetic code (--code)",
            ann.path,
        )
    return result


def coding_sequences(
    fasta: str | os.PathLike, gff: str | os.PathLike | Annotation, ids: Iterable[str] | None = None
) -> dict[str, str]:
    """Spliced coding sequence of each transcript, built as :func:`classify_sites` does.

    Parameters
    ----------
    fasta, gff : path-like
        As for :func:`classify_sites`.
    ids : iterable of str, optional
        Transcript IDs to return (default: all).

    Returns
    -------
    dict of str to str
        Transcript ID → the bases of all its CDS parts in transcript order (on the coding
        strand, case as in the FASTA, phase bases included).
    """
    ann, fa, by_chrom, order = _prepare(fasta, gff, None)
    want = None if ids is None else set(ids)
    out: dict[str, str] = {}
    try:
        for chrom in order:
            txs = [t for t in by_chrom[chrom] if want is None or t.id in want]
            if not txs:
                continue
            _check_bounds(txs, chrom, fa.get_reference_length(chrom), ann.path)
            seq = _chrom_array(fa, chrom)
            lay = _layout(txs)
            bases = seq[lay.pos]
            bases = np.where(lay.minus, _COMPLEMENT[bases], bases).astype(np.uint8)
            for k, t in enumerate(txs):
                out[t.id] = bases[lay.tx_first[k] : lay.tx_first[k + 1]].tobytes().decode()
    finally:
        fa.close()
    return out


def write_summary(result: ClassifyResult, path: str | os.PathLike, force: bool = False) -> None:
    """Write the summary TSV (``chrom, kind, name, count, unit``) of a classification."""
    prov = provenance(result.options)
    with atomic_output(path, force=force, newline="") as fh:
        fh.write(
            f"# driftband {prov['version']} classify: sites per class and exclusions by reason\n"
        )
        fh.write(
            f"# fasta={result.fasta} gff={result.gff} code={result.code} "
            f"transcripts={result.transcripts} "
            f"exclude_softmasked={str(result.exclude_softmasked).lower()}\n"
        )
        fh.write("chrom\tkind\tname\tcount\tunit\n")
        for row in result.summary_rows():
            fh.write("\t".join(str(x) for x in row) + "\n")
