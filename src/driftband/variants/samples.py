"""Sample tables: which VCF sample belongs to which population.

A sample table is a tab-separated text file, one sample a line. Its first line may name
the columns: a line with a ``sample`` column (or ``id``, ``individual``) and a
``population`` column (or ``pop``, ``group``), in any case and in any order, is a header,
and then those two columns are read wherever they stand (other columns are ignored).
Without a header the first column is the sample and the second its population. Blank
lines and lines starting with ``#`` are ignored. No model code here.
"""

from __future__ import annotations

import os
from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np

from ..exceptions import InputError, OptionError

__all__ = ["SampleTable", "SampleAssignment", "assign_samples", "read_sample_table"]

_HEADER_SAMPLE = {"sample", "samples", "sample_id", "sampleid", "id", "individual", "ind"}
_HEADER_POP = {"population", "populations", "pop", "group"}


@dataclass
class SampleTable:
    """Sample to population assignment, in file order.

    Attributes
    ----------
    samples : dict of str to str
        Sample name -> population name.
    path : str or None
        Where it was read from (for messages).
    lines : dict of str to int
        Sample name -> 1-based line number in the file (for messages).
    """

    samples: dict[str, str]
    path: str | None = None
    lines: dict[str, int] = field(default_factory=dict)

    @property
    def populations(self) -> list[str]:
        """Population names in order of first appearance."""
        return list(dict.fromkeys(self.samples.values()))

    def members(self, population: str) -> list[str]:
        """Samples of one population, in file order."""
        return [s for s, p in self.samples.items() if p == population]


def _header_columns(cols: list[str]) -> tuple[int, int] | None:
    """The (sample, population) columns named by a header line, or None if not a header."""
    low = [c.lower() for c in cols]
    s = [i for i, c in enumerate(low) if c in _HEADER_SAMPLE]
    p = [i for i, c in enumerate(low) if c in _HEADER_POP]
    return (s[0], p[0]) if s and p else None


def read_sample_table(path: str | os.PathLike) -> SampleTable:
    """Read a sample table (``sample<TAB>population``, header optional).

    Parameters
    ----------
    path : path-like

    Returns
    -------
    SampleTable

    Raises
    ------
    InputError
        File missing or empty, a line without two columns, or a sample listed twice
        (both lines named).

    Examples
    --------
    >>> import tempfile, os
    >>> d = tempfile.mkdtemp(); p = os.path.join(d, "pm.tsv")
    >>> _ = open(p, "w").write("sample\\tpopulation\\nA1\\tlake\\nA2\\tlake\\nB1\\triver\\n")
    >>> read_sample_table(p).populations
    ['lake', 'river']
    """
    p = os.fspath(path)
    try:
        with open(p, encoding="utf-8", newline="") as fh:
            text = fh.read()
    except FileNotFoundError:
        raise InputError("sample table not found", p) from None
    except UnicodeDecodeError:
        raise InputError(
            "the sample table is not a UTF-8 text file (expected sample<TAB>population lines)", p
        ) from None
    samples: dict[str, str] = {}
    lines: dict[str, int] = {}
    first = True
    at = (0, 1)  # columns of the sample and the population
    for ln, raw in enumerate(text.splitlines(), start=1):
        line = raw.strip()
        if not line or line.startswith("#"):
            continue
        cols = raw.rstrip("\r\n").split("\t")
        if len(cols) < 2:
            cols = line.split()
        cols = [c.strip() for c in cols]
        if first:
            first = False
            header = _header_columns(cols)
            if header is not None:
                at = header
                continue
        if len(cols) <= max(at) or not cols[at[0]] or not cols[at[1]]:
            what = "sample, population" if at == (0, 1) else "the columns its header names"
            raise InputError(f"expected tab-separated columns: {what}", p, ln)
        cols = [cols[at[0]], cols[at[1]]]
        s, pop = cols[0], cols[1]
        if s in samples:
            raise InputError(
                f"sample {s!r} is listed twice (also on line {lines[s]}); "
                "each sample may belong to one population only",
                p,
                ln,
            )
        samples[s] = pop
        lines[s] = ln
    if not samples:
        raise InputError(
            "the sample table lists no samples (expected sample<TAB>population lines)", p
        )
    return SampleTable(samples, p, lines)


@dataclass(frozen=True)
class SampleAssignment:
    """Populations matched to the sample columns of one VCF.

    Attributes
    ----------
    populations : tuple of str
        Focal populations (those that get spectra), in sample-table order.
    columns : tuple of ndarray of int64
        For each focal population, its 0-based VCF sample column indices, shape (k,).
    outgroup : str or None
        Name of the outgroup population (not focal), if any.
    outgroup_columns : ndarray of int64 or None
        Its VCF sample columns.
    ignored : tuple of str
        VCF samples absent from the sample table (ignored).
    """

    populations: tuple[str, ...]
    columns: tuple[np.ndarray, ...]
    outgroup: str | None = None
    outgroup_columns: np.ndarray | None = None
    ignored: tuple[str, ...] = ()

    def used_columns(self) -> np.ndarray:
        """All VCF sample columns used (focal then outgroup), sorted, int64."""
        cols = list(self.columns)
        if self.outgroup_columns is not None:
            cols.append(self.outgroup_columns)
        return np.unique(np.concatenate(cols)) if cols else np.empty(0, np.int64)


def assign_samples(
    sample_table: SampleTable,
    vcf_samples: Sequence[str],
    vcf_path: str | None = None,
    outgroup: str | None = None,
    populations: Sequence[str] | None = None,
) -> SampleAssignment:
    """Match a sample table to the samples of a VCF.

    Parameters
    ----------
    sample_table : SampleTable
    vcf_samples : sequence of str
        Sample columns of the VCF, in order.
    vcf_path : str, optional
        For messages.
    outgroup : str, optional
        A population of the sample table used to polarise alleles; it gets no spectrum.
    populations : sequence of str, optional
        Keep only these focal populations (default: all but the outgroup).

    Returns
    -------
    SampleAssignment

    Raises
    ------
    InputError
        SampleTable samples absent from the VCF, duplicate VCF sample names, or a focal
        population with fewer than 2 samples.
    OptionError
        ``outgroup`` or ``populations`` naming a population that is not in the sample_table.
    """
    index: dict[str, int] = {}
    for i, s in enumerate(vcf_samples):
        if s in index:
            raise InputError(f"sample {s!r} appears twice in the #CHROM header line", vcf_path)
        index[s] = i
    missing = [s for s in sample_table.samples if s not in index]
    if missing:
        shown = ", ".join(repr(s) for s in missing[:5]) + (" ..." if len(missing) > 5 else "")
        where = f" {vcf_path}" if vcf_path else ""
        raise InputError(
            f"{len(missing)} sample-table sample(s) not among the samples of the VCF{where}: "
            f"{shown}; remove them from the sample table or fix the sample names",
            sample_table.path,
            sample_table.lines.get(missing[0]),
        )
    pops = sample_table.populations
    if outgroup is not None and outgroup not in pops:
        raise OptionError(
            f"--ancestral outgroup:{outgroup}: population {outgroup!r} is not "
            f"in the sample table (populations: {', '.join(pops)})"
        )
    focal = [p for p in pops if p != outgroup]
    if populations is not None:
        for p in populations:
            if p not in pops:
                raise OptionError(
                    f"population {p!r} is not in the sample table (populations: {', '.join(pops)})"
                )
            if p == outgroup:
                raise OptionError(f"population {p!r} is the outgroup and cannot be focal")
        focal = [p for p in focal if p in set(populations)]
    if not focal:
        raise InputError(
            "no focal population left (the sample table holds only the outgroup)", sample_table.path
        )
    cols = []
    for p in focal:
        members = sample_table.members(p)
        if len(members) < 2:
            raise InputError(
                f"population {p!r} has {len(members)} sample; a spectrum needs "
                "at least 2 samples (merge it with another population or "
                "drop it from the sample table)",
                sample_table.path,
                sample_table.lines.get(members[0]) if members else None,
            )
        cols.append(np.array(sorted(index[s] for s in members), dtype=np.int64))
    og_cols = None
    if outgroup is not None:
        og_cols = np.array(sorted(index[s] for s in sample_table.members(outgroup)), dtype=np.int64)
    ignored = tuple(s for s in vcf_samples if s not in sample_table.samples)
    return SampleAssignment(tuple(focal), tuple(cols), outgroup, og_cols, ignored)
