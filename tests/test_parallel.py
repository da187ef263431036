"""Region-parallel spectra and parallel bootstrap: local worker processes and a Dask
cluster (dask.distributed.LocalCluster with worker processes) give the same results as
one process; a worker killed mid-task loses nothing and counts nothing twice; an
unreachable scheduler is one line and exit code 2.

The outside anchor is scikit-allel: the spectra counted on 2 workers and on the cluster
equal those of its own VCF parser and ``allel.sfs``. The rest checks the promise of the
parallel layer itself (common practice for parallel reductions and seeded bootstraps:
results must not depend on the number of workers).
"""

from __future__ import annotations

import json
import operator
import os
import signal
import socket
import subprocess
import sys
import threading
import time
from pathlib import Path

import numpy as np
import pytest

from driftband import _parallel
from driftband.cli import main
from driftband.exceptions import InputError, OptionError
from driftband.sites.bed import read_site_classes
from driftband.spectra.build import build_spectra
from driftband.spectra.counting import RegionCounts, make_design
from driftband.spectra.io import spectra_to_dict, write_spectra_json
from driftband.spectra.parallel import _count_task
from driftband.spectra.plan import make_plan
from driftband.spectra.projection import spectra_from_counts
from driftband.variants.samples import assign_samples, read_sample_table
from driftband.variants.source import VcfSource
from vcf_fixtures import header, random_study, rec, write_text, write_vcf

distributed = pytest.importorskip("distributed")

REGION = 10_000  # bases per task: about 13 tasks on the simulated study


# ---------------------------------------------------------------------------- fixtures


@pytest.fixture(scope="module")
def study(tmp_path_factory):
    """A study written by ``driftband simulate --vcf``: 3 chromosomes of 41.1 kb, two
    populations, bgzipped + indexed VCF, sites BED and sample table."""
    d = tmp_path_factory.mktemp("pstudy")
    rc = main(
        [
            "simulate",
            "--population",
            "lake:N=200,n=12",
            "--population",
            "pond:N=100,n=8",
            "--class-sites",
            "30000",
            "--theta",
            "0.02",
            "--block-count",
            "12",
            "--chromosomes",
            "3",
            "--seed",
            "5",
            "--write-vcf",
            str(d / "study"),
            "-o",
            str(d / "truth.json"),
            "-q",
        ]
    )
    assert rc == 0
    return {
        "vcf": d / "study.vcf.gz",
        "samples": d / "study.samples.tsv",
        "sites": d / "study.sites.bed",
        "dir": d,
    }


@pytest.fixture(scope="module")
def missing_study(tmp_path_factory):
    """Random genotypes with 4 % missing calls (spectra are projected: float64)."""
    d = tmp_path_factory.mktemp("pmiss")
    rng = np.random.default_rng(71)
    text, samples, _ = random_study(rng, 12, 900, chroms=("1", "2"), length=60_000, missing=0.04)
    vcf = write_vcf(d / "m.vcf", text, "bgzf")
    pm = write_text(d / "pm.tsv", "".join(f"{s}\t{'AB'[i % 2]}\n" for i, s in enumerate(samples)))
    bed = write_text(
        d / "s.bed", "1\t0\t60000\t4fold\n2\t0\t25000\t0fold\n2\t25000\t60000\t4fold\n"
    )
    return {"vcf": vcf, "samples": pm, "sites": bed, "dir": d, "text": text}


@pytest.fixture(scope="module")
def cluster():
    """A local Dask cluster of 2 worker processes with 1 thread each."""
    with distributed.LocalCluster(
        n_workers=2, threads_per_worker=1, processes=True, dashboard_address=":0"
    ) as cl:
        yield cl


def _doc(ss) -> str:
    d = spectra_to_dict(ss)
    d.pop("provenance")
    return json.dumps(d)


def _file_body(path: Path) -> bytes:
    """The spectra file's bytes before its provenance (the last member)."""
    raw = path.read_bytes()
    head, sep, _ = raw.partition(b',"provenance":')
    assert sep, "provenance is the last member of the spectra file"
    return head


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


# ---------------------------------------------------------------------------- the layer


def test_tree_shape_depends_only_on_the_number_of_tasks():
    def paren(a, b):
        return f"({a}{b})"

    assert _parallel.tree_reduce("abcde", paren) == "(((ab)(cd))e)"
    assert _parallel.tree_reduce("abcdefg", paren) == "(((ab)(cd))((ef)g))"
    assert _parallel.tree_reduce("a", paren) == "a"
    assert _parallel.tree_reduce("", paren, empty=str) == ""
    # the same tree whatever runs the tasks and in whichever order they finish
    serial = _parallel.map_reduce(str.upper, list("abcdefghij"), paren, workers=1)
    assert serial == "((((AB)(CD))((EF)(GH)))(IJ))"
    assert _parallel.map_reduce(str.upper, list("abcdefghij"), paren, workers=2) == serial


def test_parallel_map_keeps_task_order_and_passes_user_errors():
    assert _parallel.parallel_map(abs, range(-7, 5), workers=2) == [abs(i) for i in range(-7, 5)]
    with pytest.raises(InputError, match=r"^x\.vcf:3: broken record$"):
        _parallel.parallel_map(_fail_on_three, range(8), workers=2)


def _fail_on_three(i):
    if i == 3:
        raise InputError("broken record", "x.vcf", 3)
    return i


def _die(i):
    if i == 2:
        os._exit(9)  # the worker process dies, every time
    return i


def test_task_that_keeps_killing_its_worker_ends_in_one_line():
    with pytest.raises(
        _parallel.WorkerLostError, match=r"^task 2 was lost 3 times because its worker process died"
    ):
        _parallel.parallel_map(_die, range(4), workers=2, retries=2)


def test_worker_count_checks():
    assert _parallel.resolve_workers(None) == _parallel.available_cores() >= 1
    for bad in (0, -2, 1.5):
        with pytest.raises(OptionError, match="--workers"):
            _parallel.resolve_workers(bad)


# ---------------------------------------------------------------------------- spectra


def test_spectra_same_for_1_and_2_workers_and_match_scikit_allel(study, tmp_path):
    args = (study["vcf"], study["samples"], study["sites"])
    one = build_spectra(*args, region_size=REGION, workers=1)
    two = build_spectra(*args, region_size=REGION, workers=2)
    big = build_spectra(*args, workers=2)  # default region size: one task per chromosome
    assert two.provenance["execution"] == {"region_size": REGION, "workers": 2, "scheduler": None}
    assert _doc(one) == _doc(two) == _doc(big)
    for name, ss in (("one", one), ("two", two)):
        write_spectra_json(ss, tmp_path / f"{name}.json")
    assert _file_body(tmp_path / "one.json") == _file_body(tmp_path / "two.json")

    # scikit-allel (its own VCF parser, count_alleles and sfs) on the same file
    import allel

    cs = allel.read_vcf(
        str(study["vcf"]),
        fields=[
            "samples",
            "calldata/GT",
            "variants/CHROM",
            "variants/POS",
            "variants/REF",
            "variants/AA",
        ],
    )
    gt = allel.GenotypeArray(cs["calldata/GT"])
    pos0 = {}
    for line in Path(study["sites"]).read_text().splitlines():
        c, s, e, k = line.split("\t")[:4]
        for p in range(int(s), int(e)):
            pos0[(c, p)] = k
    cls = np.array(
        [pos0.get((c, int(p) - 1), "") for c, p in zip(cs["variants/CHROM"], cs["variants/POS"])]
    )
    ref_is_anc = cs["variants/AA"] == cs["variants/REF"]
    sample_pop = dict(
        line.split("\t") for line in Path(study["samples"]).read_text().splitlines() if line
    )
    for p, pop in two.populations.items():
        idx = [i for i, s in enumerate(cs["samples"]) if sample_pop[s] == p]
        ac = gt.count_alleles(subpop=idx, max_allele=1)
        n = 2 * len(idx)
        assert pop.n == n
        derived = np.where(ref_is_anc, ac[:, 1], n - ac[:, 1])
        for k, spec in pop.classes.items():
            want = allel.sfs(derived[cls == k], n=n).astype(np.int64)
            want[0] += spec.sites - int((cls == k).sum())  # callable sites not in the VCF
            np.testing.assert_array_equal(spec.sfs, want)


def test_projected_spectra_byte_identical_for_1_2_and_3_workers(missing_study, tmp_path):
    args = (missing_study["vcf"], missing_study["samples"], missing_study["sites"])
    runs = {w: build_spectra(*args, region_size=7_000, workers=w) for w in (1, 2, 3)}
    assert runs[1].populations["A"].classes["4fold"].block_sfs.dtype == np.float64
    for w, ss in runs.items():
        write_spectra_json(ss, tmp_path / f"w{w}.json")
    assert (
        _file_body(tmp_path / "w1.json")
        == _file_body(tmp_path / "w2.json")
        == _file_body(tmp_path / "w3.json")
    )
    # streaming the same text without an index (one process) gives the same spectra
    plain = write_vcf(tmp_path / "plain.vcf", missing_study["text"], "plain")
    assert _doc(build_spectra(plain, *args[1:], region_size=7_000, workers=2)) == _doc(runs[1])


def test_cluster_matches_local(study, missing_study, cluster, tmp_path):
    addr = cluster.scheduler_address
    for s in (study, missing_study):
        args = (s["vcf"], s["samples"], s["sites"])
        local = build_spectra(*args, region_size=REGION, workers=2)
        remote = build_spectra(*args, region_size=REGION, scheduler=addr)
        assert remote.provenance["execution"]["scheduler"] == addr
        assert _doc(remote) == _doc(local)
    # the command line, local vs cluster: the files agree byte for byte up to provenance
    base = [
        "spectra",
        str(study["vcf"]),
        "--samples",
        str(study["samples"]),
        "--sites",
        str(study["sites"]),
        "--region-size",
        str(REGION),
        "-q",
    ]
    assert main([*base, "--workers", "1", "-o", str(tmp_path / "l.json")]) == 0
    assert main([*base, "--scheduler", addr, "-o", str(tmp_path / "c.json")]) == 0
    assert _file_body(tmp_path / "l.json") == _file_body(tmp_path / "c.json")


# ---------------------------------------------------------------------------- faults


def _region_tasks(s, region_size=REGION):
    pm = read_sample_table(s["samples"])
    sc = read_site_classes(s["sites"])
    with VcfSource(s["vcf"]) as src:
        design = make_design(assign_samples(pm, src.header.samples), sorted(sc.classes))
        plan = make_plan(sc, src.chroms, block_size=3_425, contig_lengths=src.header.contig_lengths)
    tasks = [
        (os.path.abspath(s["vcf"]), c, st, e, design, plan.region_sites(c, st, e))
        for c, st, e in plan.regions(region_size)
    ]
    return tasks, design, plan


SLOW_REGION = 1  # the task that sleeps on its first attempt


def _slow_first_attempt(task):
    """Count a region; task SLOW_REGION sleeps 30 s on its first attempt (a marker file per
    attempt: start-INDEX-PID, and done-INDEX-PID when it returns)."""
    marker_dir, index, inner = task
    first = not any(f.startswith(f"start-{index}-") for f in os.listdir(marker_dir))
    Path(marker_dir, f"start-{index}-{os.getpid()}").touch()
    if index == SLOW_REGION and first:
        time.sleep(30)
    result = _count_task(inner)
    Path(marker_dir, f"done-{index}-{os.getpid()}").touch()
    return result


def _kill_slow_worker(marker_dir: Path, killed: list):
    """on_result callback: at the first result, kill the worker process that is still
    inside the slow task's first attempt."""

    def callback(_i, _r):
        if killed:
            return
        t0 = time.monotonic()
        while time.monotonic() - t0 < 60:
            starts = [f for f in os.listdir(marker_dir) if f.startswith(f"start-{SLOW_REGION}-")]
            if starts:
                pid = int(starts[0].rsplit("-", 1)[1])
                os.kill(pid, signal.SIGKILL)
                killed.append(pid)
                return
            time.sleep(0.02)
        raise AssertionError("the slow task never started")

    return callback


@pytest.mark.parametrize("where", ["local", "cluster"])
def test_killed_worker_loses_nothing_and_counts_nothing_twice(study, tmp_path, where):
    tasks, design, plan = _region_tasks(study)
    assert len(tasks) > 6
    serial = sum((_count_task(t) for t in tasks), start=_empty())
    marker = tmp_path / "markers"
    marker.mkdir()
    wrapped = [(str(marker), i, t) for i, t in enumerate(tasks)]
    killed: list[int] = []
    t0 = time.monotonic()
    if where == "local":
        total = _parallel.map_reduce(
            _slow_first_attempt,
            wrapped,
            operator.add,
            workers=2,
            on_result=_kill_slow_worker(marker, killed),
        )
    else:
        with (
            distributed.LocalCluster(
                n_workers=2, threads_per_worker=1, processes=True, dashboard_address=":0"
            ) as cl,
            distributed.Client(cl.scheduler_address, set_as_default=False) as client,
        ):
            total = _parallel.map_reduce(
                _slow_first_attempt,
                wrapped,
                operator.add,
                scheduler=client,
                on_result=_kill_slow_worker(marker, killed),
            )
    assert time.monotonic() - t0 < 25, "the slow first attempt was not cut short"
    # the kill hit the slow task mid-run: its first attempt started and never finished,
    # and it was run again, to the end, in another process
    (pid,) = killed
    files = set(os.listdir(marker))
    assert f"start-{SLOW_REGION}-{pid}" in files and f"done-{SLOW_REGION}-{pid}" not in files
    assert any(f.startswith(f"done-{SLOW_REGION}-") for f in files)
    # nothing lost, nothing counted twice: the same counts as one process, every record once
    with VcfSource(study["vcf"]) as src:
        n_records = sum(len(b) for b in src.stream())
    assert total.records == serial.records == n_records
    assert _doc(spectra_from_counts(total, design, plan.blocks)) == _doc(
        spectra_from_counts(serial, design, plan.blocks)
    )


def _empty():
    return RegionCounts()


def test_unreachable_scheduler_is_one_line_and_exit_2(study, tmp_path):
    addr = f"tcp://127.0.0.1:{_free_port()}"
    env = dict(os.environ, DRIFTBAND_CONNECT_TIMEOUT="3")
    cmds = [
        [
            "spectra",
            str(study["vcf"]),
            "--samples",
            str(study["samples"]),
            "--sites",
            str(study["sites"]),
            "-o",
            str(tmp_path / "s.json"),
            "--scheduler",
            addr,
        ],
        [
            "fit",
            str(study["dir"] / "truth.json"),
            "--dfe",
            "gamma",
            "--bootstrap",
            "4",
            "-o",
            str(tmp_path / "f.json"),
            "--scheduler",
            addr,
        ],
    ]
    for cmd in cmds:
        r = subprocess.run(
            [sys.executable, "-m", "driftband", *cmd],
            capture_output=True,
            text=True,
            env=env,
            timeout=120,
        )
        assert r.returncode == 2, r.stderr
        lines = r.stderr.strip().splitlines()
        assert len(lines) == 1, r.stderr
        assert f"--scheduler {addr}: cannot reach a dask scheduler" in lines[0]
        assert not (tmp_path / "s.json").exists() and not (tmp_path / "f.json").exists()


def test_silent_listener_and_bad_address_are_one_line(study, tmp_path, capsys):
    with socket.socket() as srv:  # accepts connections but never speaks dask
        srv.bind(("127.0.0.1", 0))
        srv.listen()
        addr = f"tcp://127.0.0.1:{srv.getsockname()[1]}"
        with pytest.raises(OptionError, match="does not answer like a dask scheduler"):
            _parallel.connect(addr, timeout=2)
    with socket.socket() as srv:  # answers, but in another protocol (an SSH banner)
        srv.bind(("127.0.0.1", 0))
        srv.listen()
        held = []

        def banner():
            conn, _ = srv.accept()
            held.append(conn)
            conn.sendall(b"SSH-2.0-OpenSSH_9.2\r\n")

        threading.Thread(target=banner, daemon=True).start()
        with pytest.raises(OptionError, match="cannot connect to a dask scheduler"):
            _parallel.connect(f"127.0.0.1:{srv.getsockname()[1]}", timeout=2)
        for c in held:
            c.close()
    base = [
        "spectra",
        str(study["vcf"]),
        "--samples",
        str(study["samples"]),
        "--sites",
        str(study["sites"]),
        "-o",
        str(tmp_path / "s.json"),
    ]
    for extra, what in (
        (["--scheduler", "tcp://[::1"], "--scheduler"),
        (["--workers", "0"], "--workers"),
        (["--region-size", "0"], "--region-size"),
    ):
        assert main([*base, *extra]) == 2
        err = capsys.readouterr().err.strip().splitlines()
        assert len(err) == 1 and what in err[0], err


def test_user_error_in_a_worker_is_one_line(tmp_path, capsys):
    samples = ["a1", "a2"]
    recs = [rec(1, p, "A", "G", ["0/1", "0/0"]) for p in range(10, 90_000, 997)]
    recs[-3] = rec(1, 87_000, "A", "G", ["0/2", "0/0"])  # allele 2 of a biallelic record
    vcf = write_vcf(
        tmp_path / "e.vcf",
        header(samples, [("1", 100_000)])
        + "\n".join(sorted(recs, key=lambda r: int(r.split("\t")[1])))
        + "\n",
        "bgzf",
    )
    pm = write_text(tmp_path / "pm.tsv", "a1\tA\na2\tA\n")
    bed = write_text(tmp_path / "s.bed", "1\t0\t100000\t4fold\n")
    rc = main(
        [
            "spectra",
            str(vcf),
            "--samples",
            str(pm),
            "--sites",
            str(bed),
            "--workers",
            "2",
            "--region-size",
            "10000",
            "-o",
            str(tmp_path / "e.json"),
        ]
    )
    assert rc == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "allele index exceeds" in err[0], err
    assert not (tmp_path / "e.json").exists()


# ---------------------------------------------------------------------------- bootstrap


@pytest.fixture(scope="module")
def fitted(tmp_path_factory):
    """Point estimates of a gamma DFE on a simulated study with 24 blocks."""
    from driftband.fit.api import LabelledSpectra, fit_spectra
    from driftband.fit.options import FitOptions
    from driftband.spectra.io import read_spectra

    d = tmp_path_factory.mktemp("pboot")
    out = d / "sp.json"
    assert (
        main(
            [
                "simulate",
                "--population",
                "big:N=300,n=12",
                "--class-sites",
                "30000",
                "--theta",
                "0.02",
                "--block-count",
                "24",
                "--seed",
                "17",
                "-o",
                str(out),
                "-q",
            ]
        )
        == 0
    )
    options = FitOptions(eps=0.0)  # gamma DFE, no misorientation: quick refits
    ss = read_spectra(out)
    fits = fit_spectra([LabelledSpectra(str(out), ss)], options)
    return fits, dict(ss.populations), options


def test_bootstrap_same_for_1_and_2_workers_and_cluster(fitted, cluster):
    import copy

    from driftband._io import json_ready
    from driftband.fit.bootstrap import bootstrap_fits, resample_indices

    fits, pops, options = fitted
    runs = {}
    for key, kw in (
        ("w1", {"workers": 1}),
        ("w2", {"workers": 2}),
        ("dask", {"scheduler": cluster.scheduler_address}),
    ):
        f = copy.deepcopy(fits)
        bootstrap_fits(f, pops, options, replicates=8, seed=5, batch=2, **kw)
        runs[key] = json.dumps(json_ready(f[0].bootstrap.to_dict()))
    assert runs["w1"] == runs["w2"] == runs["dask"]
    boot = json.loads(runs["w1"])["models"]["gamma"]
    assert boot["replicates"] == 8 and len(boot["shares"]) == 8
    # replicate k of every run is the refit of the k-th seeded block draw (in order)
    import zlib

    from driftband.fit.bootstrap import _block_arrays, _replicate_task

    pf = fits[0]
    idx = resample_indices(24, 8, 5, zlib.crc32(pf.dataset.encode()))
    bn, bs, ln, ls = _block_arrays(pops[pf.population], options)
    starts = {name: f.x for name, f in pf.fits.items()}
    for k in (0, 5):
        (rep,) = _replicate_task(
            (pf.data.n, pf.data.folded, bn, bs, ln, ls, idx[k : k + 1], options, starts, None)
        )
        assert rep["gamma"]["shares"] == boot["shares"][k]
    assert boot["shares"][0] != boot["shares"][5]


# ---------------------------------------------------------------------------- docs


def test_readme_cluster_commands_use_real_options():
    from driftband.cli import get_parser

    text = (Path(__file__).resolve().parents[1] / "README.md").read_text(encoding="utf-8")
    section = text.split("## Running on a cluster", 1)[1].split("\n## ", 1)[0]
    lines = []
    for block in section.split("```bash")[1:]:
        body = block.split("```", 1)[0].replace("\\\n", " ")
        lines += [ln.split("#", 1)[0].strip() for ln in body.splitlines()]
    lines = [ln for ln in lines if ln]
    parser = get_parser()
    ours = [ln.split()[1:] for ln in lines if ln.startswith("driftband ")]
    assert {a[0] for a in ours} == {"spectra", "fit", "run"}
    for args in ours:
        ns = parser.parse_args(args)  # exits (SystemExit) on an unknown option
        assert ns.scheduler in (None, "tcp://HOST:8786")
    assert any("--scheduler" in a for a in ours) and any("--workers" in a for a in ours)
    # the dask commands and options exist in the installed dask
    worker = next(ln for ln in lines if ln.startswith("dask worker"))
    assert any(ln == "dask scheduler" for ln in lines)
    r = subprocess.run(
        [sys.executable, "-m", "dask", "worker", "--help"],
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert r.returncode == 0
    for opt in (w for w in worker.split() if w.startswith("--")):
        assert opt in r.stdout, opt


@pytest.fixture(scope="module")
def dask_processes(tmp_path_factory):
    """A real ``dask scheduler`` and a ``dask worker`` (2 processes of 1 thread), started
    as the README's cluster section does; yields the scheduler's address."""
    d = tmp_path_factory.mktemp("dask")
    sfile = d / "scheduler.json"
    env = dict(os.environ, DASK_DISTRIBUTED__WORKER__DAEMON="False")
    dask = [sys.executable, "-m", "dask"]
    sched = subprocess.Popen(
        [*dask, "scheduler", "--port", "0", "--dashboard-address", ":0",
         "--scheduler-file", str(sfile)],
        cwd=d, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
    )  # fmt: skip
    procs = [sched]
    try:
        for _ in range(300):
            if sfile.is_file() and sfile.stat().st_size > 0:
                break
            time.sleep(0.1)
        addr = json.loads(sfile.read_text())["address"]
        procs.append(
            subprocess.Popen(
                [
                    *dask,
                    "worker",
                    addr,
                    "--nworkers",
                    "2",
                    "--nthreads",
                    "1",
                    "--dashboard-address",
                    ":0",
                ],
                cwd=d,
                env=env,
                stdout=subprocess.DEVNULL,
                stderr=subprocess.DEVNULL,
            )  # fmt: skip
        )
        with distributed.Client(addr, set_as_default=False) as c:
            c.wait_for_workers(2, timeout=120)
        yield addr
    finally:
        for p in reversed(procs):
            p.terminate()
        for p in procs:
            try:
                p.wait(timeout=30)
            except subprocess.TimeoutExpired:
                p.kill()


@pytest.mark.slow  # two runs and a cluster start: about 30 s on an idle 2-core machine
def test_run_on_a_real_dask_cluster_gives_the_local_results(dask_processes, tmp_path):
    """``driftband run --scheduler`` sends every stage to the cluster (dask scheduler and
    dask worker processes) and writes the same tables as a local run; the report and
    provenance/stages.json say where each stage ran."""
    ex = Path(__file__).resolve().parents[1] / "example_vcfs"
    base = [
        "run", "--vcf", str(ex / "tiny.vcf.gz"), "--samples", str(ex / "tiny.samples.tsv"),
        "--sites", str(ex / "tiny.sites.bed"), "--callable", str(ex / "tiny.callable.bed"),
        "--ancestral", "outgroup:islet", "--dfe", "gamma", "--bootstrap", "2", "-q",
    ]  # fmt: skip
    local, remote = tmp_path / "local", tmp_path / "remote"
    assert main([*base, "--workers", "2", "--out-dir", str(local)]) == 0
    assert main([*base, "--scheduler", dask_processes, "--out-dir", str(remote)]) == 0
    for name in ("bands.tsv", "compare.tsv"):
        assert (local / name).read_bytes() == (remote / name).read_bytes(), name
    assert _file_body(local / "spectra.json") == _file_body(remote / "spectra.json")
    stages = json.loads((remote / "provenance" / "stages.json").read_text())["stages"]
    assert {s: r["ran_on"] for s, r in stages.items() if s != "report"} == {
        s: f"dask scheduler {dask_processes}" for s in stages if s != "report"
    }
    spectra = json.loads((remote / "spectra.json").read_text())
    assert spectra["provenance"]["execution"]["scheduler"] == dask_processes
    page = (remote / "report.html").read_text(encoding="utf-8")
    assert f"fit: dask scheduler {dask_processes}" in page
    assert "local worker processes" in (local / "report.html").read_text(encoding="utf-8")
