"""Size histories from demes files (Gower et al. 2022, the ``demes`` package).

Outside checks: the neutral spectra of the history read from a file against msprime's
coalescent (the same graph through ``msprime.Demography.from_demes``; expected branch
lengths per frequency class, averaged over replicates, tolerance from their standard
error); bad files refused in one line naming the file.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from driftband.demography import read_demes_history
from driftband.exceptions import InputError
from driftband.prf.history import HistorySfs

demes = pytest.importorskip("demes")
msprime = pytest.importorskip("msprime")


def _write(tmp_path, builder, name="g.yaml"):
    p = tmp_path / name
    demes.dump(builder.resolve(), str(p))
    return p


def _one_change():
    b = demes.Builder(time_units="generations")
    b.add_deme("lake", epochs=[dict(start_size=1000, end_time=400), dict(start_size=250)])
    return b


def _split_and_growth():
    # years with a generation time of 2: 800 years = 400 generations
    b = demes.Builder(time_units="years", generation_time=2)
    b.add_deme("anc", epochs=[dict(start_size=1000, end_time=800)])
    b.add_deme("pond", ancestors=["anc"], epochs=[dict(start_size=300, end_size=3000)])
    b.add_deme("river", ancestors=["anc"], epochs=[dict(start_size=1500)])
    return b


def test_epochs_in_units_of_2_nanc_and_size_ratios(tmp_path):
    h = read_demes_history(_write(tmp_path, _one_change()), "lake")
    assert h.history.epochs() == [(0.2, 0.25, 0.25)]  # 400 / (2 * 1000)
    assert (h.ancestral_size, h.current_size) == (1000.0, 250.0)
    g = _write(tmp_path, _split_and_growth(), "s.yaml")
    pond = read_demes_history(g, "pond")
    assert pond.history.epochs() == [(0.2, 0.3, 3.0)]
    assert pond.current_size == 3000.0
    # the simulator's epochs: (generations ago, size), oldest last (driftband simulate)
    assert read_demes_history(g, "river").history.simulator_epochs(1000) == ((0, 1500), (400, 1000))


@pytest.mark.parametrize("case", ["one_change", "split_and_growth"])
def test_neutral_spectrum_matches_msprime(tmp_path, case):
    """E[xi_i] per unit mu*L is 4 N_anc g_i (g per unit theta_anc = 4 N_anc mu); msprime's
    branch-mode spectrum of the same graph estimates it (generations, diploid samples)."""
    builder = _one_change() if case == "one_change" else _split_and_growth()
    pop = "lake" if case == "one_change" else "pond"
    path = _write(tmp_path, builder)
    h = read_demes_history(path, pop)
    n = 8
    ours = 4 * h.ancestral_size * HistorySfs(n, h.history, reference="ancestral").g(0.0)
    graph = demes.load(str(path))
    dem = msprime.Demography.from_demes(graph)
    reps = msprime.sim_ancestry(
        samples={pop: n // 2},
        demography=dem,
        sequence_length=1,
        num_replicates=3000,
        random_seed=11,
    )
    afs = np.array(
        [
            ts.allele_frequency_spectrum(mode="branch", polarised=True, span_normalise=True)[1:n]
            for ts in reps
        ]
    )
    # msprime converts the graph's years to generations (from_demes): lengths in generations
    mean, se = afs.mean(axis=0), afs.std(axis=0, ddof=1) / math.sqrt(afs.shape[0])
    assert np.all(np.abs(ours - mean) < 4.5 * se + 1e-6 * mean), (ours, mean, se)


def _bad_graphs():
    out = {}
    b = demes.Builder(time_units="generations")
    b.add_deme("a", epochs=[dict(start_size=1000)])
    b.add_deme("b", epochs=[dict(start_size=1000)])
    b.add_migration(demes=["a", "b"], rate=1e-3)
    out["migration"] = (b, "a", ["migrations", "gene flow"])
    b = demes.Builder(time_units="generations")
    b.add_deme("a", epochs=[dict(start_size=1000)])
    b.add_deme("b", epochs=[dict(start_size=1000)])
    b.add_pulse(sources=["a"], dest="b", proportions=[0.1], time=50)
    out["pulse"] = (b, "a", ["pulses"])
    b = demes.Builder(time_units="generations")
    b.add_deme("x", epochs=[dict(start_size=1000, end_time=100)])
    b.add_deme("y", epochs=[dict(start_size=1000, end_time=100)])
    b.add_deme("z", ancestors=["x", "y"], proportions=[0.5, 0.5], start_time=100,
               epochs=[dict(start_size=500)])  # fmt: skip
    out["two-ancestors"] = (b, "z", ["several ancestors", "'z'"])
    b = demes.Builder(time_units="generations")
    b.add_deme("old", epochs=[dict(start_size=1000, end_time=100)])
    b.add_deme("now", ancestors=["old"], epochs=[dict(start_size=1000)])
    out["ends-before-sampling"] = (b, "old", ["'old'", "sampling time 0"])
    out["unknown-population"] = (_one_change(), "pond", ["'pond'", "not a deme", "lake"])
    b = demes.Builder(time_units="generations")
    linear = dict(start_size=1000, end_size=200, size_function="linear")
    b.add_deme("lake", epochs=[dict(start_size=1000, end_time=100), linear])
    out["linear"] = (b, "lake", ["'linear'", "constant and exponential"])
    b = demes.Builder(time_units="generations")
    b.add_deme("lake", epochs=[dict(start_size=1000, end_time=100), dict(start_size=2)])
    out["ratio-out-of-range"] = (b, "lake", ["'lake'", "[0.01, 100]"])
    return out


BAD = _bad_graphs()


@pytest.mark.parametrize("name", sorted(BAD))
def test_bad_graphs_are_refused_naming_the_file(tmp_path, name):
    builder, pop, words = BAD[name]
    path = _write(tmp_path, builder)
    with pytest.raises(InputError) as err:
        read_demes_history(path, pop)
    text = str(err.value)
    assert str(path) in text and "\n" not in text
    assert all(w in text for w in words), text


@pytest.mark.parametrize(
    "content, words",
    [
        ("time_units: generations\ndemes: [\n", ["not a valid demes file"]),
        ("just text\n", ["not a valid demes file"]),
        ("time_units: generations\ndemes:\n  - name: a\n    epochs: [{start_size: -5}]\n",
         ["not a valid demes file"]),
    ],
)  # fmt: skip
def test_files_that_are_not_demes_graphs(tmp_path, content, words):
    p = tmp_path / "bad.yaml"
    p.write_text(content)
    with pytest.raises(InputError) as err:
        read_demes_history(p, "a")
    assert str(p) in str(err.value) and all(w in str(err.value) for w in words)
    with pytest.raises(InputError, match="file not found"):
        read_demes_history(tmp_path / "missing.yaml", "a")
