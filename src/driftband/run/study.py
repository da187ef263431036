"""Study files of ``driftband run``: what a study is, read from TOML or from flags.

A study is one or more datasets (each a VCF, a sample table and the site classes: a sites BED
or a reference FASTA + GFF3 annotation, with its own polarisation) and the options of the
fit, the bootstrap and the comparisons. Every key is listed in :data:`STUDY_KEYS` (the
README's "Study files" section documents them); an unknown key is an error naming the
key, its section, the file and the line. Relative paths are taken relative to the study
file's folder. See :func:`read_study`, :func:`study_from_dict` and :func:`check_files`.

Longer than the ~600-line guide (about 690 lines after formatting): most of it is the
table of study keys with their help texts and the per-key type checks, one concern
(reading and checking a study file).
"""

from __future__ import annotations

import os
import re
import sys
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import Any

from .._options import COMMAND_LINE, OptionSource
from ..compare.api import check_compare_settings
from ..defaults import (
    COMPARE_TESTS,
    DEFAULT_BLOCK_SIZE,
    DEFAULT_EDGES_NES,
    DEFAULT_LEVEL,
    DEFAULT_MODELS,
    DEFAULT_REPLICATES,
    DEFAULT_SEED,
    format_edges,
)
from ..effect import DEFAULT_EFFECT
from ..exceptions import DriftbandError, InputError, OptionError
from ..fit.bootstrap import check_bootstrap_settings
from ..fit.size_history import demes_path

__all__ = [
    "FILE_KEYS",
    "STUDY_KEYS",
    "BootstrapSettings",
    "CompareSettings",
    "Dataset",
    "FitSettings",
    "Study",
    "check_files",
    "read_study",
    "restate_option_error",
    "study_from_dict",
]

#: Section -> key -> (kind, meaning). ``dataset`` is an array of tables (``[[dataset]]``).
STUDY_KEYS: dict[str, dict[str, tuple[str, str]]] = {
    "study": {
        "name": ("str", "name of the study (default: the study file's name)"),
        "description": ("str", "free text, recorded in the provenance"),
        "out_dir": ("path", "output folder (default: none; --out-dir overrides it)"),
    },
    "dataset": {
        "name": (
            "name",
            "label of the dataset; population names become NAME/POP when "
            "the study has several datasets (default: the VCF's name)",
        ),
        "vcf": (
            "file",
            "VCF/BCF of all samples (bgzipped + indexed, bgzipped or plain), or a VCF Zarr "
            "store (.vcz)",
        ),
        "samples": ("file", "the sample table: TSV of sample and population columns"),
        "sites": ("file", "BED4 of site classes (0fold, 4fold); or give fasta + gff"),
        "fasta": ("file", "reference FASTA (plain or bgzipped) to classify sites from"),
        "gff": ("file", "GFF3 gene annotation of that reference"),
        "code": ("int", "NCBI translation table for classify (default 1)"),
        "transcripts": ("str", "classify: 'agree' (default) or 'longest'"),
        "exclude_softmasked": ("bool", "classify: drop soft-masked (lowercase) sites"),
        "callable": ("file", "BED of callable sites; classes are intersected with it"),
        "all_sites_callable": (
            "bool",
            "state that every class site was callable (a variants-only VCF without "
            "callable is warned about otherwise)",
        ),
        "ancestral": (
            "str",
            "polarisation: 'aa' (INFO/AA, default), 'fold', 'outgroup:POP' or "
            "'fasta:FILE' (an ancestral sequence aligned to the reference)",
        ),
        "exclude_lowercase_ancestral": (
            "bool",
            "with ancestral = 'fasta:FILE': drop sites whose ancestral base is lower case",
        ),
        "project": (
            "project",
            "gene copies to project to: N for all populations or a "
            "table {POP = N} (default: automatic)",
        ),
        "block_size": ("posint", f"bootstrap block length in bp (default {DEFAULT_BLOCK_SIZE})"),
        "blocks": ("file", "BED of bootstrap blocks (e.g. genes) instead of block_size"),
        "regions": ("strlist", "only these regions: CHROM, CHROM:START-END or BED files"),
        "min_gq": ("int", "genotypes with GQ below this become missing"),
        "min_dp": ("int", "genotypes with DP below this become missing"),
        "pass_only": ("bool", "keep only records whose FILTER is PASS or '.'"),
    },
    "fit": {
        "dfe": (
            "strlist",
            f"DFE families fitted (default {', '.join(DEFAULT_MODELS)}; "
            "NAME+beneficial adds a beneficial class)",
        ),
        "beneficial": ("bool", "add a beneficial class to every family"),
        "misorientation": ("str", "'free' (default) or 'fixed:RATE'"),
        "demography": (
            "str",
            "nuisance (default), equilibrium, one-change, two-change, growth, auto or demes:FILE",
        ),
        "bands": (
            "numlist",
            f"band edges on |Ne*s| (default [{format_edges().replace(',', ', ')}])",
        ),
        "neutral": ("str", "neutral class (default 4fold)"),
        "selected": ("str", "selected class (default 0fold)"),
        "populations": ("strlist", "fit only these populations (default: all)"),
        "headline": (
            "str",
            "'averaged' (default: shares averaged over the families by Akaike weight) or "
            "'best' (the AIC-best family alone)",
        ),
        "effect": (
            "str",
            "what s in the band edges' |Ne*s| is: 'heterozygote' (default; fitness "
            "1:1+s:1+2s, S = 4Ne*s) or 'homozygote' (fitness 1:1+s/2:1+s, S = 2Ne*s)",
        ),
    },
    "bootstrap": {
        "replicates": (
            "nonnegint",
            f"block-bootstrap replicates (default {DEFAULT_REPLICATES}; 0: none)",
        ),
        "level": ("float", "confidence level of the intervals (default 0.95)"),
        "seed": ("int", "random seed (default 1)"),
        "workers": ("posint", "worker processes (default: the cores available)"),
        "models": (
            "str",
            "'all' (default: every family, needed for the interval of the averaged "
            "headline) or 'best' (each population's AIC-best model and the model compared)",
        ),
    },
    "compare": {
        "model": (
            "str",
            "DFE model of the comparisons: 'auto' (default: lowest AIC "
            "summed over all populations) or a fitted model",
        ),
        "tests": ("strlist", f"tests (default all: {', '.join(COMPARE_TESTS)}); [] for none"),
        "adjust": ("str", "multiple-testing adjustment (default holm)"),
        "pairs": ("strlist", "pairs as 'A:B' (default: every pair)"),
        "relative_mutation_rate": (
            "floattable",
            "{POP = R}: mutation rate relative to the others (default 1)",
        ),
    },
}

_NAME_RE = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_.-]*$")
#: Keys of a dataset that name input files (resolved against the study file's folder).
FILE_KEYS = ("vcf", "samples", "sites", "fasta", "gff", "callable", "blocks")


@dataclass
class Dataset:
    """One dataset of a study: its files and how its spectra are made.

    Paths are absolute (resolved against the study file's folder).
    """

    name: str
    vcf: str
    samples: str
    sites: str | None = None
    fasta: str | None = None
    gff: str | None = None
    code: int = 1
    transcripts: str = "agree"
    exclude_softmasked: bool = False
    callable: str | None = None
    all_sites_callable: bool = False
    ancestral: str = "aa"
    exclude_lowercase_ancestral: bool = False
    project: int | dict[str, int] | None = None
    block_size: int = DEFAULT_BLOCK_SIZE
    blocks: str | None = None
    regions: list[str] | None = None
    min_gq: int | None = None
    min_dp: int | None = None
    pass_only: bool = False

    @property
    def ancestral_fasta(self) -> str | None:
        """The ancestral FASTA of ``ancestral = "fasta:FILE"`` (absolute), else None."""
        kind, _, path = self.ancestral.partition(":")
        return path if kind == "fasta" else None

    @property
    def classify(self) -> bool:
        """True when the site classes come from FASTA + GFF3."""
        return self.sites is None

    def spectra_options(self) -> dict[str, Any]:
        """Options of the spectra stage (JSON-ready)."""
        return {
            "ancestral": self.ancestral,
            "project": self.project,
            "block_size": self.block_size,
            "regions": self.regions,
            "min_gq": self.min_gq,
            "min_dp": self.min_dp,
            "pass_only": self.pass_only,
            "exclude_lowercase_ancestral": self.exclude_lowercase_ancestral,
            "all_sites_callable": self.all_sites_callable,
        }

    def classify_options(self) -> dict[str, Any]:
        """Options of the classify stage (JSON-ready)."""
        return {
            "code": self.code,
            "transcripts": self.transcripts,
            "exclude_softmasked": self.exclude_softmasked,
        }


@dataclass
class FitSettings:
    """Options of the fit stage."""

    dfe: tuple[str, ...] = DEFAULT_MODELS
    beneficial: bool = False
    misorientation: str = "free"
    demography: str = "nuisance"
    bands: tuple[float, ...] = DEFAULT_EDGES_NES
    neutral: str = "4fold"
    selected: str = "0fold"
    populations: list[str] | None = None
    headline: str = "averaged"
    effect: str = DEFAULT_EFFECT


@dataclass
class BootstrapSettings:
    """Options of the bootstrap stage (``workers`` does not change the results)."""

    replicates: int = DEFAULT_REPLICATES
    level: float = DEFAULT_LEVEL
    seed: int = DEFAULT_SEED
    workers: int | None = None
    models: str = "all"


@dataclass
class CompareSettings:
    """Options of the compare stage."""

    model: str = "auto"
    tests: tuple[str, ...] = COMPARE_TESTS
    adjust: str = "holm"
    pairs: list[str] | None = None
    relative_mutation_rate: dict[str, float] = field(default_factory=dict)


@dataclass
class Study:
    """A whole study: datasets and options (see the module docstring).

    Attributes
    ----------
    name : str
    datasets : list of Dataset
    fit, bootstrap, compare : settings
    description : str
    out_dir : str or None
        Output folder named in the study file (absolute), if any.
    source : str or None
        The study file (None: built from command-line flags).
    text : str or None
        The study file's text (kept in the output's provenance).
    """

    name: str
    datasets: list[Dataset]
    fit: FitSettings = field(default_factory=FitSettings)
    bootstrap: BootstrapSettings = field(default_factory=BootstrapSettings)
    compare: CompareSettings = field(default_factory=CompareSettings)
    description: str = ""
    out_dir: str | None = None
    source: str | None = None
    text: str | None = None

    @property
    def several(self) -> bool:
        """True when population names carry their dataset's label."""
        return len(self.datasets) > 1

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready copy (without the file text)."""
        d = asdict(self)
        d.pop("text", None)
        return d

    def identity(self) -> dict[str, Any]:
        """What makes two runs the same study: names and the input files' names.

        Option changes or edited file contents keep the identity (the stage cache
        redoes what they affect); another name or other input files make another study.
        """
        return {
            "name": self.name,
            "datasets": [
                {
                    "name": d.name,
                    **{
                        k: os.path.basename(getattr(d, k))
                        for k in FILE_KEYS
                        if getattr(d, k) is not None
                    },
                }
                for d in self.datasets
            ],
        }


# ------------------------------------------------------------------------- TOML reading


def _load_toml(path: Path) -> tuple[dict[str, Any], str]:
    if sys.version_info >= (3, 11):
        import tomllib
    else:  # pragma: no cover
        import tomli as tomllib
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise InputError("study file not found", path) from None
    except IsADirectoryError:
        raise InputError("is a folder, not a study file", path) from None
    except UnicodeDecodeError:
        raise InputError("not a study file (not UTF-8 text)", path) from None
    try:
        doc = tomllib.loads(text)
    except tomllib.TOMLDecodeError as err:
        m = re.search(r"line (\d+)", str(err))
        raise InputError(f"not valid TOML ({err})", path, int(m.group(1)) if m else None) from None
    return doc, text


def _key_lines(text: str) -> dict[tuple[str, str | None], int]:
    """Line of each ``key =`` per section (``dataset[0]`` for the first ``[[dataset]]``)."""
    out: dict[tuple[str, str | None], int] = {}
    section = ""
    counts: dict[str, int] = {}
    for k, raw in enumerate(text.splitlines(), start=1):
        s = raw.strip()
        if s.startswith("[["):
            name = s[2:].split("]]", 1)[0].strip()
            idx = counts.get(name, 0)
            counts[name] = idx + 1
            section = f"{name}[{idx}]"
            out.setdefault((section, None), k)
        elif s.startswith("["):
            section = s[1:].split("]", 1)[0].strip()
            if section == "dataset":  # one [dataset] table: the first dataset
                section = "dataset[0]"
            out.setdefault((section, None), k)
        else:
            m = re.match(r'^("[^"]*"|\'[^\']*\'|[A-Za-z0-9_.-]+)\s*=', s)
            if m:
                out.setdefault((section, m.group(1).strip("\"'")), k)
    return out


class _Where:
    """Names a key in messages: ``study.toml:12`` + ``[fit] key 'dfe'`` or ``--dfe``."""

    def __init__(
        self, path: str | None, lines: dict | None = None, flags: dict[str, str] | None = None
    ) -> None:
        self.path = path
        self.lines = lines or {}
        self.flags = flags or {}

    def line(self, section: str, key: str | None) -> int | None:
        return self.lines.get((section, key)) or self.lines.get((section, None))

    def name(self, section: str, key: str) -> str:
        if self.path is None:
            return self.flags.get(key, f"--{key.replace('_', '-')}")
        shown = "dataset" if section.startswith("dataset") else section
        return f"[{shown}] key {key!r}"

    def error(self, section: str, key: str | None, message: str) -> DriftbandError:
        if self.path is None:
            return OptionError(message)
        return InputError(message, self.path, self.line(section, key))

    def source(self, section: str) -> OptionSource:
        """The section as an :class:`OptionSource` (command-line flags when no file)."""
        if self.path is None:
            return COMMAND_LINE
        return OptionSource(section, self.path, self.lines)


def _value(where: _Where, section: str, key: str, v: Any, kind: str) -> Any:
    what = where.name(section, key)

    def bad(expect: str) -> DriftbandError:
        return where.error(section, key, f"{what} must be {expect}, not {v!r}")

    if kind in ("str", "path", "file", "name"):
        if not isinstance(v, str) or not v.strip():
            raise bad("a non-empty string")
        if kind == "name" and not _NAME_RE.match(v):
            raise bad("a name of letters, digits, '_', '.' and '-' (no '/' or spaces)")
        return v
    if kind in ("int", "posint", "nonnegint"):
        if isinstance(v, bool) or not isinstance(v, int):
            raise bad("an integer")
        if kind == "posint" and v < 1:
            raise bad("a positive integer")
        if kind == "nonnegint" and v < 0:
            raise bad("an integer >= 0")
        return v
    if kind == "float":
        if isinstance(v, bool) or not isinstance(v, int | float):
            raise bad("a number")
        return float(v)
    if kind == "bool":
        if not isinstance(v, bool):
            raise bad("true or false")
        return v
    if kind == "strlist":
        if isinstance(v, str):
            v = [t.strip() for t in v.split(",") if t.strip()]
        if not isinstance(v, list) or not all(isinstance(t, str) and t for t in v):
            raise bad("a list of strings")
        return list(v)
    if kind == "numlist":
        if not isinstance(v, list) or not all(
            isinstance(t, int | float) and not isinstance(t, bool) for t in v
        ):
            raise bad("a list of numbers")
        return tuple(float(t) for t in v)
    if kind == "project":
        if isinstance(v, int) and not isinstance(v, bool) and v > 0:
            return v
        if (
            isinstance(v, dict)
            and v
            and all(isinstance(n, int) and not isinstance(n, bool) and n > 0 for n in v.values())
        ):
            return {str(k): int(n) for k, n in v.items()}
        raise bad("a positive integer or a table {POP = N}")
    if kind == "floattable":
        if isinstance(v, dict) and all(
            isinstance(r, int | float) and not isinstance(r, bool) for r in v.values()
        ):
            return {str(k): float(r) for k, r in v.items()}
        raise bad("a table {POP = number}")
    raise AssertionError(kind)  # pragma: no cover


def _section(where: _Where, section: str, table: Any, schema: str) -> dict[str, Any]:
    """Check a table's keys and types; returns the converted values."""
    shown = "dataset" if section.startswith("dataset") else section
    if not isinstance(table, dict):
        raise where.error(section, None, f"[{shown}] must be a table of keys")
    keys = STUDY_KEYS[schema]
    out = {}
    for key, v in table.items():
        if key not in keys:
            known = ", ".join(keys)
            raise where.error(
                section, key, f"unknown key {key!r} in [{shown}] (known keys: {known})"
            )
        out[key] = _value(where, section, key, v, keys[key][0])
    return out


def _resolve(base: Path, p: str) -> str:
    q = Path(os.path.expanduser(p))
    return os.path.abspath(q if q.is_absolute() else base / q)


def _default_name(vcf: str) -> str:
    name = os.path.basename(vcf)
    for ext in (".gz", ".bgz", ".zip", ".vcz", ".vcf", ".bcf"):
        if name.endswith(ext):
            name = name[: -len(ext)]
    name = re.sub(r"[^A-Za-z0-9_.-]", "_", name).strip("._-")
    return name or "dataset"


def _dataset(where: _Where, section: str, vals: dict[str, Any], base: Path) -> Dataset:
    label = vals.get("name")
    who = (
        f"dataset {label!r}"
        if label
        else f"dataset {int(section[8:-1]) + 1}"
        if where.path is not None
        else "the dataset"
    )
    for key in ("vcf", "samples"):
        if key not in vals:
            raise where.error(section, None, f"{who}: {where.name(section, key)} is required")
    has_sites, has_genome = "sites" in vals, ("fasta" in vals or "gff" in vals)
    if has_sites and has_genome:
        raise where.error(
            section,
            "sites",
            f"{who}: give either sites (a BED of site classes) or fasta + gff, not both",
        )
    if not has_sites and not ("fasta" in vals and "gff" in vals):
        missing = "gff" if "fasta" in vals else "fasta" if "gff" in vals else "sites"
        raise where.error(
            section,
            None,
            f"{who}: needs the site classes: sites = BED, or "
            f"fasta + gff ({where.name(section, missing)} "
            "is missing)",
        )
    if has_sites:
        for key in ("code", "transcripts", "exclude_softmasked"):
            if key in vals:
                raise where.error(
                    section,
                    key,
                    f"{who}: {where.name(section, key)} applies "
                    "only to site classes made from fasta + gff",
                )
    if vals.get("transcripts", "agree") not in ("agree", "longest"):
        raise where.error(
            section, "transcripts", f"{who}: transcripts must be 'agree' or 'longest'"
        )
    anc = vals.get("ancestral", "aa")
    kind, _, pop = anc.partition(":")
    if not (anc in ("aa", "fold") or (kind in ("outgroup", "fasta") and pop)):
        raise where.error(
            section,
            "ancestral",
            f"{who}: ancestral must be 'aa', 'fold', 'outgroup:POP' or 'fasta:FILE', not {anc!r}",
        )
    if vals.get("exclude_lowercase_ancestral") and kind != "fasta":
        raise where.error(
            section,
            "exclude_lowercase_ancestral",
            f"{who}: {where.name(section, 'exclude_lowercase_ancestral')} applies only to "
            "ancestral = 'fasta:FILE'",
        )
    if "blocks" in vals and "block_size" in vals:
        raise where.error(section, "blocks", f"{who}: give blocks or block_size, not both")
    d: dict[str, Any] = {k: (_resolve(base, v) if k in FILE_KEYS else v) for k, v in vals.items()}
    regions = d.get("regions")
    if regions:  # BED files among the regions are paths too
        d["regions"] = [
            _resolve(base, r) if r.endswith((".bed", ".bed.gz")) else r for r in regions
        ]
    if kind == "fasta":  # the ancestral FASTA is a path too
        d["ancestral"] = "fasta:" + _resolve(base, pop)
    d.setdefault("name", _default_name(d["vcf"]))
    return Dataset(**d)


def study_from_dict(
    doc: dict[str, Any],
    source: str | os.PathLike | None = None,
    base: str | os.PathLike | None = None,
    text: str | None = None,
    flags: dict[str, str] | None = None,
) -> Study:
    """Build and check a :class:`Study` from a parsed study document.

    Parameters
    ----------
    doc : dict
        Sections ``study``, ``dataset`` (a list of tables, or one table), ``fit``,
        ``bootstrap``, ``compare`` with the keys of :data:`STUDY_KEYS`.
    source : path-like, optional
        The study file (named in messages); None for command-line flags.
    base : path-like, optional
        Folder relative paths are taken from (default: the study file's folder, or the
        current folder).
    text : str, optional
        The file's text (for line numbers in messages).
    flags : dict, optional
        Key -> command-line flag, for messages when ``source`` is None.

    Returns
    -------
    Study

    Raises
    ------
    InputError
        An unknown section or key, a value of the wrong type, a dataset without its
        required files, several datasets with the same name (file and line named).
    OptionError
        The same problems in command-line flags.
    """
    src = None if source is None else os.fspath(source)
    where = _Where(src, _key_lines(text) if text else None, flags)
    base_dir = Path(base) if base is not None else (Path(src).parent if src else Path.cwd())
    for sec in doc:
        if sec not in STUDY_KEYS:
            what = (
                f"unknown section [{sec}]"
                if isinstance(doc[sec], dict | list)
                else f"unknown key {sec!r} outside any section"
            )
            known = ", ".join("[[dataset]]" if s == "dataset" else f"[{s}]" for s in STUDY_KEYS)
            raise where.error(
                sec if isinstance(doc[sec], dict | list) else "",
                sec,
                f"{what} (known sections: {known})",
            )
    st = _section(where, "study", doc.get("study", {}), "study")
    raw = doc.get("dataset")
    if raw is None or raw == []:
        raise where.error(
            "",
            None,
            "the study has no dataset (add a [[dataset]] table with "
            "vcf, sample table and sites or fasta + gff)",
        )
    tables = raw if isinstance(raw, list) else [raw]
    datasets = [
        _dataset(where, f"dataset[{i}]", _section(where, f"dataset[{i}]", t, "dataset"), base_dir)
        for i, t in enumerate(tables)
    ]
    names = [d.name for d in datasets]
    dup = next((n for n in names if names.count(n) > 1), None)
    if dup is not None:
        k = len(names) - 1 - names[::-1].index(dup)
        raise where.error(
            f"dataset[{k}]",
            "name",
            f"two datasets are named {dup!r}; give each dataset its own name",
        )
    fit = _section(where, "fit", doc.get("fit", {}), "fit")
    boot = _section(where, "bootstrap", doc.get("bootstrap", {}), "bootstrap")
    comp = _section(where, "compare", doc.get("compare", {}), "compare")
    demes = demes_path(str(fit.get("demography", "")))
    if demes:  # a demes file is found relative to the study file, as the other paths are
        fit["demography"] = "demes:" + _resolve(base_dir, demes)
    if "dfe" in fit:
        fit["dfe"] = tuple(fit["dfe"])
        if not fit["dfe"]:
            raise where.error("fit", "dfe", f"{where.name('fit', 'dfe')} names no model")
    if "tests" in comp:
        comp["tests"] = tuple(comp["tests"])
    check_compare_settings(
        comp.get("tests", ()),
        comp.get("adjust", "holm"),
        comp.get("pairs"),
        where.source("compare"),
    )
    if "models" in boot and boot["models"] not in ("best", "all"):
        raise where.error(
            "bootstrap",
            "models",
            f"{where.name('bootstrap', 'models')} must be 'best' or 'all', not {boot['models']!r}",
        )
    check_bootstrap_settings(
        boot.get("replicates", 0), boot.get("level", DEFAULT_LEVEL), where.source("bootstrap")
    )
    default_name = Path(src).name.split(".")[0] if src else datasets[0].name
    out_dir = _resolve(base_dir, st["out_dir"]) if "out_dir" in st else None
    return Study(
        name=st.get("name", default_name),
        datasets=datasets,
        fit=FitSettings(**fit),
        bootstrap=BootstrapSettings(**boot),
        compare=CompareSettings(**comp),
        description=st.get("description", ""),
        out_dir=out_dir,
        source=None if src is None else os.path.abspath(src),
        text=text,
    )


def read_study(path: str | os.PathLike) -> Study:
    """Read a study file (TOML) and check its keys; see :data:`STUDY_KEYS`.

    Parameters
    ----------
    path : path-like

    Returns
    -------
    Study

    Raises
    ------
    InputError
        Not TOML, or any problem listed in :func:`study_from_dict`.
    """
    p = Path(path)
    doc, text = _load_toml(p)
    return study_from_dict(doc, p, text=text)


def restate_option_error(study: Study, index: int, err: DriftbandError) -> DriftbandError:
    """A stage's error that names a command-line flag, restated for the study-file key.

    The stages check their options once, in their API, and name flags (``--project``);
    for a study file the message names ``[dataset] key 'project'``, the file and the line.

    Parameters
    ----------
    study : Study
    index : int
        The dataset (0-based, in file order) the stage worked on.
    err : DriftbandError
        The stage's error.

    Returns
    -------
    DriftbandError
        ``err`` itself unless it is an :class:`OptionError` naming a flag and the study
        came from a file.
    """
    m = re.search(r"--([a-z][a-z-]*)", str(err))
    if study.source is None or not isinstance(err, OptionError) or m is None:
        return err
    key = m.group(1).replace("-", "_")
    section = f"dataset[{index}]"
    where = _Where(study.source, _key_lines(study.text) if study.text else None)
    text = str(err).replace(m.group(0), where.name(section, key), 1)
    return where.error(section, key, text)


def check_files(study: Study) -> None:
    """Check that every input file of the study exists, before any work.

    Raises
    ------
    InputError
        Naming the missing file, its key and dataset, and the study file and line.
    """
    lines = _key_lines(study.text) if study.text else {}
    for i, d in enumerate(study.datasets):
        for key in FILE_KEYS:
            p = getattr(d, key)
            if p is None:
                continue
            if not os.path.exists(p):
                if study.source is None:
                    raise InputError(f"file not found (--{key})", p)
                line = lines.get((f"dataset[{i}]", key))
                raise InputError(
                    f"dataset {d.name!r}: {key} file {p} not found", study.source, line
                )
            if os.path.isdir(p) and key != "vcf":  # a VCF Zarr store may be a folder
                where = (
                    f"--{key}"
                    if study.source is None
                    else f"dataset {d.name!r}, key {key!r} of {study.source}"
                )
                raise InputError(f"is a folder, not a file ({where})", p)
        anc = d.ancestral_fasta
        if anc is not None and not os.path.isfile(anc):
            if study.source is None:
                raise InputError("file not found (--ancestral fasta:FILE)", anc)
            raise InputError(
                f"dataset {d.name!r}: ancestral FASTA {anc} not found",
                study.source,
                lines.get((f"dataset[{i}]", "ancestral")),
            )
        for r in d.regions or []:
            if r.endswith((".bed", ".bed.gz")) and not os.path.exists(r):
                raise InputError(
                    f"dataset {d.name!r}: regions file {r} not found",
                    study.source or r,
                    lines.get((f"dataset[{i}]", "regions")),
                )
