"""Fuzzing the JSON readers (spectra for ``fit``; fits for ``compare`` and ``report``) and
study files for ``run``: every impossible value is refused with one line naming the file
and the population, class and key (or the line), nothing is written.

What is impossible: JSON has no NaN or Infinity (RFC 8259, section 6: "Numeric values
that cannot be represented ... such as Infinity and NaN are not permitted"); a site-
frequency spectrum counts sites, so its entries are finite, non-negative and add up to the
callable sites (common practice); a share of new mutations lies in [0, 1]; a converged fit
has a finite log-likelihood (common practice). TOML syntax as in TOML v1.0.0.
"""

from __future__ import annotations

import copy
import json
from pathlib import Path

import pytest

from fuzz_helpers import expect_refusal, run
from test_fuzz_vcf import SAMPLE_TABLE, SITES, vcf_text
from vcf_fixtures import write_vcf

DATA = Path(__file__).parent / "data" / "report"
SPECTRA = json.loads((DATA / "spectra.json").read_text(encoding="utf-8"))
FIT = json.loads((DATA / "fit.json").read_text(encoding="utf-8"))

# values that make any count, total or share impossible; raw JSON text where JSON itself
# cannot say it (NaN, Infinity, a number too large for a double)
BAD_VALUES = {
    "nan": "NaN",
    "inf": "Infinity",
    "-inf": "-Infinity",
    "1e400": "1e400",
    "negative": "-1",
    "string": '"x"',
    "null": "null",
    "true": "true",
    "list": "[]",
    "object": "{}",
}
RAW_TOKENS = {"nan", "inf", "-inf"}


def _set(doc, path, raw: str):
    """A JSON text of ``doc`` with the value at ``path`` replaced by raw JSON text."""
    d = copy.deepcopy(doc)
    node = d
    for k in path[:-1]:
        node = node[k]
    node[path[-1]] = "@@BAD@@"
    return json.dumps(d, indent=1).replace('"@@BAD@@"', raw)


def _spectra_leaves():
    out = []
    for pop in ("lake", "spring"):
        base = ("populations", pop)
        out += [(base + ("n",), pop, '"n"'), (base + ("folded",), pop, '"folded"')]
        for c in ("4fold", "0fold"):
            cb = base + ("classes", c)
            out += [
                (cb + ("sfs", 1), pop, '"sfs"'),
                (cb + ("sites",), pop, '"sites"'),
                (cb + ("block_sfs", 0, 2), pop, '"block_sfs"'),
                (cb + ("block_sites", 1), pop, '"block_sites"'),
            ]
    return out


SPECTRA_CASES = [
    (f"{'.'.join(map(str, path[1:]))}={v}", path, v, pop, key)
    for path, pop, key in _spectra_leaves()
    for v in BAD_VALUES
    if not (key == '"folded"' and v == "true")  # true is a valid value of folded
]


@pytest.mark.parametrize("case", SPECTRA_CASES, ids=[c[0] for c in SPECTRA_CASES])
def test_bad_spectra_value(capfd, tmp_path, case):
    _id, path, v, pop, key = case
    p = tmp_path / "sp.json"
    p.write_text(_set(SPECTRA, path, BAD_VALUES[v]))
    out = tmp_path / "fit.json"
    names = ["sp.json:"] if v in RAW_TOKENS else ["sp.json", repr(pop)]
    line = expect_refusal(capfd, tmp_path, ["fit", p, "-o", out, "-q"], names, [out])
    if v not in RAW_TOKENS and key not in ('"n"', '"folded"'):
        assert "class" in line


def _without(doc, path, keys):
    d = copy.deepcopy(doc)
    node = d
    for k in path:
        node = node[k]
    for k in keys:
        del node[k]
    return json.dumps(d)


def _sites_plus(k):
    d = copy.deepcopy(SPECTRA)
    d["populations"]["lake"]["classes"]["0fold"]["sites"] += k
    return json.dumps(d)


def _entries_over_sites():
    d = copy.deepcopy(SPECTRA)
    c = d["populations"]["lake"]["classes"]["0fold"]
    c["block_sfs"][0][1] += 10
    c["sfs"][1] += 10
    return json.dumps(d)


_LAKE4 = ("populations", "lake", "classes", "4fold")
WHOLE_SPECTRA = [
    ("top-level-list", "[1, 2, 3]", ["not a spectra file"]),
    ("top-level-string", '"spectra"', []),
    ("top-level-number", "3", []),
    ("empty-object", "{}", []),
    ("truncated", json.dumps(SPECTRA)[:500], ["sp.json:"]),
    ("wrong-schema", json.dumps({**SPECTRA, "schema": "other"}), ["schema"]),
    ("wrong-version", json.dumps({**SPECTRA, "schema_version": 99}), ["version"]),
    ("no-populations", json.dumps({**SPECTRA, "populations": {}}), ["populations"]),
    ("populations-list", json.dumps({**SPECTRA, "populations": []}), ["populations"]),
    ("no-sfs", _without(SPECTRA, _LAKE4, ["sfs", "block_sfs"]), ['"sfs"']),
    ("no-sites", _without(SPECTRA, _LAKE4, ["sites", "block_sites"]), ['"sites"']),
    ("no-n", _without(SPECTRA, ("populations", "lake"), ["n"]), ['"n"']),
    ("no-classes", _without(SPECTRA, ("populations", "lake"), ["classes"]), ['"classes"']),
    ("sites-plus-one", _sites_plus(1), ["'lake'", "sites"]),
    ("sites-minus-one", _sites_plus(-1), ["'lake'", "sites"]),
    ("entries-over-sites", _entries_over_sites(), ["'lake'"]),
    ("latin1", json.dumps(SPECTRA).replace("lake", "l\xe4ke"), []),
    ("nested-deep", "[" * 100000 + "]" * 100000, []),
]


def test_spectra_without_the_derived_totals_are_read(tmp_path):
    """The "sfs" and "sites" totals are sums of the block arrays: a file may omit them."""
    from driftband.spectra.io import read_spectra_json

    p = tmp_path / "sp.json"
    p.write_text(_without(SPECTRA, _LAKE4, ["sfs", "sites"]))
    got = read_spectra_json(p).populations["lake"].classes["4fold"]
    c = SPECTRA["populations"]["lake"]["classes"]["4fold"]
    assert got.sfs.tolist() == c["sfs"] and int(got.sites) == c["sites"]


@pytest.mark.parametrize("case", WHOLE_SPECTRA, ids=[c[0] for c in WHOLE_SPECTRA])
def test_bad_spectra_document(capfd, tmp_path, case):
    _id, text, names = case
    p = tmp_path / "sp.json"
    p.write_bytes(text.encode("latin-1" if _id == "latin1" else "utf-8"))
    out = tmp_path / "fit.json"
    expect_refusal(capfd, tmp_path, ["fit", p, "-o", out, "-q"], ["sp.json", *names], [out])


# ----------------------------------------------------------------- fit files
M = ("populations", "lake", "models", "gamma")
FIT_LEAVES = {
    "loglik": (M + ("loglik",), ["nan", "inf", "string", "null", "list"]),
    "aic": (M + ("aic",), ["nan", "-inf", "null"]),
    "share": (M + ("shares", 0), ["nan", "negative", "string", "null", "1e400"]),
    "misorientation_rate": (M + ("misorientation_rate",), ["inf", "string", "list"]),
    "neutral": (("populations", "lake", "data", "neutral", 0), ["nan", "negative", "string"]),
    "sites": (("populations", "lake", "data", "sites_neutral"), ["negative", "null", "string"]),
    "boot-share": (("populations", "lake", "bootstrap", "models", "gamma", "shares", 0, 0),
                   ["negative", "string", "inf"]),
}  # fmt: skip
FIT_CASES = [
    (f"{name}={v}", path, v) for name, (path, vals) in FIT_LEAVES.items() for v in vals
] + [
    ("share=-0.5", M + ("shares", 0), "-0.5"),
    ("share=1.5", M + ("shares", 1), "1.5"),
    ("eps=2", M + ("misorientation_rate",), "2"),
]


@pytest.mark.parametrize("command", ["compare", "report"])
@pytest.mark.parametrize("case", FIT_CASES, ids=[c[0] for c in FIT_CASES])
def test_bad_fit_value(capfd, tmp_path, case, command):
    _id, path, v = case
    p = tmp_path / "fit.json"
    p.write_text(_set(FIT, path, BAD_VALUES.get(v, v)))
    out = tmp_path / ("c.tsv" if command == "compare" else "r.html")
    names = ["fit.json:"] if v in RAW_TOKENS else ["fit.json", "'lake'"]
    expect_refusal(capfd, tmp_path, [command, p, "-o", out, "-q"], names, [out])


WHOLE_FITS = [
    ("top-level-list", "[]"),
    ("wrong-schema", json.dumps({**FIT, "schema": "driftband-spectra"})),
    ("wrong-version", json.dumps({**FIT, "schema_version": 0})),
    ("no-populations", json.dumps({**FIT, "populations": {}})),
    ("truncated", json.dumps(FIT)[:2000]),
    ("binary", "\x00\x01\x02"),
]


@pytest.mark.parametrize("command", ["compare", "report"])
@pytest.mark.parametrize("case", WHOLE_FITS, ids=[c[0] for c in WHOLE_FITS])
def test_bad_fit_document(capfd, tmp_path, case, command):
    p = tmp_path / "fit.json"
    p.write_text(case[1])
    out = tmp_path / ("c.tsv" if command == "compare" else "r.html")
    expect_refusal(capfd, tmp_path, [command, p, "-o", out, "-q"], ["fit.json"], [out])


# ----------------------------------------------------------------- study files
STUDY = """[study]
name = "fuzz"

[[dataset]]
name = "d"
vcf = "v.vcf.gz"
samples = "pm.tsv"
sites = "s.bed"
all_sites_callable = true

[fit]
dfe = ["gamma"]

[bootstrap]
replicates = 0
"""


@pytest.fixture(scope="module")
def study_dir(tmp_path_factory):
    d = tmp_path_factory.mktemp("study")
    write_vcf(d / "v.vcf", vcf_text(), "bgzf")
    (d / "pm.tsv").write_text(SAMPLE_TABLE)
    (d / "s.bed").write_text(SITES)
    return d


def _edit(after: str, new: str, replace: str | None = None) -> str:
    if replace is not None:
        assert replace in STUDY
        return STUDY.replace(replace, new, 1)
    return STUDY.replace(after, after + new, 1)


STUDY_CASES = [
    ("project-too-large", _edit("all_sites_callable = true\n", "project = 100\n"), "project"),
    ("project-text", _edit("all_sites_callable = true\n", 'project = "many"\n'), "project"),
    ("unknown-outgroup", _edit("all_sites_callable = true\n", 'ancestral = "outgroup:zz"\n'),
     "ancestral"),
    ("bad-ancestral", _edit("all_sites_callable = true\n", 'ancestral = "guess"\n'), "ancestral"),
    ("unknown-key", _edit("all_sites_callable = true\n", "colour = 3\n"), "colour"),
    ("vcf-number", _edit("", 'vcf = 5', replace='vcf = "v.vcf.gz"'), "vcf"),
    ("vcf-missing-file", _edit("", 'vcf = "no.vcf.gz"', replace='vcf = "v.vcf.gz"'), "vcf"),
    ("min-gq-text", _edit("all_sites_callable = true\n", 'min_gq = "high"\n'), "min_gq"),
    ("block-size-zero", _edit("all_sites_callable = true\n", "block_size = 0\n"), "block_size"),
    ("replicates-negative", _edit("", "replicates = -1", replace="replicates = 0"),
     "replicates"),
    ("dfe-unknown", _edit("", 'dfe = ["nosuch"]', replace='dfe = ["gamma"]'), "dfe"),
    ("dfe-number", _edit("", "dfe = 3", replace='dfe = ["gamma"]'), "dfe"),
    ("callable-flag-text", _edit("", 'all_sites_callable = "yes"',
                                 replace="all_sites_callable = true"), "all_sites_callable"),
    ("bad-toml", _edit("", "name = fuzz", replace='name = "fuzz"'), ""),
    ("duplicate-key", _edit("all_sites_callable = true\n", 'vcf = "v.vcf.gz"\n'), ""),
]  # fmt: skip


def _line_of(text: str, key: str) -> int | None:
    """Line of the last ``key =`` in the text (the edited one)."""
    hits = [i for i, line in enumerate(text.splitlines(), 1) if line.startswith(f"{key} =")]
    return hits[-1] if hits else None


@pytest.mark.parametrize("case", STUDY_CASES, ids=[c[0] for c in STUDY_CASES])
def test_bad_study_file(capfd, study_dir, tmp_path, case):
    _id, text, key = case
    st = study_dir / f"{_id}.toml"
    st.write_text(text)
    out = tmp_path / "out"
    rc, err = run(capfd, ["run", st, "--out-dir", out, "-q"])
    lines = err.splitlines()
    assert rc == 2, err
    assert len(lines) == 1 and lines[0].startswith("driftband run: error: "), err
    assert "Traceback" not in err and "--" not in lines[0].split(": error: ", 1)[1], err
    line = _line_of(text, key) if key else None
    assert f"{st.name}:" in lines[0], err
    if line is not None:
        assert f"{st.name}:{line}" in lines[0], err
    if key:
        assert key in lines[0], err
    assert not list(out.rglob("*.tmp")) if out.exists() else True
