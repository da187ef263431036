"""Every record of a small VCF/BCF with all its genotypes decoded, as whole arrays: a helper
of the reference checks (``check_spectra_allel.py`` compares its allele counts with
scikit-allel's) and of the reader's tests (``tests/test_vcf.py``).

Built on driftband's public reader only (``VcfSource.stream`` and
``VariantBatch.genotypes``); memory grows with the file, so it is not for real studies.
"""

from __future__ import annotations

import os
from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np

from driftband.variants.source import BATCH_BYTES, VcfSource


@dataclass
class GenotypeTable:
    """All records of a file with decoded genotypes (small files, tests and checks).

    Attributes
    ----------
    chrom : list of str
    pos : ndarray of int64, shape (k,)
    ref, alt : list of str
    alleles : ndarray of int8, shape (k, s, p)
    fields : dict of str to ndarray of int32, shape (k, s)
    fast : ndarray of bool, shape (k,)
    samples : list of str
    """

    chrom: list[str]
    pos: np.ndarray
    ref: list[str]
    alt: list[str]
    alleles: np.ndarray
    fields: dict[str, np.ndarray] = field(default_factory=dict)
    fast: np.ndarray = field(default_factory=lambda: np.zeros(0, bool))
    samples: list[str] = field(default_factory=list)


def read_genotype_table(
    path: str | os.PathLike,
    fields: Sequence[str] = (),
    fast: bool = True,
    batch_bytes: int = BATCH_BYTES,
) -> GenotypeTable:
    """Read every record and decode all genotypes (memory grows with the file).

    Parameters
    ----------
    path : path-like
    fields : sequence of str
        Integer FORMAT subfields to decode too.
    fast : bool
        Vectorised decoder where possible; False decodes every record with pysam.
    """
    with VcfSource(path) as src:
        cols = np.arange(len(src.header.samples), dtype=np.int64)
        parts = []
        for b in src.stream(batch_bytes):
            g = b.genotypes(np.arange(len(b)), cols, fields, fast=fast)
            parts.append((b, g))
        samples = src.header.samples
    if not parts:
        return GenotypeTable(
            [],
            np.zeros(0, np.int64),
            [],
            [],
            np.zeros((0, len(samples), 2), np.int8),
            {f: np.zeros((0, len(samples)), np.int32) for f in fields},
            np.zeros(0, bool),
            samples,
        )
    P = max(g.alleles.shape[2] for _, g in parts)
    al = []
    for _, g in parts:
        a = g.alleles
        if a.shape[2] < P:
            a = np.concatenate([a, np.full(a.shape[:2] + (P - a.shape[2],), -2, np.int8)], axis=2)
        al.append(a)
    return GenotypeTable(
        [b.chrom for b, _ in parts for _ in range(len(b))],
        np.concatenate([b.pos for b, _ in parts]),
        [r.decode() for b, _ in parts for r in b.ref],
        [a.decode() for b, _ in parts for a in b.alt],
        np.concatenate(al),
        {f: np.concatenate([g.fields[f] for _, g in parts]) for f in fields},
        np.concatenate([g.fast for _, g in parts]),
        list(samples),
    )
