"""Populations of a simulated study: sample sizes and piecewise-constant size histories.

Size histories are written in **generations before the sample** (backward time, as in
coalescent software): ``AGO:SIZE`` means that, going back from the sampled generation,
the population has ``SIZE`` diploid individuals from ``AGO`` generations ago until the next
older change. ``0:SIZE`` is the present size. The oldest epoch's size is the *ancestral*
size; the burn-in runs at that size before the oldest change. For example
``0:4000,200:1000`` is a four-fold expansion 200 generations before sampling, and
``0:1000,200:4000`` a four-fold decline.
"""

from __future__ import annotations

import re
from collections.abc import Iterable, Sequence
from dataclasses import dataclass

from ..exceptions import OptionError

__all__ = ["PopulationModel", "build_populations", "parse_history", "parse_population"]

_NAME = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_.\-]*$")


@dataclass(frozen=True)
class PopulationModel:
    """One simulated population.

    Attributes
    ----------
    name : str
    n : int
        Gene copies sampled at the end (2 per diploid individual).
    epochs : tuple of (int, int)
        ``(generations_ago, diploid_size)`` sorted by ``generations_ago``, the first at 0.
    theta : float or None
        Per-site θ = 4·N·μ at this population's ancestral size, overriding the study's
        shared mutation rate (None: use the study's μ).
    """

    name: str
    n: int
    epochs: tuple[tuple[int, int], ...]
    theta: float | None = None

    def __post_init__(self) -> None:
        if not _NAME.match(self.name):
            raise OptionError(
                f"--population: name {self.name!r} must start with a letter or "
                "digit and hold only letters, digits, '_', '.', '-'"
            )
        if not self.epochs or self.epochs[0][0] != 0:
            raise OptionError(
                f"population {self.name!r}: the size history needs a present "
                "size (an epoch at 0 generations ago, or N=)"
            )
        agos = [a for a, _ in self.epochs]
        if any(b <= a for a, b in zip(agos, agos[1:])):
            raise OptionError(
                f"population {self.name!r}: history times must be distinct and increasing"
            )
        for a, size in self.epochs:
            if a < 0 or size < 1:
                raise OptionError(
                    f"population {self.name!r}: history entry {a}:{size} "
                    "needs AGO >= 0 and SIZE >= 1"
                )
        if self.n < 2:
            raise OptionError(f"population {self.name!r}: n={self.n} must be >= 2 gene copies")
        smallest_recent = self.present_size
        if self.n > 2 * smallest_recent:
            raise OptionError(
                f"population {self.name!r}: cannot sample n={self.n} gene copies "
                f"from 2N={2 * smallest_recent}"
            )
        if self.theta is not None and not self.theta > 0:
            raise OptionError(f"population {self.name!r}: theta={self.theta} must be > 0")

    @property
    def present_size(self) -> int:
        """Diploid size of the sampled generation."""
        return self.epochs[0][1]

    @property
    def ancestral_size(self) -> int:
        """Diploid size of the oldest epoch (and of the burn-in)."""
        return self.epochs[-1][1]

    @property
    def history_generations(self) -> int:
        """Generations from the oldest size change to the sample (0 for a constant size)."""
        return self.epochs[-1][0]

    def size_at(self, ago: int) -> int:
        """Diploid size of the generation ``ago`` generations before the sample."""
        size = self.epochs[0][1]
        for a, s in self.epochs:
            if a <= ago:
                size = s
            else:
                break
        return size

    def describe(self) -> dict:
        """Plain-dict description (for provenance)."""
        return {
            "n": self.n,
            "present_size": self.present_size,
            "ancestral_size": self.ancestral_size,
            "history": [{"generations_ago": a, "size": s} for a, s in self.epochs],
            **({"theta": self.theta} if self.theta is not None else {}),
        }


def _int(v: str, what: str) -> int:
    try:
        f = float(v)
    except ValueError:
        raise OptionError(f"{what}: {v!r} is not a number") from None
    if f != int(f):
        raise OptionError(f"{what}: {v!r} must be a whole number")
    return int(f)


def parse_population(text: str) -> tuple[str, dict[str, float]]:
    """Parse ``NAME:N=2000,n=20[,theta=0.01]`` into the name and its keys.

    Examples
    --------
    >>> parse_population("lake:N=2000,n=20")
    ('lake', {'N': 2000, 'n': 20})
    """
    name, sep, rest = text.partition(":")
    name = name.strip()
    if not sep or not name:
        raise OptionError(f"--population expects NAME:N=SIZE,n=COPIES, got {text!r}")
    keys: dict[str, float] = {}
    for item in (x.strip() for x in rest.split(",") if x.strip()):
        k, eq, v = item.partition("=")
        k = k.strip()
        if not eq:
            raise OptionError(f"--population {name}: expected KEY=VALUE, got {item!r}")
        if k in keys:
            raise OptionError(f"--population {name}: {k} given twice")
        if k in ("N", "n"):
            keys[k] = _int(v, f"--population {name}: {k}")
        elif k == "theta":
            try:
                keys[k] = float(v)
            except ValueError:
                raise OptionError(f"--population {name}: theta={v!r} is not a number") from None
        else:
            raise OptionError(f"--population {name}: unknown key {k!r} (use N=, n=, theta=)")
    if "n" not in keys:
        raise OptionError(f"--population {name}: n= (sampled gene copies) is required")
    return name, keys


def parse_history(text: str) -> tuple[str | None, list[tuple[int, int]]]:
    """Parse ``[NAME=]AGO:SIZE,AGO:SIZE,...`` (generations before the sample : size).

    Examples
    --------
    >>> parse_history("spring=0:200,500:2000")
    ('spring', [(0, 200), (500, 2000)])
    """
    name = None
    body = text
    if "=" in text:
        name, body = (x.strip() for x in text.split("=", 1))
    epochs = []
    for item in (x.strip() for x in body.split(",") if x.strip()):
        a, sep, s = item.partition(":")
        if not sep:
            raise OptionError(f"--history: expected AGO:SIZE, got {item!r}")
        epochs.append((_int(a, "--history generations ago"), _int(s, "--history size")))
    if not epochs:
        raise OptionError(f"--history {text!r} holds no AGO:SIZE entries")
    epochs.sort()
    return name, epochs


def build_populations(
    populations: Sequence[str], histories: Iterable[str] = ()
) -> list[PopulationModel]:
    """Combine ``--population`` and ``--history`` texts into population models.

    A history without ``NAME=`` applies to every population that has no history of its
    own. Without a 0-generation epoch the population's ``N=`` is the present size; with
    one, ``N=`` may be left out (and must agree if given).
    """
    if not populations:
        raise OptionError("at least one --population NAME:N=SIZE,n=COPIES is required")
    parsed = [parse_population(t) for t in populations]
    names = [p[0] for p in parsed]
    dup = {x for x in names if names.count(x) > 1}
    if dup:
        raise OptionError(f"--population {sorted(dup)[0]!r} given twice")
    own: dict[str, list[tuple[int, int]]] = {}
    shared: list[tuple[int, int]] | None = None
    for t in histories:
        name, ep = parse_history(t)
        if name is None:
            if shared is not None:
                raise OptionError("--history without NAME= given twice")
            shared = ep
        else:
            if name not in names:
                raise OptionError(f"--history {name}=...: no --population named {name!r}")
            if name in own:
                raise OptionError(f"--history for {name!r} given twice")
            own[name] = ep
    out = []
    for name, keys in parsed:
        ep = list(own.get(name, shared or []))
        N = keys.get("N")
        if ep and ep[0][0] == 0:
            if N is not None and int(N) != ep[0][1]:
                raise OptionError(
                    f"population {name!r}: N={int(N)} disagrees with the "
                    f"history's present size {ep[0][1]}"
                )
        else:
            if N is None:
                raise OptionError(
                    f"--population {name}: N= (present diploid size) is "
                    "required unless its --history starts at 0"
                )
            ep.insert(0, (0, int(N)))
        out.append(PopulationModel(name, int(keys["n"]), tuple(ep), keys.get("theta")))
    return out
