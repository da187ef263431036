"""Where an option came from, so that a message names what the user actually wrote.

The same settings reach the stages from command-line flags (``--relative-mutation-rate``)
or from a study file's keys (``[compare] relative_mutation_rate`` in ``study.toml``); the
checks live once, in the stage's API, and report through an :class:`OptionSource`.
"""

from __future__ import annotations

import os
from collections.abc import Mapping
from dataclasses import dataclass, field

from .exceptions import DriftbandError, InputError, OptionError

__all__ = ["COMMAND_LINE", "OptionSource"]


@dataclass(frozen=True)
class OptionSource:
    """The command line (``section`` None) or a section of a study file.

    Attributes
    ----------
    section : str or None
        The study-file section (e.g. ``compare``), or None for command-line flags.
    path : str or None
        The study file.
    lines : mapping of (section, key) to int
        Line numbers of the keys in the study file (for messages).
    """

    section: str | None = None
    path: str | os.PathLike | None = None
    lines: Mapping[tuple[str, str | None], int] = field(
        default_factory=dict, repr=False, compare=False
    )

    def name(self, key: str) -> str:
        """How the user wrote option ``key``: ``--relative-mutation-rate`` or
        ``[compare] key 'relative_mutation_rate'``.

        Examples
        --------
        >>> OptionSource().name("relative_mutation_rate")
        '--relative-mutation-rate'
        >>> OptionSource("compare", "s.toml").name("pairs")
        "[compare] key 'pairs'"
        """
        if self.section is None:
            return "--" + key.replace("_", "-")
        return f"[{self.section}] key {key!r}"

    def error(self, key: str, message: str) -> DriftbandError:
        """The error to raise for a bad value of ``key``: OptionError for a flag,
        InputError naming the study file for a key."""
        text = f"{self.name(key)} {message}"
        if self.section is None:
            return OptionError(text)
        line = self.lines.get((self.section, key)) or self.lines.get((self.section, None))
        return InputError(text, self.path, line)


#: Options given as command-line flags.
COMMAND_LINE = OptionSource()
