"""The report stage: HTML structure, headline numbers, summary.md golden file, CLI, browser.

The fixture (tests/data/report/, made by make_fixture.py there) is an invented two-population
study in the layouts of the fit file, compare.tsv and the spectra file. The HTML is parsed
with the standard library's html.parser and the SVG images with xml.etree; the browser test
opens the page in Debian's headless Chromium.
"""

from __future__ import annotations

import base64
import copy
import hashlib
import json
import os
import re
import shutil
import subprocess
import xml.etree.ElementTree as ET
from html.parser import HTMLParser
from pathlib import Path

import pytest

from driftband.cli import main
from driftband.exceptions import InputError
from driftband.report import (
    build_report,
    build_summary_md,
    read_compare_tsv,
    read_fit_doc,
    read_spectra_doc,
)

DATA = Path(__file__).parent / "data" / "report"
GOLDEN = DATA / "summary.golden.md"
REGENERATE = bool(os.environ.get("DRIFTBAND_REGENERATE_GOLDEN"))  # the regenerate switch

PROV = {
    "software": "driftband",
    "version": "0.0.test",
    "date": "2025-03-15T10:00:00+00:00",
    "command": ["driftband", "report", "fit.json"],
    "options": {"output": "report.html"},
    "inputs": {"fit": {"path": "/study/fit.json", "size": 1234, "sha256": "c0ffee" * 10 + "abcd"}},
    "environment": {"python": "3.11", "matplotlib": "3.x"},
}


# ----------------------------------------------------------------------------- helpers


class Page(HTMLParser):
    """Tables (id → rows of cell texts), images, link targets and scripts of a page."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.tables: dict[str, list[list[str]]] = {}
        self.imgs: list[dict[str, str]] = []
        self.urls: list[str] = []
        self.scripts: list[dict[str, str]] = []
        self.svg = 0
        self.ids: list[str] = []
        self._table: str | None = None
        self._row: list[str] | None = None
        self._cell: list[str] | None = None
        self.text: list[str] = []

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if "id" in a:
            self.ids.append(a["id"])
        for k in ("src", "href", "action", "data", "poster"):
            if k in a:
                self.urls.append(a[k] or "")
        if tag == "table":
            self._table = a.get("id", f"anon{len(self.tables)}")
            self.tables[self._table] = []
        elif tag == "tr" and self._table:
            self._row = []
        elif tag in ("td", "th") and self._row is not None:
            self._cell = []
        elif tag == "img":
            self.imgs.append(a)
        elif tag == "svg":
            self.svg += 1
        elif tag == "script":
            self.scripts.append(a)

    def handle_endtag(self, tag):
        if tag in ("td", "th") and self._cell is not None:
            self._row.append("".join(self._cell).strip())
            self._cell = None
        elif tag == "tr" and self._row is not None:
            self.tables[self._table].append(self._row)
            self._row = None
        elif tag == "table":
            self._table = None

    def handle_data(self, data):
        if self._cell is not None:
            self._cell.append(data)
        self.text.append(data)


def parse(html_text: str) -> Page:
    p = Page()
    p.feed(html_text)
    p.close()
    return p


def num(text: str) -> float:
    return float(text.replace("\u2212", "-").strip())


def interval(text: str) -> tuple[float, float]:
    lo, hi = re.split(r"\u2013| to ", text.strip())
    return num(lo), num(hi)


@pytest.fixture(scope="module")
def docs():
    fit = read_fit_doc(DATA / "fit.json")
    rows = read_compare_tsv(DATA / "compare.tsv")
    spectra = {"spectra.json": read_spectra_doc(DATA / "spectra.json")}
    return fit, rows, spectra


@pytest.fixture(scope="module")
def html_text(docs):
    fit, rows, spectra = docs
    return build_report(fit, rows, spectra, PROV)


@pytest.fixture(scope="module")
def page(html_text):
    return parse(html_text)


# ----------------------------------------------------------------------------- layouts


def test_fixture_follows_the_compare_columns():
    from driftband.compare import COLUMNS

    header = (DATA / "compare.tsv").read_text(encoding="utf-8").splitlines()[0].split("\t")
    assert header == COLUMNS


def test_fixture_files_carry_the_writers_schemas():
    # The report checks schemas with the writers' own checks (fit.io.check_fit_schema,
    # spectra.io.check_spectra_schema); the fixture files it is tested on must carry what
    # the writers write now, or tests/data/report/make_fixture.py is due to be rerun.
    from driftband.fit.io import FIT_SCHEMA, FIT_SCHEMA_VERSIONS_READ
    from driftband.report import check_fit_doc, check_spectra_doc
    from driftband.spectra.io import SCHEMA, SCHEMA_VERSION

    fit = json.loads((DATA / "fit.json").read_text(encoding="utf-8"))
    spectra = json.loads((DATA / "spectra.json").read_text(encoding="utf-8"))
    assert fit["schema"] == FIT_SCHEMA and fit["schema_version"] in FIT_SCHEMA_VERSIONS_READ
    assert (spectra["schema"], spectra["schema_version"]) == (SCHEMA, SCHEMA_VERSION)
    for doc, check in ((fit, check_fit_doc), (spectra, check_spectra_doc)):
        with pytest.raises(InputError, match="schema version 99 is not supported"):
            check(dict(doc, schema_version=99))


def test_public_surface_star_import():
    ns: dict = {}
    exec("from driftband.report import *", ns)
    import driftband.report as rep

    assert {k for k in ns if not k.startswith("__")} == set(rep.__all__)


# ----------------------------------------------------------------------------- HTML


def test_every_expected_table_is_present(page):
    expected = {"headline", "bands", "compare-table", "prov-report", "prov-fit", "files"}
    for anchor in ("pop1-lake", "pop2-spring"):
        expected |= {f"aic-{anchor}", f"shares-{anchor}", f"params-{anchor}", f"diversity-{anchor}"}
    expected |= {"mk-pop1-lake", "alpha-pop1-lake"}  # lake has divergence counts
    assert expected <= set(page.tables), expected - set(page.tables)
    assert "mk-pop2-spring" not in page.tables  # folded spectra: no MK table
    for tid in expected:
        assert len(page.tables[tid]) >= 2, f"table {tid} has no body rows"
    for sec in (
        "answer",
        "comparisons",
        "pop1-lake",
        "pop2-spring",
        "provenance",
        "conventions",
        "cautions",
    ):
        assert sec in page.ids
    assert len(page.ids) == len(set(page.ids)), "duplicate ids"


def test_every_image_is_embedded_svg(page):
    assert page.imgs, "no images"
    assert len(page.imgs) == 3  # the band plot and one spectra plot per population
    for img in page.imgs:
        src = img["src"]
        assert src.startswith("data:image/svg+xml;base64,")
        assert img.get("alt")
        svg = base64.b64decode(src.split(",", 1)[1])
        root = ET.fromstring(svg)  # well-formed XML (xml.etree, standard library)
        assert root.tag == "{http://www.w3.org/2000/svg}svg"
        hrefs = [v for el in root.iter() for k, v in el.attrib.items() if k.endswith("href")]
        assert not [h for h in hrefs if not h.startswith("#")], "SVG refers outside itself"


def test_no_external_url(page, html_text):
    assert page.urls
    bad = [u for u in page.urls if re.match(r"\s*(https?:)?//", u, re.I)]
    assert not bad
    assert all(u.startswith(("#", "data:")) for u in page.urls)
    assert not re.search(r"url\(\s*['\"]?(https?:)?//", html_text)
    assert "<link" not in html_text
    # The only script element is a JSON data block (provenance), never code.
    assert [s.get("type") for s in page.scripts] == ["application/json"]


def test_headline_numbers_match_the_fixture(page, docs):
    fit = docs[0]
    rows = page.tables["headline"]
    head = rows[0]
    i_share = next(k for k, h in enumerate(head) if h.startswith("Share"))
    i_ci = next(k for k, h in enumerate(head) if "interval" in h)
    body = {r[0]: r for r in rows[1:]}
    assert set(body) == set(fit["populations"])
    for name, p in fit["populations"].items():
        best = p["best_model"]
        share = p["models"][best]["shares"][0]
        lo, hi = p["bootstrap"]["models"][best]["shares_ci"][0]
        assert body[name][1] == best
        assert num(body[name][i_share]) == pytest.approx(share, abs=5e-4)
        assert interval(body[name][i_ci]) == pytest.approx((lo, hi), abs=5e-4)
        assert body[name][-1] == "converged"
    # All bands, all populations: "share (lo–hi)".
    bands = {r[0]: r for r in page.tables["bands"][1:]}
    for name, p in fit["populations"].items():
        best = p["best_model"]
        f, ci = p["models"][best], p["bootstrap"]["models"][best]["shares_ci"]
        cells = bands[name][2:]
        assert len(cells) == len(f["shares"]) == 4
        for cell, s, (lo, hi) in zip(cells, f["shares"], ci):
            m = re.fullmatch(r"(\S+) \((.+)\)", cell)
            assert num(m.group(1)) == pytest.approx(s, abs=5e-4)
            assert interval(m.group(2)) == pytest.approx((lo, hi), abs=5e-4)
    assert page.tables["bands"][0][2] == "|Ne\u00b7s| 0\u20131 (|S| 0\u20134)"


def test_comparison_in_plain_words(page, docs):
    fit, rows, _ = docs
    text = " ".join(page.text)
    sl = fit["populations"]["lake"]["models"]["gamma"]["shares"][0]
    ss = fit["populations"]["spring"]["models"]["gamma"]["shares"][0]
    diff = next(r for r in rows if r["test"] == "neutral_share_difference")
    assert diff["estimate"] == pytest.approx(ss - sl, abs=1e-5)
    want = (
        f"spring carries a larger effectively neutral share than lake: {ss:.2f} vs "
        f"{sl:.2f}, difference {ss - sl:.2f} (95 % CI {diff['ci_low']:.2f}\u2013"
        f"{diff['ci_high']:.2f}), p = 0.049, Holm-adjusted p = 0.049"
    )
    assert want in text
    ne = next(r for r in rows if r["test"] == "ne_only_lrt")
    assert f"Ne(spring)/Ne(lake) = {ne['ne_ratio']:.2f}" in text
    assert f"would be {ne['predicted_share_b']:.2f}; observed {ne['observed_share_b']:.2f}" in text
    assert "assuming equal mutation rates" in text
    assert "likelihood-ratio statistic 14.62, df 2" in text
    assert "The shared DFE is rejected at the 5 % level" in text


def test_per_population_details(page, docs):
    fit, _, spectra = docs
    aic = page.tables["aic-pop2-spring"]
    assert [r[0] for r in aic[1:]] == [
        r["model"] for r in fit["populations"]["spring"]["aic_table"]
    ]
    assert aic[-1][-1] == "\u26a0 not converged"  # the discrete fit of spring
    w = [num(r[5]) for r in aic[1:]]
    assert w == pytest.approx(
        [r["weight"] for r in fit["populations"]["spring"]["aic_table"]], abs=5e-4
    )
    div = {r[0]: r for r in page.tables["diversity-pop1-lake"][1:]}
    st = spectra["spectra.json"]["populations"]["lake"]["stats"]
    assert num(div["4fold"][4]) == pytest.approx(st["4fold"]["pi"], rel=1e-3)
    assert num(div["0fold"][6]) == pytest.approx(st["0fold"]["tajimas_d"], abs=5e-4)
    assert num(
        next(r for k, r in div.items() if k.startswith("\u03c0_N/\u03c0_S"))[4]
    ) == pytest.approx(st["piN_piS"], abs=5e-4)
    mk = page.tables["mk-pop1-lake"]
    assert (
        num(mk[1][1].replace("\u2009", "")) == fit["populations"]["lake"]["data"]["fixed_selected"]
    )
    params = page.tables["params-pop1-lake"]
    shape = next(r for r in params if r[0] == "gamma" and r[1] == "shape")
    ci = fit["populations"]["lake"]["bootstrap"]["models"]["gamma"]["params_ci"]["shape"]
    assert interval(shape[5]) == pytest.approx(ci, rel=1e-3)


def test_convergence_and_data_flags_are_visible(docs):
    fit, rows, spectra = docs
    text = " ".join(parse(build_report(fit, rows, spectra, PROV)).text)
    assert "Model discrete did not converge" in text
    assert "6 of 40 bootstrap refits of model discrete failed" in text
    bad = copy.deepcopy(fit)
    for f in bad["populations"]["lake"]["models"].values():
        f["success"] = False
    bad["populations"]["lake"]["bootstrap"]["blocks"] = 12
    page = parse(build_report(bad, rows, spectra, PROV))
    lake = next(r for r in page.tables["headline"][1:] if r[0] == "lake")
    assert lake[-1] == "\u26a0 not converged"
    text = " ".join(page.text)
    assert "The best model gamma did not converge" in text
    assert "Only 12 genomic blocks" in text


def test_strings_from_files_are_escaped(docs):
    fit, rows, spectra = docs
    evil = '<img src=x onerror="alert(1)">&"lake"'
    f2 = copy.deepcopy(fit)
    f2["populations"] = {(evil if k == "lake" else k): v for k, v in fit["populations"].items()}
    f2["populations"][evil]["models"]["gamma"]["message"] = "<b>bold</b>"
    r2 = [dict(r, population_a=evil, note="</td><script>x()</script>") for r in rows]
    html_text = build_report(f2, r2, None, PROV)
    page = parse(html_text)
    assert all(i["src"].startswith("data:") for i in page.imgs)
    assert [s.get("type") for s in page.scripts] == ["application/json"]
    assert "<b>bold</b>" not in html_text and "<script>x()" not in html_text
    assert evil in [r[0] for r in page.tables["headline"]]  # shown, as text


def test_report_without_compare_and_spectra(docs):
    fit = docs[0]
    page = parse(build_report(fit, None, None, PROV))
    text = " ".join(page.text)
    assert "No comparison table was given" in text
    assert "No spectra file for this population was given" in text
    assert "headline" in page.tables and "diversity-pop1-lake" not in page.tables


def test_alpha_table_few_substitutions_and_beneficial_class(docs):
    """Few substitutions: the α values carry the caveat and no bootstrap interval; a
    beneficial class adds the α implied by the DFE, whose interval does not rest on the
    divergence counts; every row of the table is explained in a line of plain words."""
    fit, _rows, spectra = docs
    f2 = copy.deepcopy(fit)
    lake = f2["populations"]["lake"]
    cav = "only 4 selected and 10 neutral substitutions (fewer than 20 in a class)"
    model = next(m for m, a in lake["adaptive"].items() if a)
    for a in lake["adaptive"].values():
        if a:
            a["caveat"] = cav
    lake["adaptive"][model]["alpha_dfe"]["alpha_model"] = 0.42
    ci = lake["bootstrap"]["models"][model]["params_ci"]
    ci["alpha_model"] = [0.31, 0.52]
    page = parse(build_report(f2, None, spectra, PROV))
    rows = page.tables["alpha-pop1-lake"][1:]
    dfe_rows = [r for r in rows if r[0].startswith("\u03b1, DFE-corrected")]
    assert dfe_rows and all(r[3] == "not shown (few substitutions)" for r in dfe_rows)
    assert all("\u26a0" in r[2] for r in dfe_rows)
    implied = [r for r in rows if r[0].startswith("\u03b1 implied by the DFE")]
    assert [(r[1], r[2], r[3]) for r in implied] == [(model, "0.420", "0.310\u20130.520")]
    text = " ".join(page.text)
    assert cav in text
    assert "\u03b1 implied by the DFE: the share of substitutions" in text
    plain = " ".join(parse(build_report(fit, None, spectra, PROV)).text)
    assert "\u03b1 implied by the DFE" not in plain  # no beneficial class: no such line
    md_text = build_summary_md(f2, None, spectra, PROV)
    if model == lake["best_model"]:
        assert "α implied by the DFE = 0.420" in md_text
    assert cav in md_text


def test_minimal_fit_and_labelled_spectra(docs):
    """A fit without bootstrap, divergence or AIC table; populations labelled by dataset."""
    fit, _rows, spectra = docs
    f2 = copy.deepcopy(fit)
    f2["populations"] = {
        f"snails/{k}": dict(v, dataset="snails") for k, v in fit["populations"].items()
    }
    for p in f2["populations"].values():
        p["bootstrap"] = {}
        p.pop("adaptive")
        p.pop("aic_table")
    page = parse(build_report(f2, None, {"snails": spectra["spectra.json"]}, PROV))
    head = {r[0]: r for r in page.tables["headline"][1:]}
    assert head["snails/lake"][3] == "n/a" and head["snails/lake"][4] == "none"
    assert "diversity-pop1-snails-lake" in page.tables  # matched by label/name
    assert "No bootstrap: the shares have no confidence intervals" in " ".join(page.text)
    assert "mk-pop1-snails-lake" not in page.tables


def test_documents_that_do_not_fit_together(docs):
    fit, rows, spectra = docs
    sp = copy.deepcopy(spectra)
    sp["spectra.json"]["populations"]["lake"]["n"] = 20
    with pytest.raises(InputError, match="n = 20"):
        build_report(fit, rows, sp, PROV)
    with pytest.raises(InputError, match="'pond' is not in the fit file"):
        build_report(fit, [dict(rows[0], population_b="pond")], None, PROV)
    with pytest.raises(InputError, match="none of its populations"):
        build_report(
            fit,
            None,
            {"x.json": {**spectra["spectra.json"], "populations": {"pond": {"n": 10}}}},
            PROV,
        )
    with pytest.raises(InputError, match="not a fit file"):
        build_report(spectra["spectra.json"], None, None, PROV)


# ----------------------------------------------------------------------------- summary.md


def _stable(md_text: str) -> str:
    """Drop the volatile line (date and version) before comparing with the golden file."""
    return "\n".join(ln for ln in md_text.splitlines() if not ln.startswith("Generated "))


def test_summary_md_golden(docs):
    fit, rows, spectra = docs
    got = _stable(build_summary_md(fit, rows, spectra, PROV)) + "\n"
    if REGENERATE or not GOLDEN.exists():
        GOLDEN.write_text(got, encoding="utf-8")
        if not REGENERATE:
            pytest.fail(f"{GOLDEN} did not exist and was written; check it and rerun")
    assert got == GOLDEN.read_text(encoding="utf-8"), (
        "summary.md changed; if intended, rerun with DRIFTBAND_REGENERATE_GOLDEN=1"
    )


def test_summary_has_the_same_headline_numbers(docs, page):
    fit, rows, spectra = docs
    md_text = build_summary_md(fit, rows, spectra, PROV)
    html_rows = {r[0]: r for r in page.tables["headline"][1:]}
    md_rows = [
        ln
        for ln in md_text.splitlines()
        if ln.startswith("| lake |") or ln.startswith("| spring |")
    ][:2]
    assert len(md_rows) == 2
    for ln in md_rows:
        cells = [c.strip() for c in ln.strip("|").split("|")]
        h = html_rows[cells[0]]
        assert cells[2] == h[2] and cells[3] == h[3]
    assert "Only Ne differs (ratio fitted; the version to read)?" in md_text
    assert "Only Ne differs (ratio from \u03c0)?" in md_text
    assert "no basis for conservation or management decisions" in md_text


# ----------------------------------------------------------------------------- CLI


def _run(argv, capsys):
    code = main(argv)
    cap = capsys.readouterr()
    return code, cap.out, cap.err


def test_cli_writes_report_and_summary(tmp_path, capsys):
    out, summ = tmp_path / "report.html", tmp_path / "summary.md"
    code, _stdout, err = _run(
        [
            "report",
            str(DATA / "fit.json"),
            "--compare",
            str(DATA / "compare.tsv"),
            "--spectra",
            str(DATA / "spectra.json"),
            "-o",
            str(out),
            "--summary",
            str(summ),
        ],
        capsys,
    )
    assert code == 0, err
    page = parse(out.read_text(encoding="utf-8"))
    assert "diversity-pop1-lake" in page.tables
    made = {(Path(r[0]).name, r[1]): r[2] for r in page.tables["prov-spectra"][1:]}
    # the fixture's spectra: 24 called copies projected to 16 (lake) and 12 (spring)
    assert made[("spectra.json", "projection")].startswith("lake: 24 → 16 gene copies")
    assert "DP < 8" in made[("spectra.json", "filters")]
    assert made[("spectra.json", "records skipped")] == "multiallelic 12, filtered 40"
    assert made[("spectra.json", "blocks")] == "4 blocks of 100,000 bp"
    files = page.tables["files"]
    fit_row = next(r for r in files if r[0] == "report" and r[1] == "fit")
    assert fit_row[4] == hashlib.sha256((DATA / "fit.json").read_bytes()).hexdigest()
    assert summ.read_text(encoding="utf-8").startswith("# Effectively neutral share")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["report.html", "summary.md"]


@pytest.mark.parametrize("case", ["missing", "not_fit", "bad_compare", "exists"])
def test_cli_bad_input_one_line_no_output(tmp_path, capsys, case):
    out, summ = tmp_path / "report.html", tmp_path / "summary.md"
    fit = DATA / "fit.json"
    extra: list[str] = []
    if case == "missing":
        fit = tmp_path / "nope.json"
        want = "file not found"
    elif case == "not_fit":
        fit = DATA / "spectra.json"
        want = "not a fit file"
    elif case == "bad_compare":
        bad = tmp_path / "compare.tsv"
        lines = (DATA / "compare.tsv").read_text(encoding="utf-8").splitlines()
        lines[2] = lines[2].replace("\t0.0488\t", "\tabc\t", 1)
        bad.write_text("\n".join(lines) + "\n", encoding="utf-8")
        extra = ["--compare", str(bad)]
        want = f"{bad}:3: column 'p_value': 'abc' is not a number"
    else:
        summ.write_text("keep me\n", encoding="utf-8")
        want = "output exists; use --force"
    code, _out, err = _run(
        ["report", str(fit), *extra, "-o", str(out), "--summary", str(summ)], capsys
    )
    assert code == 2
    assert err.count("\n") == 1 and want in err, err
    assert not out.exists()
    if case == "exists":
        assert summ.read_text(encoding="utf-8") == "keep me\n"
    else:
        assert not summ.exists()
    assert not [p for p in tmp_path.iterdir() if p.name.endswith(".tmp")]


def test_cli_force_overwrites(tmp_path, capsys):
    out = tmp_path / "report.html"
    out.write_text("old", encoding="utf-8")
    code, _o, err = _run(["report", str(DATA / "fit.json"), "-o", str(out)], capsys)
    assert code == 2 and "--force" in err
    assert out.read_text(encoding="utf-8") == "old"
    code, _o, err = _run(["report", str(DATA / "fit.json"), "-o", str(out), "--force"], capsys)
    assert code == 0, err
    assert out.read_text(encoding="utf-8").startswith("<!DOCTYPE html>")


# ----------------------------------------------------------------------------- browser

CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")

# Records what the browser itself computes about the page (a copy; the report has no code).
PROBE = """<script>
window.addEventListener('load', function () {
  var t = document.getElementById('headline'), r = t.getBoundingClientRect(), vis = r.width > 0
      && r.height > 0;
  for (var e = t; e; e = e.parentElement) { var s = getComputedStyle(e);
    if (s.display === 'none' || s.visibility === 'hidden' || s.opacity === '0') vis = false; }
  var imgs = Array.prototype.map.call(document.images, function (i) {
    return i.complete && i.naturalWidth > 0; });
  var p = document.createElement('pre'); p.id = 'probe';
  p.textContent = JSON.stringify({visible: vis, top: r.top, rows: t.rows.length, images: imgs,
    overflow: document.documentElement.scrollWidth > window.innerWidth + 1});
  document.body.appendChild(p);
});
</script>"""


def _chromium(url: str, tmp: Path, *extra: str) -> subprocess.CompletedProcess:
    cmd = [
        CHROMIUM,
        "--headless",
        "--no-sandbox",
        "--disable-gpu",
        "--disable-quic",
        "--no-first-run",
        "--disable-background-networking",
        "--disable-component-update",
        "--disable-sync",
        f"--user-data-dir={tmp / 'profile'}",
        "--window-size=1200,2000",
        "--enable-logging=stderr",
        "--v=0",
        *extra,
        url,
    ]
    return subprocess.run(cmd, capture_output=True, text=True, timeout=120)


def _console_errors(stderr: str) -> list[str]:
    """Console messages and failed loads in Chromium's log (the report logs none at all)."""
    return [
        ln
        for ln in stderr.splitlines()
        if ":CONSOLE" in ln or "Failed to load resource" in ln or "net::ERR_" in ln
    ]


@pytest.mark.skipif(
    CHROMIUM is None,
    reason="chromium is not installed (Debian package "
    "'chromium'; .ci/run installs it): browser test skipped",
)
def test_report_renders_in_headless_chromium(tmp_path, html_text):
    report = tmp_path / "report.html"
    report.write_text(html_text, encoding="utf-8")
    shot = tmp_path / "shot.png"
    run = _chromium(report.as_uri(), tmp_path, f"--screenshot={shot}", "--dump-dom")
    assert run.returncode == 0, run.stderr[-2000:]
    assert not _console_errors(run.stderr)
    dom = parse(run.stdout)
    assert "headline" in dom.tables and len(dom.tables["headline"]) == 3
    assert shot.exists() and shot.stat().st_size > 20000
    from PIL import Image  # pillow, a matplotlib dependency

    with Image.open(shot) as im:
        assert im.size == (1200, 2000)
        assert len(im.convert("RGB").getcolors(maxcolors=1 << 20) or []) > 50  # not blank

    probe_page = tmp_path / "probe.html"
    probe_page.write_text(html_text.replace("</body>", PROBE + "</body>"), encoding="utf-8")
    run = _chromium(probe_page.as_uri(), tmp_path, "--dump-dom")
    assert not _console_errors(run.stderr)
    m = re.search(r'<pre id="probe">(.*?)</pre>', run.stdout, re.S)
    assert m, "the probe did not run"
    probe = json.loads(m.group(1).replace("&quot;", '"').replace("&amp;", "&"))
    assert probe["visible"] and 0 <= probe["top"] < 2000  # on the first screen
    assert probe["rows"] == 3
    assert probe["images"] == [True, True, True]  # every embedded SVG decoded and drawn
    assert not probe["overflow"], "the page is wider than the window"

    # The console check can fail: a page with a script error is caught.
    bad = tmp_path / "bad.html"
    bad.write_text("<!DOCTYPE html><p>x</p><script>undefined_function()</script>", encoding="utf-8")
    assert _console_errors(_chromium(bad.as_uri(), tmp_path, "--dump-dom").stderr)


def test_old_fit_schema_is_read_with_its_keys_translated(tmp_path, capsys):
    """fit.v1.json is this fixture as written before schema version 3 (keys eps, p_b,
    mean_S, log_sd, x, ...). Read through the one fit reader it gives the same summary as
    the current file, with one warning naming the file and the translation."""
    summaries = []
    for name in ("fit.json", "fit.v1.json"):
        summ = tmp_path / f"{name}.md"
        argv = ["report", str(DATA / name), "-o", str(tmp_path / f"{name}.html")]
        code, _out, err = _run([*argv, "--summary", str(summ)], capsys)
        assert code == 0, err
        text = summ.read_text(encoding="utf-8").replace(name, "FIT")
        summaries.append(re.sub(r"\d{4}-\d\d-\d\dT[\d:+]+", "DATE", text))
        if name == "fit.v1.json":
            lines = [ln for ln in err.splitlines() if "schema version" in ln]
            assert len(lines) == 1 and "fit.v1.json" in lines[0]
            assert "eps -> misorientation_rate" in lines[0]
        else:
            assert "schema version" not in err
    assert summaries[0] == summaries[1]


def test_compare_table_with_an_out_of_equilibrium_flag_is_rendered(tmp_path, capsys):
    """compare.tsv writes the flag as True/False (csv of a Python bool); the report reads
    it as a flag, not a number, and adds its caution to the 'only Ne differs' sentences.
    (Before, any True made the report refuse the table.)"""
    rows = (DATA / "compare.tsv").read_text(encoding="utf-8").splitlines()
    cols = rows[0].split("\t")
    k = cols.index("out_of_equilibrium")
    out_rows = [rows[0]]
    for line in rows[1:]:
        f = line.split("\t")
        if f[cols.index("test")].startswith("ne_only"):
            f[k] = "True"
        out_rows.append("\t".join(f))
    tsv = tmp_path / "compare.tsv"
    tsv.write_text("\n".join(out_rows) + "\n", encoding="utf-8")
    summ = tmp_path / "s.md"
    argv = ["report", str(DATA / "fit.json"), "--compare", str(tsv), "-o", str(tmp_path / "r.html")]
    code, _out, err = _run([*argv, "--summary", str(summ)], capsys)
    assert code == 0, err
    assert summ.read_text(encoding="utf-8").count("looks out of equilibrium") == 2
