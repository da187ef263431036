"""Spectra file round trip and validation."""

import json

import numpy as np
import pytest

from driftband.exceptions import InputError
from driftband.spectra import (
    Block,
    ClassSpectrum,
    PopulationSpectra,
    SpectraSet,
    add_diversity,
    read_spectra,
    read_spectra_json,
    write_spectra_json,
    write_spectra_tsv,
)


def _set(n=6):
    rng = np.random.default_rng(1)
    classes = {}
    for c in ("0fold", "4fold"):
        b = rng.integers(0, 20, size=(3, n + 1))
        classes[c] = ClassSpectrum(b, b.sum(axis=1))
    pop = PopulationSpectra("lake", n, False, classes, "aa")
    add_diversity(pop)
    blocks = [Block("1", 0, 100), Block("1", 100, 200), Block("2", 0, 100)]
    return SpectraSet({"lake": pop}, blocks, {"multiallelic": 2}, {"x": 1})


def test_json_round_trip(tmp_path):
    ss = _set()
    p = tmp_path / "s.json"
    write_spectra_json(ss, p)
    back = read_spectra_json(p)
    a, b = ss.populations["lake"], back.populations["lake"]
    assert b.n == a.n and b.folded == a.folded and b.polarisation == "aa"
    for c in a.classes:
        np.testing.assert_array_equal(a.classes[c].block_sfs, b.classes[c].block_sfs)
        assert a.classes[c].sites == b.classes[c].sites
    assert back.blocks == ss.blocks and back.skipped == {"multiallelic": 2}


def test_existing_output_refused(tmp_path):
    p = tmp_path / "s.json"
    write_spectra_json(_set(), p)
    with pytest.raises(Exception, match="--force"):
        write_spectra_json(_set(), p)
    write_spectra_json(_set(), p, force=True)


def test_unknown_schema_version(tmp_path):
    p = tmp_path / "s.json"
    write_spectra_json(_set(), p)
    doc = json.loads(p.read_text())
    doc["schema_version"] = 99
    p.write_text(json.dumps(doc))
    with pytest.raises(InputError, match="schema version 99"):
        read_spectra_json(p)


def test_tsv_long_round_trip(tmp_path):
    ss = _set()
    p = tmp_path / "s.tsv"
    write_spectra_tsv(ss, p)
    back = read_spectra(p)
    for c, cs in ss.populations["lake"].classes.items():
        np.testing.assert_array_equal(back.populations["lake"].classes[c].sfs, cs.sfs)


def test_tsv_wide_fills_entry_zero(tmp_path):
    p = tmp_path / "w.tsv"
    p.write_text(
        "population\tclass\tcallable_sites\tc0\tc1\tc2\tc3\tc4\n"
        "spring\t0fold\t1000\t\t10\t5\t3\t1\n"
        "spring\t4fold\t500\t\t20\t9\t6\t2\n"
    )
    ss = read_spectra(p)
    pop = ss.populations["spring"]
    assert pop.n == 4
    np.testing.assert_array_equal(pop.classes["0fold"].sfs, [981, 10, 5, 3, 1])
    assert pop.classes["4fold"].sites == 500


def test_tsv_bad_number_names_line(tmp_path):
    p = tmp_path / "w.tsv"
    p.write_text("population\tclass\tcallable_sites\tc0\tc1\na\t0fold\tx\t1\t2\n")
    with pytest.raises(InputError, match=r"w.tsv:2"):
        read_spectra(p)


@pytest.mark.parametrize(
    "header, names",
    [
        ("population\tclass\tsites\tc0\tc1", ["'sites'", "callable_sites", "site_count"]),
        ("population\tclass\tcount\tsites", ["'sites'"]),
        ("population\tclass\tcount_index\tsite_count", ["'count_index'", "derived_copies"]),
        ("population\tclass\tpi\tc0", ["wide layout", "long one"]),
    ],
)
def test_tsv_with_old_or_unknown_columns_is_refused_naming_the_new_ones(tmp_path, header, names):
    p = tmp_path / "old.tsv"
    p.write_text(header + "\na\t0fold\t10\t1\n")
    with pytest.raises(InputError, match=r"old.tsv:1") as err:
        read_spectra(p)
    assert all(n in str(err.value) for n in names)


def test_projected_float_spectra_round_trip(tmp_path):
    # Hypergeometric projection gives expected (fractional) counts; they must survive
    # JSON and TSV unchanged, while whole-number spectra stay int64.
    b = np.array([[10.25, 2.5, 1.25], [7.0, 1.0, 0.0]])
    cs = ClassSpectrum(b, [14, 8])
    assert cs.block_sfs.dtype == np.float64
    assert ClassSpectrum(np.array([[3.0, 1.0]]), [4]).block_sfs.dtype == np.int64
    pop = PopulationSpectra("lake", 2, False, {"0fold": cs, "4fold": cs}, "aa")
    add_diversity(pop)
    ss = SpectraSet({"lake": pop}, [Block("1", 0, 100), Block("1", 100, 200)], {}, {})
    write_spectra_json(ss, tmp_path / "f.json")
    back = read_spectra_json(tmp_path / "f.json").populations["lake"].classes["0fold"]
    np.testing.assert_allclose(back.block_sfs, b, rtol=0, atol=1e-12)
    write_spectra_tsv(ss, tmp_path / "f.tsv")
    t = read_spectra(tmp_path / "f.tsv").populations["lake"].classes["0fold"]
    np.testing.assert_allclose(t.sfs, b.sum(axis=0), rtol=0, atol=1e-12)


def test_atomic_output_follows_umask(tmp_path):
    import os
    import stat

    from driftband._io import atomic_output

    old = os.umask(0o022)
    try:
        with atomic_output(tmp_path / "x.txt") as fh:
            fh.write("x")
    finally:
        os.umask(old)
    assert stat.S_IMODE((tmp_path / "x.txt").stat().st_mode) == 0o644


def test_atomic_output_leaves_nothing_on_error(tmp_path):
    from driftband._io import atomic_output

    with pytest.raises(RuntimeError), atomic_output(tmp_path / "y.txt") as fh:
        fh.write("half")
        raise RuntimeError("boom")
    assert list(tmp_path.iterdir()) == []
