"""``prespec schema``: write the JSON Schema and the docs' field table from the spec model."""

from __future__ import annotations

import argparse
from pathlib import Path

from ..discovery import UsageError
from ..fsutil import WriteRefused, write_atomic

__all__ = ["schema", "HELP", "add_arguments", "run"]

HELP = "write the spec JSON Schema (and refresh the docs' field table) from the spec model"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    from ..schema import DOCS_FILE, SCHEMA_FILE

    parser.add_argument("--out", default=str(SCHEMA_FILE), metavar="FILE",
                        help=f"where to write the schema (default: {SCHEMA_FILE}); '-' prints it")
    parser.add_argument("--docs", default=None, metavar="FILE",
                        help=f"also refresh the generated field table in this Markdown file (e.g. {DOCS_FILE})")


def run(args: argparse.Namespace) -> int:
    return schema(args.out, docs=args.docs)


def schema(out: str, *, docs: str | None = None) -> int:
    from ..schema import docs_text, schema_text

    text = schema_text()
    if out == "-":
        print(text, end="")
    else:
        try:
            path = write_atomic(Path(out), text)
        except WriteRefused as error:
            raise UsageError(str(error)) from None
        print(f"wrote {path}")
    if docs:
        docs_path = Path(docs)
        if not docs_path.is_file():
            raise UsageError(f"{docs}: no such file")
        try:
            refreshed = docs_text(docs_path.read_text(encoding="utf-8"))
        except ValueError as error:
            raise UsageError(str(error)) from None
        write_atomic(docs_path, refreshed)
        print(f"refreshed the field table in {docs_path}")
    return 0
