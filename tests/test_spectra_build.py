"""Counting spectra: hand-derived cases for every rule, and an independent count on
simulated data (projection by scipy.stats.hypergeom, written out in the test)."""

from __future__ import annotations

import json
import random
import shlex
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from scipy.stats import hypergeom

from driftband.exceptions import OptionError
from driftband.spectra import read_spectra_json
from driftband.spectra.build import build_spectra
from driftband.spectra.counting import RegionCounts, count_region, make_design
from driftband.spectra.plan import make_plan
from driftband.spectra.projection import (
    choose_sample_size,
    projection_matrix,
    spectra_from_counts,
)
from driftband.variants.samples import assign_samples, read_sample_table
from driftband.variants.source import VcfSource
from vcf_fixtures import header, random_study, rec, write_text, write_vcf

ROOT = Path(__file__).resolve().parents[1]
SAMPLES = ["p1a", "p1b", "p2a", "p2b"]
SAMPLE_TABLE = "sample\tpopulation\np1a\tone\np1b\tone\np2a\ttwo\np2b\ttwo\n"
SITES = "1\t0\t100\t4fold\n1\t100\t200\t0fold\n"


def _case_a() -> str:
    r = [
        rec(1, 11, "A", "G", ["0/1", "0/0", "1/1", "0/1"], info="AA=A"),
        rec(1, 21, "A", "G", ["0/0", "0/0", "0/1", "1/1"], info="AA=g"),  # REF derived
        rec(1, 31, "A", ".", ["0/0", "0/0", "0/0", "0/0"], info="AA=A"),  # monomorphic
        rec(1, 41, "A", "G", ["0/1", "0/1", "0/1", "0/1"], info="AA=T"),  # unpolarisable
        rec(1, 111, "A", "G,T", ["0/1", "0/2", "0/0", "0/0"]),  # multi-allelic
        rec(1, 121, "A", "AT", ["0/1", "0/1", "0/0", "0/0"]),  # indel
        rec(1, 131, "A", "G", ["0/1", "0/1", "0/0", "0/0"], filt="LowQual"),
        rec(1, 151, "A", "G", ["0/1", "0/0", "0/0", "0/0"]),  # duplicate ...
        rec(1, 151, "A", "C", ["0/0", "0/0", "0/1", "0/0"]),  # ... position
        rec(1, 161, "A", "G", ["./.", "0/1", "0/1", "0/0"]),  # missing in one
        rec(1, 301, "A", "G", ["0/1", "0/1", "0/1", "0/1"]),  # no class
    ]
    return header(SAMPLES, [("1", 1000)]) + "\n".join(r) + "\n"


@pytest.fixture
def case_a(tmp_path):
    vcf = write_vcf(tmp_path / "a.vcf", _case_a(), "bgzf")
    return (
        vcf,
        write_text(tmp_path / "pm.tsv", SAMPLE_TABLE),
        write_text(tmp_path / "s.bed", SITES),
    )


def _sfs(ss, pop, cls):
    return ss.populations[pop].classes[cls].sfs.tolist()


def test_hand_derived_case(case_a):
    vcf, pm, bed = case_a
    ss = build_spectra(vcf, pm, bed, project=4)
    # 4fold: 100 sites, one removed (AA neither REF nor ALT)
    assert _sfs(ss, "one", "4fold") == [97, 1, 0, 0, 1]  # pos 21: REF derived, fixed
    assert _sfs(ss, "two", "4fold") == [97, 1, 0, 1, 0]
    # 0fold: 100 sites, multi-allelic and the duplicated position removed; the indel is not
    assert _sfs(ss, "one", "0fold") == [96, 0, 1, 0, 0]  # pos 161 dropped (2 copies < 4)
    assert ss.populations["one"].classes["0fold"].sites == 97
    assert _sfs(ss, "two", "0fold") == [97, 1, 0, 0, 0]
    assert ss.populations["two"].classes["0fold"].sites == 98
    assert ss.skipped == {
        "no_site_class": 1,
        "indel_or_symbolic": 1,
        "multiallelic": 1,
        "filter": 0,
        "unpolarisable": 1,
        "duplicate_position": 2,
        "missing_data:one": 1,
        "missing_data:two": 0,
    }
    assert ss.populations["one"].n == 4 and not ss.populations["one"].folded
    assert ss.populations["one"].classes["4fold"].block_sfs.dtype == np.int64


def test_pass_only_removes_filtered_site(case_a):
    vcf, pm, bed = case_a
    ss = build_spectra(vcf, pm, bed, project=4, pass_only=True)
    assert ss.skipped["filter"] == 1
    assert _sfs(ss, "one", "0fold") == [96, 0, 0, 0, 0]
    assert _sfs(ss, "two", "0fold") == [96, 1, 0, 0, 0]


def test_fold(case_a):
    vcf, pm, bed = case_a
    ss = build_spectra(vcf, pm, bed, project=4, ancestral="fold")
    # folding needs no ancestral allele: pos 41 is kept (2 of 4 ALT copies in each)
    assert _sfs(ss, "one", "4fold") == [98, 1, 1]  # pos 21: 0 ALT copies -> entry 0
    assert _sfs(ss, "two", "4fold") == [97, 2, 1]  # pos 11 and 21: 3 ALT -> minor 1
    assert ss.populations["one"].folded and ss.populations["one"].polarisation == "fold"
    assert ss.skipped["unpolarisable"] == 0


def test_default_rule_projects_when_data_missing(case_a):
    vcf, pm, bed = case_a
    ss = build_spectra(vcf, pm, bed)
    # population one: usable records 11, 21, 31, 131, 161; only 4 of 5 (80 % < 90 %) have
    # all 4 copies called, so n = 2 (= copies called at 161) and the others are projected
    assert ss.populations["one"].n == 2
    assert ss.populations["two"].n == 4  # nothing missing: no projection
    sfs = ss.populations["one"].classes["4fold"].sfs
    # pos 11: d=1 of 4 -> P(j=1) = 1/2; pos 21: d=4 of 4 -> j=2
    np.testing.assert_allclose(sfs, [97 + 0.5, 0.5, 1.0], atol=1e-12)


def test_projection_matrix_against_scipy():
    # reference: scipy.stats.hypergeom(M=m, n=d, N=n).pmf(j)
    for m, n in [(6, 4), (20, 7), (301, 250)]:
        P = projection_matrix(m, n)
        for d in range(0, m + 1, max(1, m // 13)):
            np.testing.assert_allclose(
                P[d], hypergeom(m, d, n).pmf(np.arange(n + 1)), rtol=1e-9, atol=1e-300
            )
        np.testing.assert_allclose(P.sum(axis=1), 1.0, rtol=1e-12)


def test_choose_sample_size_rule():
    assert choose_sample_size(np.array([40]), np.array([7])) == 40
    # 85 % at 40, 10 % at 38: 90 % need m >= 38
    assert choose_sample_size(np.array([40, 38, 30]), np.array([85, 10, 5])) == 38
    assert choose_sample_size(np.array([40, 38, 30]), np.array([90, 5, 5])) == 40


def test_outgroup_polarisation_and_divergence(tmp_path):
    samples = ["a1", "a2", "b1", "b2", "o1"]
    r = [
        rec(1, 5, "A", "G", ["1/1", "1/1", "0/1", "1/1", "0/0"], info="."),  # a fixed derived
        rec(1, 6, "A", "G", ["0/1", "0/0", "0/0", "0/0", "1/1"], info="."),  # ALT ancestral
        rec(1, 7, "A", "G", ["0/1", "0/0", "0/0", "0/0", "0/1"], info="."),  # og polymorphic
        rec(1, 8, "A", "G", ["0/1", "0/0", "0/0", "0/0", "./."], info="."),  # og uncalled
        rec(1, 9, "A", ".", ["0/0", "0/0", "0/0", "0/0", "./."], info="."),  # monomorphic
    ]
    vcf = write_vcf(tmp_path / "o.vcf", header(samples, aa=False) + "\n".join(r) + "\n")
    pm = write_text(tmp_path / "pm.tsv", "a1\tA\na2\tA\nb1\tB\nb2\tB\no1\tout\n")
    bed = write_text(tmp_path / "s.bed", "1\t0\t10\t4fold\n1\t10\t20\t0fold\n")
    ss = build_spectra(vcf, pm, bed, ancestral="outgroup:out")
    assert set(ss.populations) == {"A", "B"}
    assert ss.populations["A"].polarisation == "outgroup:out"
    # 10 sites, 2 unpolarisable; pos 5: A fixed derived (divergence), B 3 derived;
    # pos 6: ALT ancestral, so A has 3 derived (REF) copies and B is fixed derived
    assert _sfs(ss, "A", "4fold") == [6, 0, 0, 1, 1]
    assert _sfs(ss, "B", "4fold") == [6, 0, 0, 1, 1]
    assert ss.skipped["unpolarisable"] == 2
    with pytest.raises(OptionError, match="outgroup:nowhere"):
        build_spectra(vcf, pm, bed, ancestral="outgroup:nowhere")


def test_haploid_and_mixed_ploidy(tmp_path):
    samples = ["m1", "m2", "f1", "f2"]
    r = [
        rec(1, 2, "A", "G", ["1", "0", "0/1", "1/1"]),
        rec(1, 3, "A", "G", ["0", "0", "0/0", "0/1"]),
    ]
    vcf = write_vcf(tmp_path / "h.vcf", header(samples) + "\n".join(r) + "\n")
    pm = write_text(tmp_path / "pm.tsv", "m1\tP\nm2\tP\nf1\tP\nf2\tP\n")
    bed = write_text(tmp_path / "s.bed", "1\t0\t10\t4fold\n")
    ss = build_spectra(vcf, pm, bed)
    assert ss.populations["P"].n == 6  # 2 haploid + 2 diploid samples
    assert _sfs(ss, "P", "4fold") == [8, 1, 0, 0, 1, 0, 0]


def test_monomorphic_records_not_counted_twice(tmp_path):
    samples = ["a", "b", "c"]
    r = [rec(1, p, "A", ".", ["0/0", "0/0", "0/0"]) for p in range(1, 11)]
    r.insert(4, rec(1, 5, "A", "G", ["0/1", "0/0", "0/0"]))
    r = [x for x in r if not x.startswith("1\t5\t.\tA\t.")]
    r.append(rec(1, 12, "C", ".", ["0/0", "0/0", "0/0"], info="AA=T"))  # fixed derived
    vcf = write_vcf(tmp_path / "m.vcf", header(samples) + "\n".join(r) + "\n")
    pm = write_text(tmp_path / "pm.tsv", "a\tP\nb\tP\nc\tP\n")
    bed = write_text(tmp_path / "s.bed", "1\t0\t20\t4fold\n")
    ss = build_spectra(vcf, pm, bed)
    cs = ss.populations["P"].classes["4fold"]
    assert cs.sites == 20 and cs.sfs.tolist() == [18, 1, 0, 0, 0, 0, 1]


def test_genotype_filters(tmp_path):
    samples = ["a", "b", "c"]
    r = [
        rec(1, 2, "A", "G", ["0/1:10:50", "1/1:3:50", "0/0:10:50"], fmt="GT:DP:GQ"),
        rec(1, 3, "A", "G", ["0/1:10:5", "1/1:20:50", "0/0:.:50"], fmt="GT:DP:GQ"),
    ]
    vcf = write_vcf(tmp_path / "g.vcf", header(samples) + "\n".join(r) + "\n", "bgzf")
    pm = write_text(tmp_path / "pm.tsv", "a\tP\nb\tP\nc\tP\n")
    bed = write_text(tmp_path / "s.bed", "1\t0\t10\t4fold\n")
    ss = build_spectra(vcf, pm, bed, min_dp=8, min_gq=20, project=4)
    # pos 2: b fails DP -> a, c called (d=1 of 4); pos 3: a fails GQ, c has no DP -> 2 copies
    assert _sfs(ss, "P", "4fold") == [8, 1, 0, 0, 0]
    assert ss.skipped["missing_data:P"] == 1


def test_blocks_windows_and_bed(tmp_path):
    rng = np.random.default_rng(11)
    text, samples, _ = random_study(rng, 6, 300, chroms=("1",), length=30_000)
    vcf = write_vcf(tmp_path / "b.vcf", text, "bgzf")
    pm = write_text(tmp_path / "pm.tsv", "".join(f"{s}\tP\n" for s in samples))
    bed = write_text(tmp_path / "s.bed", "1\t0\t15000\t4fold\n1\t15000\t30000\t0fold\n")
    ss = build_spectra(vcf, pm, bed, block_size=10_000)
    assert [(b.start, b.end) for b in ss.blocks] == [
        (0, 10_000),
        (10_000, 20_000),
        (20_000, 30_000),
    ]
    c4 = ss.populations["P"].classes["4fold"]
    assert c4.block_sites.tolist() == [10_000, 5_000, 0]
    genes = write_text(tmp_path / "g.bed", "1\t1000\t2000\tgeneA\n1\t14000\t16000\tgeneB\n")
    sg = build_spectra(vcf, pm, bed, blocks=genes)
    assert [b.name for b in sg.blocks] == ["geneA", "geneB"]
    assert sg.populations["P"].classes["4fold"].block_sites.tolist() == [1000, 1000]
    assert sg.populations["P"].classes["0fold"].block_sites.tolist() == [0, 1000]
    # the blocks' spectra are those of the same sites selected with --regions
    sr = build_spectra(vcf, pm, bed, regions=["1:1001-2000", "1:14001-16000"], block_size=10**9)
    for c in ("0fold", "4fold"):
        np.testing.assert_array_equal(
            sr.populations["P"].classes[c].sfs, sg.populations["P"].classes[c].sfs
        )


def test_callable_mask(tmp_path):
    rng = np.random.default_rng(5)
    text, samples, truth = random_study(rng, 5, 200, chroms=("1",), length=20_000)
    vcf = write_vcf(tmp_path / "c.vcf", text, "bgzf")
    pm = write_text(tmp_path / "pm.tsv", "".join(f"{s}\tP\n" for s in samples))
    bed = write_text(tmp_path / "s.bed", "1\t0\t20000\t4fold\n")
    mask = write_text(tmp_path / "mask.bed", "1\t100\t5100\n1\t9000\t9500\n")
    ss = build_spectra(vcf, pm, bed, callable_mask=mask)
    assert ss.populations["P"].classes["4fold"].sites == 5500
    inside = [t for t in truth if 100 <= t[1] - 1 < 5100 or 9000 <= t[1] - 1 < 9500]
    assert ss.skipped["no_site_class"] == len(truth) - len(inside)


# ---------------------------------------------------------------------------- independent


def _independent(truth, pops, classes, n_of, blocks, block_size):
    """Straightforward count: loops over records, scipy.stats.hypergeom for projection."""
    out = {}
    for p, cols in pops.items():
        n = n_of[p]
        for c, ivs in classes.items():
            L = {b: 0 for b in range(blocks)}
            for s, e in ivs:
                for x in range(s, e):
                    L[x // block_size] += 1
            sfs = {b: np.zeros(n + 1) for b in L}
            for chrom, pos, ref, alt, aa, al in truth:
                x = pos - 1
                if chrom != "1" or not any(s <= x < e for s, e in ivs):
                    continue
                b = x // block_size
                a = al[cols]
                called = int(((a == 0) | (a == 1)).sum())
                d = int((a == 1).sum())
                if aa != ref and alt != ".":
                    d = called - d
                if called < n:
                    L[b] -= 1
                    continue
                sfs[b] += hypergeom(called, d, n).pmf(np.arange(n + 1))
                sfs[b][0] -= 1
            for b in L:
                sfs[b][0] += L[b]
            out[(p, c)] = np.array([sfs[b] for b in sorted(L)]), np.array([L[b] for b in sorted(L)])
    return out


@pytest.mark.parametrize("missing", [0.0, 0.04])
def test_matches_independent_count_on_simulated_data(tmp_path, missing):
    rng = np.random.default_rng(2024 + int(missing * 100))
    text, samples, truth = random_study(
        rng, 16, 900, chroms=("1",), length=40_000, missing=missing, haploid_samples=(15,)
    )
    vcf = write_vcf(tmp_path / "sim.vcf", text, "bgzf")
    pm = write_text(
        tmp_path / "pm.tsv",
        "".join(f"{s}\t{'north' if i < 9 else 'south'}\n" for i, s in enumerate(samples)),
    )
    classes = {"4fold": [(0, 9000), (20_000, 31_000)], "0fold": [(9000, 20_000), (31_000, 40_000)]}
    bed = write_text(
        tmp_path / "s.bed",
        "".join(f"1\t{s}\t{e}\t{c}\n" for c, ivs in classes.items() for s, e in ivs),
    )
    project = {"north": 18, "south": 13} if missing else None
    ss = build_spectra(vcf, pm, bed, project=project, block_size=10_000)
    pops = {"north": list(range(9)), "south": list(range(9, 16))}
    n_of = project or {"north": 18, "south": 13}  # without missing data: all copies
    want = _independent(truth, pops, classes, n_of, 4, 10_000)
    for (p, c), (bsfs, bsites) in want.items():
        cs = ss.populations[p].classes[c]
        assert ss.populations[p].n == n_of[p]
        np.testing.assert_array_equal(cs.block_sites, bsites)
        if missing:
            np.testing.assert_allclose(cs.block_sfs, bsfs, rtol=1e-10, atol=1e-9)
        else:
            assert cs.block_sfs.dtype == np.int64
            np.testing.assert_array_equal(cs.block_sfs, np.rint(bsfs).astype(np.int64))


@pytest.mark.parametrize("kind", ["plain", "gzip", "bgzf_noindex", "csi", "bcf"])
def test_every_input_kind_gives_the_same_spectra(tmp_path, kind):
    rng = np.random.default_rng(99)
    text, samples, _ = random_study(rng, 8, 400, chroms=("1", "2"), length=30_000, missing=0.03)
    pm = write_text(
        tmp_path / "pm.tsv", "".join(f"{s}\t{'AB'[i % 2]}\n" for i, s in enumerate(samples))
    )
    bed = write_text(
        tmp_path / "s.bed",
        "1\t0\t30000\t4fold\n2\t0\t12000\t0fold\n2\t12000\t30000\t4fold\n1\t40000\t50000\t0fold\n",
    )
    ref = build_spectra(write_vcf(tmp_path / "r.vcf", text, "bgzf"), pm, bed, region_size=7_000)
    got = build_spectra(write_vcf(tmp_path / "k.vcf", text, kind), pm, bed)
    for p in ref.populations:
        assert got.populations[p].n == ref.populations[p].n
        for c, cs in ref.populations[p].classes.items():
            np.testing.assert_allclose(
                got.populations[p].classes[c].block_sfs, cs.block_sfs, rtol=1e-12, atol=1e-9
            )
    assert got.blocks == ref.blocks
    for k in ("multiallelic", "unpolarisable", "missing_data:A"):
        assert got.skipped[k] == ref.skipped[k]


def test_region_tasks_sum_in_any_order(tmp_path):
    rng = np.random.default_rng(8)
    text, samples, _ = random_study(rng, 10, 500, chroms=("1", "2"), length=40_000, missing=0.02)
    vcf = write_vcf(tmp_path / "t.vcf", text, "bgzf")
    pm = read_sample_table(
        write_text(
            tmp_path / "pm.tsv", "".join(f"{s}\t{'AB'[i % 2]}\n" for i, s in enumerate(samples))
        )
    )
    from driftband.sites.bed import read_site_classes

    sc = read_site_classes(
        write_text(tmp_path / "s.bed", "1\t0\t40000\t4fold\n2\t0\t40000\t0fold\n")
    )
    with VcfSource(vcf) as src:
        design = make_design(assign_samples(pm, src.header.samples), sorted(sc.classes))
        plan = make_plan(sc, src.chroms, block_size=10_000)
    tasks = plan.regions(6_000)
    parts = [count_region(vcf, c, s, e, design, plan.region_sites(c, s, e)) for c, s, e in tasks]
    random.Random(1).shuffle(parts)
    a = spectra_from_counts(sum(parts, RegionCounts()), design, plan.blocks)
    b = spectra_from_counts(RegionCounts.total(parts[::-1]), design, plan.blocks)
    full = build_spectra(vcf, pm, sc, block_size=10_000)
    for p in full.populations:
        for c in full.populations[p].classes:
            x = a.populations[p].classes[c].block_sfs
            np.testing.assert_array_equal(x, b.populations[p].classes[c].block_sfs)
            np.testing.assert_array_equal(x, full.populations[p].classes[c].block_sfs)


def test_results_are_deterministic(tmp_path):
    rng = np.random.default_rng(4)
    text, samples, _ = random_study(rng, 9, 300, missing=0.05)
    vcf = write_vcf(tmp_path / "d.vcf", text, "bgzf")
    pm = write_text(tmp_path / "pm.tsv", "".join(f"{s}\tP\n" for s in samples))
    bed = write_text(tmp_path / "s.bed", "1\t0\t50000\t4fold\n2\t0\t50000\t0fold\n")
    from driftband.spectra.io import spectra_to_dict

    docs = []
    for _ in range(2):
        d = spectra_to_dict(build_spectra(vcf, pm, bed))
        d.pop("provenance")
        docs.append(json.dumps(d, sort_keys=True))
    assert docs[0] == docs[1]


# ---------------------------------------------------------------------------- command line


def test_readme_quick_start_runs(tmp_path):
    # the README's example of the spectra step on example_vcfs/tiny.* (any code block)
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    blocks = [b.replace("\\\n", " ") for b in text.split("```")[1::2]]  # join continued lines
    cmd = next(b for b in blocks if "driftband spectra example_vcfs/tiny.vcf.gz" in b)
    cmd = cmd[cmd.index("driftband spectra") :].split("&&")[0].split("\n")[0]
    args = shlex.split(cmd)
    assert args[:2] == ["driftband", "spectra"]
    out = tmp_path / "tiny.spectra.json"
    args[args.index("-o") + 1] = str(out)  # the README writes /tmp/tiny.spectra.json
    r = subprocess.run(
        [sys.executable, "-m", "driftband", *args[1:]], cwd=ROOT, capture_output=True, text=True
    )
    assert r.returncode == 0, r.stderr
    ss = read_spectra_json(out)
    assert set(ss.populations) >= {"lowvale", "highvale"}
    for pop in ss.populations.values():
        for cs in pop.classes.values():
            assert cs.sites > 0 and cs.sfs[1:].sum() > 0
    assert "piN/piS" in r.stderr and "skipped records" in r.stderr
    assert "lowvale" in r.stderr
    doc = json.loads(out.read_text())
    assert doc["provenance"]["inputs"]["vcf"]["sha256"]
    assert doc["provenance"]["options"]["ancestral"] == "aa"
    assert "\r" not in r.stderr  # no progress bar when stderr is not a terminal


def test_cli_writes_tsv_and_outgroup(tmp_path):
    from driftband.cli import main

    ex = ROOT / "example_vcfs"
    out, tsv = tmp_path / "s.json", tmp_path / "s.tsv"
    rc = main(
        [
            "spectra",
            str(ex / "tiny.vcf.gz"),
            "--samples",
            str(ex / "tiny.samples.tsv"),
            "--sites",
            str(ex / "tiny.sites.bed"),
            "--ancestral",
            "outgroup:islet",
            "--project",
            "12,highvale=10",
            "-o",
            str(out),
            "--tsv",
            str(tsv),
            "-q",
        ]
    )
    assert rc == 0
    ss = read_spectra_json(out)
    assert {p: v.n for p, v in ss.populations.items()} == {"lowvale": 12, "highvale": 10}
    rows = tsv.read_text().splitlines()
    assert rows[0] == "population\tclass\tn\tfolded\tderived_copies\tsite_count"
    assert len(rows) == 1 + 2 * 13 + 2 * 11


def test_provenance_records_called_copies_and_reads_version_1(tmp_path, caplog):
    """provenance.counts.called_copies_max is the most gene copies called at a usable
    class site, recounted here with pysam (htslib) from the same VCF; a version-1 file
    (input named 'popmap') is read with a warning and its input renamed."""
    import pysam

    ex = ROOT / "example_vcfs"
    out = tmp_path / "s.json"
    ss = build_spectra(ex / "tiny.vcf.gz", ex / "tiny.samples.tsv", ex / "tiny.sites.bed")
    from driftband.spectra.io import write_spectra_json

    write_spectra_json(ss, out)
    pops = {}
    for line in (ex / "tiny.samples.tsv").read_text().splitlines()[1:]:
        s, p = line.split("\t")
        pops.setdefault(p, []).append(s)
    sites = set()
    for line in (ex / "tiny.sites.bed").read_text().splitlines():
        c, a, b, _k = line.split("\t")
        sites.update((c, i) for i in range(int(a), int(b)))
    best = dict.fromkeys(pops, 0)
    with pysam.VariantFile(str(ex / "tiny.vcf.gz")) as vf:
        for r in vf:
            if (r.chrom, r.pos - 1) not in sites or len(r.alts or ()) > 1:
                continue
            if any(len(a) != 1 for a in (r.ref, *(r.alts or ()))):
                continue
            for p, members in pops.items():
                k = sum(a is not None for s in members for a in r.samples[s]["GT"])
                best[p] = max(best[p], k)
    got = json.loads(out.read_text())["provenance"]["counts"]["called_copies_max"]
    assert got == {p: best[p] for p in got} and set(got) == set(ss.populations)
    doc = json.loads(out.read_text())
    doc["schema_version"] = 1
    doc["provenance"]["inputs"]["popmap"] = doc["provenance"]["inputs"].pop("samples")
    old = tmp_path / "old.json"
    old.write_text(json.dumps(doc))
    with caplog.at_level("WARNING", logger="driftband"):
        back = read_spectra_json(old)
    assert "samples" in back.provenance["inputs"] and "popmap" not in back.provenance["inputs"]
    assert any(
        "old.json" in r.getMessage() and "version 1" in r.getMessage() for r in caplog.records
    )
    for name, pop in ss.populations.items():
        for c, cs in pop.classes.items():
            np.testing.assert_array_equal(back.populations[name].classes[c].sfs, cs.sfs)
