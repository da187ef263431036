"""Plain data objects of the spectra stage: the hand-off point between counting and fitting.

Conventions (the README's "Conventions" section): a spectrum of ``n`` sampled gene copies
has ``n + 1`` entries; entry ``i`` counts callable sites of the class with ``i`` derived
copies, entry 0 includes callable sites absent from the VCF, entry ``n`` counts sites fixed
for the derived allele in the sample (divergence). A folded spectrum has ``n // 2 + 1``
entries (minor-allele counts). In every spectrum the entries add up to the callable-site
count.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import ArrayLike

__all__ = ["Block", "ClassSpectrum", "PopulationSpectra", "SpectraSet", "spectrum_length"]


def spectrum_length(n: int, folded: bool) -> int:
    """Number of entries of a spectrum of ``n`` gene copies (``n + 1`` or ``n // 2 + 1``)."""
    return n // 2 + 1 if folded else n + 1


def _counts_array(x: ArrayLike) -> np.ndarray:
    """Counts as int64, or float64 when some are not whole numbers (projected spectra)."""
    a = np.asarray(x)
    if a.dtype.kind == "f" and not np.all(a == np.round(a)):
        return a.astype(np.float64)
    return a.astype(np.int64)


@dataclass(frozen=True)
class Block:
    """A genomic block (0-based, half-open) used as the resampling unit of the bootstrap."""

    chrom: str
    start: int
    end: int
    name: str = ""


@dataclass
class ClassSpectrum:
    """The spectrum of one site class in one population, in total and per block.

    Attributes
    ----------
    block_sfs : ndarray of int64 or float64, shape (n_blocks, m)
        Per-block spectra, ``m = n + 1`` (unfolded) or ``n // 2 + 1`` (folded). Counted
        spectra are int64; spectra projected to fewer gene copies than were called
        (hypergeometric projection of sites with missing data) hold expected counts and
        are float64.
    block_sites : ndarray of int64, shape (n_blocks,)
        Callable sites of the class per block; equals ``block_sfs.sum(axis=1)``.
    """

    block_sfs: np.ndarray
    block_sites: np.ndarray

    def __post_init__(self) -> None:
        self.block_sfs = np.atleast_2d(_counts_array(self.block_sfs))
        self.block_sites = np.asarray(self.block_sites, dtype=np.int64).reshape(-1)
        if self.block_sfs.shape[0] != self.block_sites.shape[0]:
            raise ValueError(
                f"`block_sfs` has {self.block_sfs.shape[0]} blocks, "
                f"`block_sites` has {self.block_sites.shape[0]}"
            )

    @property
    def sfs(self) -> np.ndarray:
        """Total spectrum, shape (m,), int64 (float64 when projected)."""
        return self.block_sfs.sum(axis=0)

    @property
    def sites(self) -> int:
        """Total callable sites of the class."""
        return int(self.block_sites.sum())

    @classmethod
    def from_total(cls, sfs: np.ndarray, sites: int | None = None) -> ClassSpectrum:
        """A one-block spectrum (e.g. from a published table or a simulation)."""
        sfs = _counts_array(sfs)
        sites = int(round(float(sfs.sum()))) if sites is None else int(sites)
        return cls(sfs[None, :], np.array([sites]))


@dataclass
class PopulationSpectra:
    """Spectra of every site class of one population.

    Attributes
    ----------
    name : str
        Population name.
    n : int
        Gene copies sampled (after projection).
    folded : bool
        True for minor-allele spectra.
    classes : dict of str to ClassSpectrum
        Keyed by class name, e.g. ``"0fold"`` and ``"4fold"``.
    polarisation : str
        ``"aa"``, ``"outgroup:POP"``, ``"fold"`` or ``"given"``.
    stats : dict
        Diversity statistics per class (filled by :func:`driftband.spectra.diversity`).
    """

    name: str
    n: int
    folded: bool
    classes: dict[str, ClassSpectrum]
    polarisation: str = "given"
    stats: dict[str, Any] = field(default_factory=dict)

    @property
    def divergence(self) -> bool:
        """True when entry ``n`` (fixed derived) is meaningful: unfolded, polarised data."""
        return not self.folded


@dataclass
class SpectraSet:
    """Everything a spectra file holds.

    Attributes
    ----------
    populations : dict of str to PopulationSpectra
    blocks : list of Block
        Shared by all populations and classes (same order as the block arrays).
    skipped : dict of str to int
        Records skipped, by reason.
    provenance : dict
        How the spectra were made.
    """

    populations: dict[str, PopulationSpectra]
    blocks: list[Block] = field(default_factory=list)
    skipped: dict[str, int] = field(default_factory=dict)
    provenance: dict[str, Any] = field(default_factory=dict)
