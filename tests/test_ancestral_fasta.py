"""Polarisation from an ancestral FASTA (``--ancestral fasta:FILE``).

The reference for the main check is the INFO/AA route on the same data: a FASTA that holds,
at every record, the base the record's INFO/AA holds must give identical spectra (the
issue's acceptance test). The dropped-site counts are worked by hand.
"""

from __future__ import annotations

import json
import re

import numpy as np
import pytest

from driftband.cli import main
from driftband.spectra.build import build_spectra
from vcf_fixtures import header, random_study, rec, write_text, write_vcf

SAMPLES = ["p1a", "p1b", "p2a", "p2b"]
SAMPLE_TABLE = "p1a\tone\np1b\tone\np2a\ttwo\np2b\ttwo\n"


def write_fasta(path, seqs: dict[str, str]):
    with open(path, "w") as fh:
        for name, s in seqs.items():
            fh.write(f">{name}\n")
            for i in range(0, len(s), 60):
                fh.write(s[i : i + 60] + "\n")
    return path


def _study_with_ancestral(tmp_path, rng):
    """A random study whose INFO/AA also puts some monomorphic records at entry n (AA=C,
    REF A) and makes some SNPs unpolarisable (AA=T, REF A, ALT G); and the FASTA that
    holds each record's AA base, random bases (some lower case) elsewhere."""
    text, samples, truth = random_study(
        rng, 10, 700, chroms=("1", "2"), length=20_000, missing=0.03, mono=0.15
    )
    lines = text.splitlines()
    body = [i for i, ln in enumerate(lines) if not ln.startswith("#")]
    aa_of = {}
    for k, i in enumerate(body):
        f = lines[i].split("\t")
        if f[4] == "." and k % 3 == 0:
            f[7] = "AA=C"
        elif f[4] == "G" and k % 17 == 0:
            f[7] = "AA=T"
        lines[i] = "\t".join(f)
        aa_of[(f[0], int(f[1]))] = f[7][3:]
    text = "\n".join(lines) + "\n"
    seqs = {}
    for c in ("1", "2"):
        s = rng.choice(list("ACGTacgt"), 20_000)
        for (cc, p), a in aa_of.items():
            if cc == c:
                s[p - 1] = a.lower() if p % 5 == 0 else a  # lower case: still used
        seqs[c] = "".join(s.tolist())
    pm = write_text(
        tmp_path / "pm.tsv", "".join(f"{s}\t{'AB'[i % 2]}\n" for i, s in enumerate(samples))
    )
    bed = write_text(
        tmp_path / "s.bed", "1\t0\t12000\t4fold\n1\t12000\t20000\t0fold\n2\t0\t20000\t0fold\n"
    )
    return text, pm, bed, write_fasta(tmp_path / "anc.fa", seqs)


@pytest.mark.parametrize("kind", ["bgzf", "plain"])
def test_fasta_route_equals_aa_route(tmp_path, kind):
    # Reference: the INFO/AA route of driftband itself on the same records (issue 13's
    # acceptance check); the FASTA holds each record's AA base.
    rng = np.random.default_rng(13)
    text, pm, bed, fa = _study_with_ancestral(tmp_path, rng)
    vcf = write_vcf(tmp_path / "v.vcf", text, kind)
    by_aa = build_spectra(vcf, pm, bed, block_size=5_000, region_size=7_000)
    by_fa = build_spectra(vcf, pm, bed, ancestral=f"fasta:{fa}", block_size=5_000)
    assert by_aa.blocks == by_fa.blocks
    for p, pop in by_aa.populations.items():
        other = by_fa.populations[p]
        assert other.n == pop.n and other.folded is False
        assert other.polarisation == "fasta:anc.fa"
        for c, cs in pop.classes.items():
            np.testing.assert_array_equal(other.classes[c].block_sites, cs.block_sites)
            np.testing.assert_allclose(other.classes[c].block_sfs, cs.block_sfs, rtol=0, atol=0)
        # the monomorphic records with AA=C count at entry n (fixed derived)
        assert pop.classes["0fold"].sfs[-1] > 0
    for k in ("unpolarisable", "multiallelic", "duplicate_position"):
        assert by_fa.skipped[k] == by_aa.skipped[k]
    assert by_aa.skipped["unpolarisable"] > 0
    assert by_fa.skipped["no_ancestral_base"] == 0
    assert by_fa.provenance["counts"]["dropped_sites"]["no_ancestral_base"] == {
        "0fold": 0,
        "4fold": 0,
    }


def _hand_case(tmp_path):
    # class sites 1:0-10 (4fold) and 1:10-20 (0fold); records at POS 2, 4, 12, 14
    r = [
        rec(1, 2, "A", "G", ["0/1", "0/0", "1/1", "0/1"]),
        rec(1, 4, "A", "G", ["0/1", "0/1", "0/0", "0/0"]),
        rec(1, 12, "A", "G", ["0/0", "0/1", "0/0", "0/0"]),
        rec(1, 14, "A", "G", ["1/1", "0/1", "0/0", "0/0"]),
    ]
    vcf = write_vcf(tmp_path / "h.vcf", header(SAMPLES, [("1", 30)]) + "\n".join(r) + "\n")
    pm = write_text(tmp_path / "pm.tsv", SAMPLE_TABLE)
    bed = write_text(tmp_path / "s.bed", "1\t0\t10\t4fold\n1\t10\t20\t0fold\n")
    #         position 1234567890 1234567890 1234567890
    seq = "AAaNAAAAAa" + "AaAGNNaAAA" + "AAAAAAAAAA"
    #   4fold: POS 3 lower, POS 4 N (a record), POS 10 lower -> 1 N, 2 lower
    #   0fold: POS 12 lower (a record), POS 14 G (the record's ALT: derived is A),
    #          POS 15-16 N, POS 17 lower -> 2 N, 2 lower
    fa = write_fasta(tmp_path / "anc.fa", {"1": seq})
    return vcf, pm, bed, fa


def test_sites_without_ancestral_base_are_dropped_by_reason(tmp_path):
    # Hand-worked: see the comments of _hand_case.
    vcf, pm, bed, fa = _hand_case(tmp_path)
    ss = build_spectra(vcf, pm, bed, ancestral=f"fasta:{fa}")
    drop = ss.provenance["counts"]["dropped_sites"]
    assert drop["no_ancestral_base"] == {"4fold": 1, "0fold": 2}
    assert drop["low_confidence_ancestral"] == {"4fold": 0, "0fold": 0}
    assert ss.skipped["no_ancestral_base"] == 1  # the record at POS 4
    assert ss.skipped["low_confidence_ancestral"] == 0
    one = ss.populations["one"]
    assert one.classes["4fold"].sites == 9 and one.classes["0fold"].sites == 8
    # population one (p1a, p1b): POS 2 has 1 derived copy; POS 12 (AA lower-case 'a'
    # used as A) 1; POS 14 ancestral G, ALT G: REF A is derived, 4 - 3 = 1 copy
    assert one.classes["4fold"].sfs.tolist() == [8, 1, 0, 0, 0]
    assert one.classes["0fold"].sfs.tolist() == [6, 2, 0, 0, 0]

    strict = build_spectra(vcf, pm, bed, ancestral=f"fasta:{fa}", exclude_lowercase_ancestral=True)
    drop = strict.provenance["counts"]["dropped_sites"]
    assert drop["no_ancestral_base"] == {"4fold": 1, "0fold": 2}
    assert drop["low_confidence_ancestral"] == {"4fold": 2, "0fold": 2}
    assert strict.skipped["low_confidence_ancestral"] == 1  # the record at POS 12
    one = strict.populations["one"]
    assert one.classes["4fold"].sites == 7 and one.classes["0fold"].sites == 6
    assert one.classes["0fold"].sfs.tolist() == [5, 1, 0, 0, 0]
    assert strict.provenance["options"]["exclude_lowercase_ancestral"] is True


def _run(args, capsys):
    rc = main(args)
    return rc, capsys.readouterr().err


def test_cli_fasta_route_and_refusals(tmp_path, capsys):
    vcf, pm, bed, fa = _hand_case(tmp_path)
    out = tmp_path / "o.json"
    base = ["spectra", str(vcf), "--samples", str(pm), "--sites", str(bed), "-o", str(out)]
    rc, err = _run([*base, "--ancestral", f"fasta:{fa}", "--exclude-lowercase-ancestral"], capsys)
    assert rc == 0, err
    doc = json.loads(out.read_text())
    assert doc["provenance"]["inputs"]["ancestral"]["sha256"]
    assert "dropped sites" in err and "low_confidence_ancestral" in err
    out.unlink()
    # one line, exit 2, nothing written (the README's rule for bad input)
    bad = {
        "lower-case option without a FASTA": (["--exclude-lowercase-ancestral"], "fasta:FILE"),
        "missing FASTA": (["--ancestral", f"fasta:{tmp_path / 'no.fa'}"], "not found"),
        "empty value": (["--ancestral", "fasta:"], "needs the ancestral FASTA"),
    }
    other = write_fasta(tmp_path / "chr.fa", {"chr1": "A" * 30})
    bad["other names"] = (["--ancestral", f"fasta:{other}"], "'chr' prefix")
    short = write_fasta(tmp_path / "short.fa", {"1": "A" * 25})
    bad["other length"] = (["--ancestral", f"fasta:{short}"], "length=30")
    for why, (extra, text) in bad.items():
        rc, err = _run([*base, *extra], capsys)
        assert rc == 2, why
        assert text in err and len(err.strip().splitlines()) == 1, (why, err)
        assert "Traceback" not in err and not out.exists(), why


def test_blocks_without_ancestral_bases_are_not_listed(tmp_path):
    # Common practice (the README's spectra section): blocks without callable sites are
    # not listed; a block whose every site lacks an ancestral base has none left.
    r = [rec(1, 2, "A", "G", ["0/1", "0/0", "1/1", "0/1"]), rec(1, 25, "A", "G", ["0/1"] * 4)]
    vcf = write_vcf(tmp_path / "b.vcf", header(SAMPLES, [("1", 40)]) + "\n".join(r) + "\n")
    pm = write_text(tmp_path / "pm.tsv", SAMPLE_TABLE)
    bed = write_text(tmp_path / "s.bed", "1\t0\t10\t4fold\n1\t10\t20\t0fold\n1\t20\t30\t4fold\n")
    fa = write_fasta(tmp_path / "a.fa", {"1": "A" * 20 + "N" * 10 + "A" * 10})
    ss = build_spectra(vcf, pm, bed, ancestral=f"fasta:{fa}", block_size=10)
    assert [(b.start, b.end) for b in ss.blocks] == [(0, 10), (10, 20)]
    assert ss.skipped["no_ancestral_base"] == 1
    assert re.fullmatch(r"fasta:a\.fa", ss.populations["one"].polarisation)
