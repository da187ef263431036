"""Variants-only VCFs: detected, warned about, recorded in the spectra file, and the two
ways out (a callable-sites BED, or the statement that every class site was callable).

Fact of the trade (common practice): variant callers write variant records only unless
asked for every site (e.g. ``bcftools call`` without ``-v`` writes monomorphic records,
with ``-v`` only variants); sites absent from such a VCF are of unknown callability.
"""

from __future__ import annotations

import json

from driftband.cli import main
from driftband.spectra.build import build_spectra
from vcf_fixtures import header, rec, write_text, write_vcf

SAMPLES = ["p1a", "p1b", "p2a", "p2b"]
SAMPLE_TABLE = "p1a\tone\np1b\tone\np2a\ttwo\np2b\ttwo\n"
SITES = "1\t0\t100\t4fold\n1\t100\t200\t0fold\n"
SNPS = [
    rec(1, 11, "A", "G", ["0/1", "0/0", "1/1", "0/1"]),
    rec(1, 21, "A", "G", ["0/0", "0/1", "0/1", "1/1"]),
    rec(1, 111, "A", "G", ["0/1", "0/1", "0/0", "0/0"]),
]


def _files(tmp_path, records):
    vcf = write_vcf(
        tmp_path / "v.vcf", header(SAMPLES, [("1", 1000)]) + "\n".join(records) + "\n", "bgzf"
    )
    return vcf, write_text(tmp_path / "pm.tsv", SAMPLE_TABLE), write_text(tmp_path / "s.bed", SITES)


def test_variants_only_vcf_is_flagged(tmp_path, caplog):
    vcf, pm, bed = _files(tmp_path, SNPS)
    with caplog.at_level("WARNING", logger="driftband"):
        ss = build_spectra(vcf, pm, bed)
    cs = ss.provenance["callable_sites"]
    assert cs == {
        "variants_only": True,
        "monomorphic_records": 0,
        "source": "assumed",
        "warning": True,
        "record_coverage": 3 / 200,  # 3 records at 200 class sites
        "sparse": False,  # the variants-only warning covers it
    }
    msg = " ".join(r.getMessage() for r in caplog.records)
    assert "variants-only" in msg and "--callable" in msg and "--all-sites-callable" in msg
    # 200 class sites, 3 with a record: 197 taken as callable monomorphic
    assert "197" in msg


def test_all_sites_vcf_is_not_flagged(tmp_path, caplog):
    mono = rec(1, 31, "A", ".", ["0/0"] * 4)
    vcf, pm, bed = _files(tmp_path, [*SNPS[:2], mono, SNPS[2]])
    with caplog.at_level("WARNING", logger="driftband"):
        ss = build_spectra(vcf, pm, bed)
    cs = ss.provenance["callable_sites"]
    assert cs["source"] == "all_sites_vcf" and cs["variants_only"] is False
    assert cs["monomorphic_records"] == 1 and cs["warning"] is False
    assert not [r for r in caplog.records if "variants-only" in r.getMessage()]


def test_gvcf_placeholder_records_count_as_monomorphic(tmp_path):
    # A reference block of a gVCF-style file: ALT '<NON_REF>' only (common practice).
    ref_block = rec(1, 41, "A", "<NON_REF>", ["0/0"] * 4)
    vcf, pm, bed = _files(tmp_path, [*SNPS[:2], ref_block, SNPS[2]])
    ss = build_spectra(vcf, pm, bed)
    assert ss.provenance["callable_sites"]["variants_only"] is False


def test_the_two_ways_out(tmp_path, caplog):
    vcf, pm, bed = _files(tmp_path, SNPS)
    mask = write_text(tmp_path / "callable.bed", "1\t0\t50\n1\t100\t150\n")
    with caplog.at_level("WARNING", logger="driftband"):
        masked = build_spectra(vcf, pm, bed, callable_mask=mask)
        stated = build_spectra(vcf, pm, bed, all_sites_callable=True)
    assert not [r for r in caplog.records if "variants-only" in r.getMessage()]
    assert masked.provenance["callable_sites"]["source"] == "mask"
    assert masked.populations["one"].classes["4fold"].sites == 50
    assert stated.provenance["callable_sites"]["source"] == "stated"
    assert stated.provenance["callable_sites"]["variants_only"] is True
    assert stated.provenance["options"]["all_sites_callable"] is True
    assert stated.populations["one"].classes["4fold"].sites == 100


def test_cli_warns_loudly_and_the_statement_silences_it(tmp_path, capsys):
    vcf, pm, bed = _files(tmp_path, SNPS)
    out = tmp_path / "o.json"
    args = ["spectra", str(vcf), "--samples", str(pm), "--sites", str(bed), "-o", str(out)]
    assert main(args) == 0
    err = capsys.readouterr().err
    assert "driftband: warning: " in err and "looks variants-only" in err
    assert "callable sites: every class site, ASSUMED" in err
    doc = json.loads(out.read_text())
    assert doc["provenance"]["callable_sites"]["warning"] is True
    assert main([*args, "--force", "--all-sites-callable"]) == 0
    err = capsys.readouterr().err
    assert "looks variants-only" not in err and "as stated (--all-sites-callable)" in err


def test_report_shows_the_assumption(tmp_path):
    # The report reads provenance.callable_sites of the spectra file: a warning among the
    # population's flags (HTML and summary.md) and a row of the callable-sites table.
    import copy
    from pathlib import Path

    from driftband.report import build_report, build_summary_md
    from driftband.report._inputs import read_compare_tsv, read_fit_doc, read_spectra_doc

    data = Path(__file__).parent / "data" / "report"
    fit = read_fit_doc(data / "fit.json")
    rows = read_compare_tsv(data / "compare.tsv")
    plain = read_spectra_doc(data / "spectra.json")
    flagged = copy.deepcopy(plain)
    flagged["provenance"]["callable_sites"] = {
        "variants_only": True,
        "monomorphic_records": 0,
        "source": "assumed",
        "warning": True,
    }
    prov = {"software": "driftband", "version": "0.0.test"}
    for doc, shown in ((plain, False), (flagged, True)):
        html = build_report(fit, rows, {"spectra.json": doc}, prov)
        md = build_summary_md(fit, rows, {"spectra.json": doc}, prov)
        assert ("looks variants-only" in html) is shown
        assert ("looks variants-only" in md) is shown
        assert "Callable sites and polarisation" in html
    assert "ASSUMED" in build_report(fit, rows, {"spectra.json": flagged}, prov)


def test_readme_variants_only_example_runs(tmp_path):
    # The README's worked example ("Variants-only VCFs") runs as written (its /tmp paths
    # moved to a temporary folder), and shows what the text says it shows.
    import subprocess
    import sys
    from pathlib import Path

    root = Path(__file__).resolve().parents[1]
    text = (root / "README.md").read_text(encoding="utf-8")
    block = text.split("### Variants-only VCFs", 1)[1].split("```bash", 1)[1].split("```")[0]
    script = block.replace("/tmp/", f"{tmp_path}/")
    shim = f'driftband() {{ "{sys.executable}" -m driftband "$@"; }}\nset -euo pipefail\n'
    r = subprocess.run(
        ["bash", "-c", shim + script], cwd=root, capture_output=True, text=True, timeout=300
    )
    assert r.returncode == 0, r.stderr
    assert "variants-only   yes (0 monomorphic records" in r.stdout
    assert "warning:" in r.stdout and "looks variants-only" in r.stdout
    masked = json.loads((tmp_path / "tiny.masked.spectra.json").read_text())
    stated = json.loads((tmp_path / "tiny.stated.spectra.json").read_text())
    assert masked["provenance"]["callable_sites"]["source"] == "mask"
    assert stated["provenance"]["callable_sites"]["source"] == "stated"
    for pop in ("lowvale", "highvale"):
        m = masked["populations"][pop]["classes"]["0fold"]["sites"]
        s = stated["populations"][pop]["classes"]["0fold"]["sites"]
        assert 0 < m < s
    assert "looks variants-only" not in r.stderr  # neither spectra run warns


def test_all_sites_vcf_with_gaps_is_warned_about_and_flagged(tmp_path, caplog):
    """Monomorphic records at some class sites only (4 records at 200 sites): the 196
    sites without a record are still counted as callable, so it is warned about, the
    spectra file records it and the report flags the populations; a complete all-sites
    VCF (a record at every class site) is not."""
    from driftband.report._view import spectra_flags

    mono = rec(1, 31, "A", ".", ["0/0"] * 4)
    vcf, pm, bed = _files(tmp_path, [*SNPS[:2], mono, SNPS[2]])
    with caplog.at_level("WARNING", logger="driftband"):
        ss = build_spectra(vcf, pm, bed)
    cs = ss.provenance["callable_sites"]
    assert cs["sparse"] is True and cs["warning"] is False
    msg = " ".join(r.getMessage() for r in caplog.records)
    assert "all-sites VCF" in msg and "2.0%" in msg and "196 class sites" in msg
    flags = spectra_flags({"provenance": ss.provenance})
    assert len(flags) == 1 and "not at every class site" in flags[0]
    # a record at every class site (monomorphic where there is no SNP): no warning
    taken = {11, 21, 111}
    full = [*SNPS, *(rec(1, p, "A", ".", ["0/0"] * 4) for p in range(1, 201) if p not in taken)]
    full.sort(key=lambda r: int(r.split("\t")[1]))
    (tmp_path / "full").mkdir()
    vcf2, pm2, bed2 = _files(tmp_path / "full", full)
    caplog.clear()
    with caplog.at_level("WARNING", logger="driftband"):
        ss2 = build_spectra(vcf2, pm2, bed2)
    assert ss2.provenance["callable_sites"]["sparse"] is False
    assert not [r for r in caplog.records if "all-sites VCF" in r.getMessage()]
    assert spectra_flags({"provenance": ss2.provenance}) == []
