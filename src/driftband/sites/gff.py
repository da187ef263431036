"""A GFF3 reader for coding sequences: gene → mRNA/transcript → CDS through ``Parent``.

Follows the GFF3 specification (Sequence Ontology, version 1.26): nine tab-separated
columns, 1-based closed coordinates, ``Parent`` may list several parents separated by
commas, reserved characters in the seqid and in attribute values are percent-encoded, the
CDS phase (column 8) is the number of bases from the start of the feature (in the direction
of transcription) to the first base of the next codon, and a ``##FASTA`` directive ends the
annotation. Only what coding sequences need is kept: every CDS part with its transcript,
and the transcript's gene.

A transcript is whatever feature a CDS names as its ``Parent`` (usually an mRNA); its gene
is that feature's own first ``Parent`` (itself when it has none, as for a CDS whose parent
is a gene in prokaryotic annotations).
"""

from __future__ import annotations

import gzip
import os
from dataclasses import dataclass, field
from urllib.parse import unquote

import numpy as np

from .._io import open_text
from ..exceptions import InputError

__all__ = ["Annotation", "Transcript", "read_gff3"]


@dataclass
class Transcript:
    """The CDS parts of one transcript.

    Attributes
    ----------
    id : str
        ID of the transcript feature (the CDS parts' ``Parent``).
    gene : str
        ID of its gene (the transcript's ``Parent``; its own ID when it has none).
    seqid : str
        Sequence name (percent-decoded), as in column 1.
    strand : str
        ``+`` or ``-``.
    starts, ends, phases : ndarray of int64, shape (k,)
        CDS parts as 0-based half-open intervals with their phases, in file order.
    lines : ndarray of int64, shape (k,)
        1-based line number of each part in the GFF3 file.
    cds_id : str or None
        ``ID`` of the (first) CDS feature, e.g. ``cds-NP_171609.1`` in NCBI files.
    pseudo : bool
        Any part or the transcript carries ``pseudo=true`` (a pseudogene's CDS).
    problem : str or None
        Why the transcript cannot be used as a whole: ``"mixed_strand"`` or
        ``"mixed_seqid"`` (e.g. trans-splicing), else None.
    """

    id: str
    gene: str
    seqid: str
    strand: str
    starts: np.ndarray
    ends: np.ndarray
    phases: np.ndarray
    lines: np.ndarray
    cds_id: str | None = None
    pseudo: bool = False
    problem: str | None = None

    @property
    def cds_length(self) -> int:
        """Total length of the CDS parts in bases."""
        return int((self.ends - self.starts).sum())

    def ordered(self) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """Parts in transcript order (ascending on ``+``, descending on ``-``).

        Returns
        -------
        starts, ends, phases, lines : ndarray of int64, shape (k,)
        """
        order = np.argsort(self.starts, kind="stable")
        if self.strand == "-":
            order = order[::-1]
        return self.starts[order], self.ends[order], self.phases[order], self.lines[order]


@dataclass
class Annotation:
    """Transcripts with CDS parts read from a GFF3 file (file order)."""

    transcripts: list[Transcript]
    path: str | None = None
    n_cds_lines: int = 0
    seqid_lines: dict[str, int] = field(default_factory=dict)

    def seqids(self) -> list[str]:
        """Sequence names that carry CDS parts, in order of first appearance."""
        return list(self.seqid_lines)


# Feature types that are never the parent of a CDS (not remembered, to save memory).
_LEAF_TYPES = frozenset(
    {
        "exon",
        "intron",
        "five_prime_UTR",
        "three_prime_UTR",
        "start_codon",
        "stop_codon",
        "region",
        "repeat_region",
    }
)


def _attributes(text: str) -> dict[str, str]:
    """Parse column 9 into raw (still percent-encoded) values; tags are case-sensitive."""
    out: dict[str, str] = {}
    for item in text.split(";"):
        item = item.strip()
        if not item or "=" not in item:
            continue
        k, v = item.split("=", 1)
        out[k.strip()] = v
    return out


def _dec(s: str) -> str:
    return unquote(s) if "%" in s else s


def _parents(raw: str | None) -> list[str]:
    if not raw:
        return []
    return [_dec(p) for p in raw.split(",") if p]


def read_gff3(path: str | os.PathLike) -> Annotation:
    """Read the CDS parts of a GFF3 file (plain or gzip/bgzip) grouped by transcript.

    Parameters
    ----------
    path : path-like
        GFF3 file.

    Returns
    -------
    Annotation
        One :class:`Transcript` per distinct CDS parent, in order of first appearance. A
        CDS with several parents belongs to each of them.

    Raises
    ------
    InputError
        Naming the file and line: fewer than 9 columns, non-integer or impossible
        coordinates, a CDS without ``Parent``, a CDS phase that is missing (``.``) or not
        0, 1 or 2, a CDS strand that is not ``+`` or ``-``; or no CDS feature at all.
    """
    p = os.fspath(path)
    try:
        fh = open_text(p, errors="replace")
    except FileNotFoundError:
        raise InputError("file not found", p) from None
    parent_of: dict[str, str] = {}  # feature ID -> its first Parent
    pseudo_ids: set[str] = set()
    parts: dict[str, list] = {}  # transcript ID -> [seqids, strands, s, e, ph, ln, ...]
    cds_ids: dict[str, str] = {}
    pseudo_tx: set[str] = set()
    seqid_lines: dict[str, int] = {}
    n_cds = 0
    with fh:
        try:
            for ln, line in enumerate(fh, start=1):
                if line.startswith("#"):
                    if line.startswith("##FASTA"):
                        break
                    continue
                if not line.strip():
                    continue
                f = line.rstrip("\r\n").split("\t")
                if len(f) < 9:
                    raise InputError(
                        f"a GFF3 line needs 9 tab-separated columns, found {len(f)}", p, ln
                    )
                ftype = f[2]
                attrs = _attributes(f[8])
                fid = attrs.get("ID")
                if ftype != "CDS":
                    if fid is not None and ftype not in _LEAF_TYPES:
                        fid = _dec(fid)
                        par = _parents(attrs.get("Parent"))
                        if par:
                            parent_of.setdefault(fid, par[0])
                        if attrs.get("pseudo", "").lower() == "true":
                            pseudo_ids.add(fid)
                    continue
                n_cds += 1
                par = _parents(attrs.get("Parent"))
                if not par:
                    raise InputError(
                        "CDS feature without a Parent attribute; give each "
                        "CDS the ID of its mRNA/transcript as Parent=",
                        p,
                        ln,
                    )
                try:
                    start, end = int(f[3]), int(f[4])
                except ValueError:
                    raise InputError(
                        f"start/end {f[3]!r}, {f[4]!r} are not integers", p, ln
                    ) from None
                if start < 1 or end < start:
                    raise InputError(
                        f"invalid CDS coordinates {start}-{end} (GFF3 is "
                        "1-based and closed: 1 <= start <= end)",
                        p,
                        ln,
                    )
                phase = f[7]
                if phase not in ("0", "1", "2"):
                    what = "missing ('.')" if phase == "." else f"invalid ({phase!r})"
                    raise InputError(
                        f"CDS phase is {what}; column 8 of a CDS must be 0, 1 or 2", p, ln
                    )
                strand = f[6]
                if strand not in ("+", "-"):
                    raise InputError(
                        f"CDS strand is {strand!r}; column 7 of a CDS must be '+' or '-'", p, ln
                    )
                seqid = _dec(f[0])
                seqid_lines.setdefault(seqid, ln)
                is_pseudo = attrs.get("pseudo", "").lower() == "true"
                for tx in par:
                    rec = parts.get(tx)
                    if rec is None:
                        rec = parts[tx] = [[], [], [], [], [], []]
                        if fid is not None:
                            cds_ids[tx] = _dec(fid)
                    rec[0].append(seqid)
                    rec[1].append(strand)
                    rec[2].append(start - 1)
                    rec[3].append(end)
                    rec[4].append(int(phase))
                    rec[5].append(ln)
                    if is_pseudo:
                        pseudo_tx.add(tx)
        except (UnicodeDecodeError, EOFError, OSError, gzip.BadGzipFile) as err:
            raise InputError(f"cannot be read as GFF3 text ({err})", p) from None
    if not parts:
        raise InputError(
            "no CDS features found; a GFF3 annotation with CDS features "
            "(gene -> mRNA -> CDS) is needed",
            p,
        )
    transcripts = []
    for tx, (seqids, strands, s, e, ph, lines) in parts.items():
        problem = None
        if len(set(seqids)) > 1:
            problem = "mixed_seqid"
        elif len(set(strands)) > 1:
            problem = "mixed_strand"
        gene = parent_of.get(tx, tx)
        transcripts.append(
            Transcript(
                id=tx,
                gene=gene,
                seqid=seqids[0],
                strand=strands[0],
                starts=np.array(s, dtype=np.int64),
                ends=np.array(e, dtype=np.int64),
                phases=np.array(ph, dtype=np.int64),
                lines=np.array(lines, dtype=np.int64),
                cds_id=cds_ids.get(tx),
                pseudo=tx in pseudo_tx or tx in pseudo_ids or gene in pseudo_ids,
                problem=problem,
            )
        )
    return Annotation(transcripts, p, n_cds, seqid_lines)
