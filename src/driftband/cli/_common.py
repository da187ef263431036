"""Argument helpers shared by the subcommands."""

from __future__ import annotations

import argparse
import logging
import textwrap
from collections.abc import Callable
from typing import Any, TypeVar, overload

__all__ = [
    "LIST_RULE",
    "CommaList",
    "Subparsers",
    "add_common_arguments",
    "add_subcommand",
    "parse_kv",
    "progress_on_stderr",
]

#: How every list option is written (the README's "Writing lists" says the same).
LIST_RULE = "one comma-separated list"

#: What ``ArgumentParser.add_subparsers()`` returns (an action class that argparse keeps
#: private), handed to each subcommand's ``add_parser``.
Subparsers = Any

_T = TypeVar("_T")


def add_subcommand(
    subparsers: Subparsers, name: str, help: str, description: str, examples: str
) -> argparse.ArgumentParser:
    """Register a subcommand with a description and an Examples epilog."""
    p = subparsers.add_parser(
        name,
        help=help,
        description=description,
        epilog="examples:\n" + textwrap.indent(textwrap.dedent(examples).strip(), "  "),
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    p.set_defaults(subcommand=name)
    return p


class CommaList(argparse.Action):
    """A list option: one comma-separated value, stored as a list of its items.

    Every list option of the command line is written this way (``--dfe gamma,lognormal``,
    ``--regions chr1,chr2:1-5000``, ``--project 20,spring=16``). Giving the option twice,
    or an empty item, is refused with a message that shows the form.
    """

    def __call__(
        self,
        parser: argparse.ArgumentParser,
        namespace: argparse.Namespace,
        values: Any,
        option_string: str | None = None,
    ) -> None:
        given: set[str] = getattr(namespace, "_lists_given", set())
        if self.dest in given:
            raise argparse.ArgumentError(
                self, f"give it once, as {LIST_RULE} (e.g. {self.metavar or 'A,B'})"
            )
        items = [v.strip() for v in str(values).split(",")]
        if not all(items):
            raise argparse.ArgumentError(
                self, f"{values!r} has an empty item; write {LIST_RULE} without spaces or ',,'"
            )
        given.add(self.dest)
        namespace._lists_given = given
        setattr(namespace, self.dest, items)


def add_common_arguments(p: argparse.ArgumentParser, output: bool = True) -> None:
    """``-v/--verbose``, ``-q/--quiet`` and, for writers, ``--force``."""
    g = p.add_argument_group("general")
    g.add_argument(
        "-v",
        "--verbose",
        action="count",
        default=0,
        help="more messages on stderr (-vv: debugging, with tracebacks)",
    )
    g.add_argument("-q", "--quiet", action="count", default=0, help="only errors on stderr")
    if output:
        g.add_argument("--force", action="store_true", help="overwrite existing outputs")


@overload
def parse_kv(items: list[str] | None, option: str) -> dict[str, str]: ...
@overload
def parse_kv(
    items: list[str] | None, option: str, convert: Callable[[str], _T]
) -> dict[str, _T]: ...
def parse_kv(
    items: list[str] | None, option: str, convert: Callable[[str], Any] = str
) -> dict[str, Any]:
    """Parse the ``KEY=VALUE`` items of a list option into a dict (errors name the option)."""
    from ..exceptions import OptionError

    out: dict[str, Any] = {}
    for it in items or []:
        if "=" not in it:
            raise OptionError(f"{option} expects KEY=VALUE, got {it!r}")
        k, v = it.split("=", 1)
        try:
            out[k] = convert(v)
        except ValueError:
            raise OptionError(f"{option} {it!r}: {v!r} is not a valid value") from None
    return out


def progress_on_stderr(args: argparse.Namespace) -> None:
    """Stage progress (INFO) on stderr unless -q; the CLI default shows warnings only."""
    lg = logging.getLogger("driftband")
    if args.quiet == 0 and lg.level > logging.INFO:
        lg.setLevel(logging.INFO)
