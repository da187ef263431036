"""Population maps: which VCF sample belongs to which population.

A popmap is a tab-separated text file ``sample<TAB>population``, one sample a line. A
header line is optional: a first line whose columns read ``sample`` (or ``id``,
``individual``) and ``population`` (or ``pop``, ``group``), in any case, is taken as one.
Blank lines and lines starting with ``#`` are ignored; extra columns are ignored.
No model code here.
"""

from __future__ import annotations

import os
from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np

from ..exceptions import InputError, OptionError

__all__ = ["Popmap", "SampleAssignment", "assign_samples", "read_popmap"]

_HEADER_SAMPLE = {"sample", "samples", "sample_id", "sampleid", "id", "individual", "ind"}
_HEADER_POP = {"population", "populations", "pop", "group"}


@dataclass
class Popmap:
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


def read_popmap(path: str | os.PathLike) -> Popmap:
    """Read a popmap file (``sample<TAB>population``, header optional).

    Parameters
    ----------
    path : path-like

    Returns
    -------
    Popmap

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
    >>> read_popmap(p).populations
    ['lake', 'river']
    """
    p = os.fspath(path)
    try:
        with open(p, encoding="utf-8", newline="") as fh:
            text = fh.read()
    except FileNotFoundError:
        raise InputError("popmap file not found", p) from None
    except UnicodeDecodeError:
        raise InputError(
            "popmap is not a UTF-8 text file (expected sample<TAB>population lines)", p
        ) from None
    samples: dict[str, str] = {}
    lines: dict[str, int] = {}
    first = True
    for ln, raw in enumerate(text.splitlines(), start=1):
        line = raw.strip()
        if not line or line.startswith("#"):
            continue
        cols = raw.rstrip("\r\n").split("\t")
        if len(cols) < 2:
            cols = line.split()
        cols = [c.strip() for c in cols]
        if len(cols) < 2 or not cols[0] or not cols[1]:
            raise InputError("expected two tab-separated columns: sample, population", p, ln)
        if first:
            first = False
            if cols[0].lower() in _HEADER_SAMPLE and cols[1].lower() in _HEADER_POP:
                continue
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
        raise InputError("the popmap lists no samples (expected sample<TAB>population lines)", p)
    return Popmap(samples, p, lines)


@dataclass(frozen=True)
class SampleAssignment:
    """Populations matched to the sample columns of one VCF.

    Attributes
    ----------
    populations : tuple of str
        Focal populations (those that get spectra), in popmap order.
    columns : tuple of ndarray of int64
        For each focal population, its 0-based VCF sample column indices, shape (k,).
    outgroup : str or None
        Name of the outgroup population (not focal), if any.
    outgroup_columns : ndarray of int64 or None
        Its VCF sample columns.
    ignored : tuple of str
        VCF samples absent from the popmap (ignored).
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
    popmap: Popmap,
    vcf_samples: Sequence[str],
    vcf_path: str | None = None,
    outgroup: str | None = None,
    populations: Sequence[str] | None = None,
) -> SampleAssignment:
    """Match a popmap to the samples of a VCF.

    Parameters
    ----------
    popmap : Popmap
    vcf_samples : sequence of str
        Sample columns of the VCF, in order.
    vcf_path : str, optional
        For messages.
    outgroup : str, optional
        A population of the popmap used to polarise alleles; it gets no spectrum.
    populations : sequence of str, optional
        Keep only these focal populations (default: all but the outgroup).

    Returns
    -------
    SampleAssignment

    Raises
    ------
    InputError
        Popmap samples absent from the VCF, duplicate VCF sample names, or a focal
        population with fewer than 2 samples.
    OptionError
        ``outgroup`` or ``populations`` naming a population that is not in the popmap.
    """
    index: dict[str, int] = {}
    for i, s in enumerate(vcf_samples):
        if s in index:
            raise InputError(f"sample {s!r} appears twice in the #CHROM header line", vcf_path)
        index[s] = i
    missing = [s for s in popmap.samples if s not in index]
    if missing:
        shown = ", ".join(repr(s) for s in missing[:5]) + (" ..." if len(missing) > 5 else "")
        where = f" {vcf_path}" if vcf_path else ""
        raise InputError(
            f"{len(missing)} popmap sample(s) not among the samples of the VCF{where}: "
            f"{shown}; remove them from the popmap or fix the sample names",
            popmap.path,
            popmap.lines.get(missing[0]),
        )
    pops = popmap.populations
    if outgroup is not None and outgroup not in pops:
        raise OptionError(
            f"--ancestral outgroup:{outgroup}: population {outgroup!r} is not "
            f"in the popmap (populations: {', '.join(pops)})"
        )
    focal = [p for p in pops if p != outgroup]
    if populations is not None:
        for p in populations:
            if p not in pops:
                raise OptionError(
                    f"population {p!r} is not in the popmap (populations: {', '.join(pops)})"
                )
            if p == outgroup:
                raise OptionError(f"population {p!r} is the outgroup and cannot be focal")
        focal = [p for p in focal if p in set(populations)]
    if not focal:
        raise InputError(
            "no focal population left (the popmap holds only the outgroup)", popmap.path
        )
    cols = []
    for p in focal:
        members = popmap.members(p)
        if len(members) < 2:
            raise InputError(
                f"population {p!r} has {len(members)} sample; a spectrum needs "
                "at least 2 samples (merge it with another population or "
                "drop it from the popmap)",
                popmap.path,
                popmap.lines.get(members[0]) if members else None,
            )
        cols.append(np.array(sorted(index[s] for s in members), dtype=np.int64))
    og_cols = None
    if outgroup is not None:
        og_cols = np.array(sorted(index[s] for s in popmap.members(outgroup)), dtype=np.int64)
    ignored = tuple(s for s in vcf_samples if s not in popmap.samples)
    return SampleAssignment(tuple(focal), tuple(cols), outgroup, og_cols, ignored)
