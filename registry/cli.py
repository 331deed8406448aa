"""The ``prespec`` command line: ``main(argv) -> int`` so tests call it directly.

Start-up is kept short (``prespec check`` runs in pre-commit hooks): the command modules import
the statistics, git, YAML and output machinery inside the functions that use them, and only the
command being run gets its options built, so ``--help`` and ``--version`` load none of it.
"""

from __future__ import annotations

import argparse
import contextlib
import gc
import os
import sys
import traceback
import warnings
from collections.abc import Iterator, Sequence
from types import ModuleType

from . import __version__
from .commands import check, demo, hash, history, new, pilot, register, render, schema, size, verify
from .discovery import UsageError
from .problems import plain_text

__all__ = ["main", "COMMANDS"]

#: Each command module has ``HELP``, ``add_arguments(parser)`` and ``run(args) -> int``.
COMMANDS: tuple[ModuleType, ...] = (check, size, new, pilot, render, history, register, verify, hash, demo, schema)


class _Parser(argparse.ArgumentParser):
    def error(self, message: str) -> None:  # type: ignore[override]
        unknown = message.partition("unrecognized arguments: ")[2].split()
        if any(arg.startswith("-") and arg.endswith((".yaml", ".yml")) for arg in unknown):
            message += ("; a file name starting with '-' is read as an option: put '--' before the file names "
                        "(prespec check -- -name.yaml) or write ./-name.yaml")
        error = UsageError(message)
        error.prog = self.prog  # type: ignore[attr-defined]  # "prespec size": said once, in front
        raise error


def _command_in(argv: Sequence[str]) -> str | None:
    """The command ``argv`` names: its first word that is not an option (the top level has no
    option taking a value)."""
    return next((arg for arg in argv if not arg.startswith("-")), None)


def build_parser(argv: Sequence[str] | None = None) -> argparse.ArgumentParser:
    """The parser; given ``argv``, only the command it names gets its options (the rest, their help line)."""
    parser = _Parser(
        prog="prespec",
        description="Keep planned experiments as YAML specs in git: validate them, recompute their sample "
        "size, catch design changes after data collection starts, and write checkable summaries.",
    )
    parser.add_argument("--version", action="version", version=f"prespec {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    for module in COMMANDS:
        name = module.__name__.rsplit(".", 1)[-1]
        command = sub.add_parser(name, help=module.HELP, description=module.HELP)
        if argv is None or name == _command_in(argv):
            module.add_arguments(command)
        command.set_defaults(run=module.run)
    return parser


@contextlib.contextmanager
def _fewer_collections() -> Iterator[None]:
    """Run the garbage collector less often while a command runs, as it was before afterwards.

    A check builds large structures that live to the end (every version of every spec, the reports)
    and makes little cyclic garbage: with the default thresholds the collector walks them again and
    again, 12-15% of a cold check of 1,000 specs x 10 versions, for no memory saved (175 MB either
    way; ``benchmarks/bench_check.py``)."""
    before = gc.get_threshold()
    gc.set_threshold(50_000, 20, 100)
    try:
        yield
    finally:
        gc.set_threshold(*before)


def main(argv: list[str] | None = None) -> int:
    """Run prespec; return the exit status (0 ok, 1 findings, 2 usage error)."""
    argv = sys.argv[1:] if argv is None else list(argv)
    parser = build_parser(argv)
    try:
        args = parser.parse_args(argv)
        if not getattr(args, "command", None):
            parser.print_help(sys.stderr)
            return 2
        with warnings.catch_warnings(), _fewer_collections():
            # numerical edge cases become findings and messages of their own; numpy's and scipy's notes
            # about them (divide by zero, overflow) are not for the terminal, nor are they seen by workers
            warnings.simplefilter("ignore", RuntimeWarning)
            return int(args.run(args))
    except UsageError as error:
        print(plain_text(f"{getattr(error, 'prog', 'prespec')}: error: {error}"), file=sys.stderr)
        return 2
    except SystemExit as exit_:  # --help and --version
        return int(exit_.code or 0) if isinstance(exit_.code, int) or exit_.code is None else 2
    except KeyboardInterrupt:
        print("prespec: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:
        return 0
    except Exception as error:  # noqa: BLE001 - last line of defence: no traceback for users
        if os.environ.get("PRESPEC_DEBUG"):
            traceback.print_exc()
        print(f"prespec: internal error: {type(error).__name__}: {plain_text(error)}\n"
              "This is a bug in prespec; set PRESPEC_DEBUG=1 for details and please report it.", file=sys.stderr)
        return 3


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
