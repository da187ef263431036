"""Polarisation from an ancestral sequence: a FASTA aligned to the reference.

``--ancestral fasta:FILE`` takes the ancestral base of every class site from FILE, a FASTA
whose sequences have the names and coordinates of the reference (an inferred ancestral
genome, say), upper case for confident calls and lower case for low-confidence ones, by
the usual convention of such files (common practice). :func:`attach_ancestral` reads it
once, before any VCF record, and puts into the :class:`~driftband.spectra.plan.SitePlan`

* the ancestral base of every callable class site (upper-cased), which the counting then
  uses exactly as it uses an INFO/AA of one base (a record whose ancestral base is neither
  REF nor ALT is ``unpolarisable``);
* the class sites without one, dropped from the callable sites and counted by reason
  (:data:`DROP_REASONS`): ``no_ancestral_base`` (N, ``-`` or any other character, or a
  position beyond the sequence or on a sequence the FASTA lacks) and, when
  ``exclude_lowercase``, ``low_confidence_ancestral`` (a lower-case base). A record at such
  a site is skipped with the same reason.

A site absent from the VCF counts at entry 0 (ancestral), as with INFO/AA: spectra do not
see the reference base, so a site whose ancestral base differs from REF is counted as
fixed derived only when the VCF holds a record for it (an all-sites VCF).
"""

from __future__ import annotations

import logging
import os
from collections.abc import Mapping

import numpy as np

from ..exceptions import InputError
from .plan import ChromSites, SitePlan, chrom_mismatch_hint

__all__ = ["DROP_REASONS", "attach_ancestral"]

log = logging.getLogger("driftband")

#: Why a class site has no usable ancestral base; reason code = index + 1.
DROP_REASONS = ("no_ancestral_base", "low_confidence_ancestral")

_UPPER = np.zeros(256, np.uint8)
_UPPER[[65, 67, 71, 84]] = [65, 67, 71, 84]
_LOWER = np.zeros(256, np.uint8)
_LOWER[[97, 99, 103, 116]] = [65, 67, 71, 84]


def _runs(pos: np.ndarray, key: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Maximal runs of consecutive positions with equal ``key``: starts, ends, index of
    each run's first element."""
    if not pos.size:
        z = np.zeros(0, np.int64)
        return z, z, z
    brk = np.r_[True, (np.diff(pos) != 1) | (np.diff(key) != 0)]
    first = np.flatnonzero(brk)
    last = np.r_[first[1:] - 1, pos.size - 1]
    return pos[first], pos[last] + 1, first


def attach_ancestral(
    plan: SitePlan,
    path: str | os.PathLike,
    exclude_lowercase: bool = False,
    contig_lengths: Mapping[str, int] | None = None,
) -> tuple[SitePlan, dict[str, dict[str, int]]]:
    """Read the ancestral base of every callable site of ``plan`` from a FASTA.

    Parameters
    ----------
    plan : SitePlan
        Callable class sites (classes ∩ mask ∩ regions ∩ blocks).
    path : path-like
        Ancestral FASTA (plain or bgzipped; a ``.fai`` is made if missing).
    exclude_lowercase : bool
        Drop sites whose ancestral base is lower case (low confidence).
    contig_lengths : mapping, optional
        Sequence lengths of the VCF header; a FASTA sequence of another length is refused
        (another assembly).

    Returns
    -------
    plan : SitePlan
        The callable sites that have an ancestral base, with it (``anc``) and the dropped
        ones (``dropped``); blocks left without sites are removed (renumbered).
    dropped : dict of str to dict of str to int
        Sites dropped, by reason (:data:`DROP_REASONS`) and class.

    Raises
    ------
    InputError
        Not a FASTA, no sequence named as the class sites' chromosomes, or a length that
        differs from the VCF header's.
    """
    from ..sites.fasta import open_fasta

    fa = open_fasta(path)
    try:
        names = set(fa.references)
        lengths = dict(zip(fa.references, fa.lengths))
        chroms = list(plan.chroms)
        if chroms and not names & set(chroms):
            raise InputError(
                f"the ancestral FASTA has none of the class sites' chromosomes "
                f"({', '.join(chroms[:3])} ...); {chrom_mismatch_hint(chroms, names)}",
                path,
            )
        for c in chroms:
            n = (contig_lengths or {}).get(c)
            if c in lengths and n is not None and lengths[c] != n:
                raise InputError(
                    f"sequence {c!r} has {lengths[c]:,} bases but the VCF header gives "
                    f"length={n:,}; the ancestral FASTA must be aligned to the VCF's reference",
                    path,
                )
        absent = [c for c in chroms if c not in names]
        if absent:
            log.warning(
                "the ancestral FASTA %s lacks %d chromosome(s) with class sites (%s%s); "
                "their sites are dropped (no_ancestral_base)",
                os.fspath(path),
                len(absent),
                ", ".join(absent[:5]),
                " ..." if len(absent) > 5 else "",
            )
        nclass = len(plan.classes)
        tally = np.zeros((len(DROP_REASONS) + 1, nclass), np.int64)
        out: dict[str, ChromSites] = {}
        for c, cs in plan.chroms.items():
            lens = cs.ends - cs.starts
            iid = np.repeat(np.arange(lens.size), lens)
            pos = cs.starts[iid] + (np.arange(iid.size) - np.repeat(np.cumsum(lens) - lens, lens))
            raw = np.zeros(pos.size, np.uint8)
            if c in names and pos.size:
                lo, hi = int(pos[0]), min(int(pos[-1]) + 1, lengths[c])
                if hi > lo:
                    seq = np.frombuffer(fa.fetch(c, lo, hi).encode("ascii", "replace"), np.uint8)
                    inside = pos < hi
                    raw[inside] = seq[pos[inside] - lo]
            up, low = _UPPER[raw], _LOWER[raw]
            why = np.where(up > 0, 0, np.where(low > 0, 2 if exclude_lowercase else 0, 1))
            code = np.where(up > 0, up, low)
            tally += np.bincount(why * nclass + cs.cls[iid], minlength=tally.size).reshape(
                tally.shape
            )
            keep = why == 0
            s, e, first = _runs(pos[keep], iid[keep])
            ki = iid[keep][first]
            drop = ~keep
            ds, de, dfirst = _runs(pos[drop], iid[drop] * 4 + why[drop])
            out[c] = ChromSites(
                s,
                e,
                cs.cls[ki],
                cs.block[ki],
                code[keep],
                (ds, de, why[drop][dfirst].astype(np.int64)),
            )
    finally:
        fa.close()
    dropped = {
        r: {cls: int(tally[i + 1, k]) for k, cls in enumerate(plan.classes)}
        for i, r in enumerate(DROP_REASONS)
    }
    return plan.with_chroms(out), dropped
