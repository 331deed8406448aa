"""The registration record ``prespec freeze`` writes into an annotated git tag, and reads back.

The tag is named ``prespec/<id>/v<N>``; its message holds a block of ``key: value``
lines between two marker lines, so a reviewer (or a script) can read it without prespec:

    prespec registration of fibre-butyrate

    --- prespec registration ---
    id: fibre-butyrate
    path: registry/fibre-butyrate.yaml
    commit: 0123abcd...
    start: 2027-03-01
    content-sha256: 9f2c...
    tool: prespec 0.1.0
    --- end ---

>>> fields = {"id": "a", "path": "a.yaml", "commit": "c" * 40, "start": "2027-01-04",
...           "content-sha256": "0" * 64, "tool": "prespec 0.1.0"}
>>> parse_block(format_message(fields)) == fields
True
>>> tag_name("fibre-butyrate", 2)
'prespec/fibre-butyrate/v2'
"""

from __future__ import annotations

import re

__all__ = ["TAG_PREFIX", "BLOCK_START", "BLOCK_END", "KEYS", "tag_name", "tag_version", "format_message",
           "parse_block", "InvalidRegistration"]

TAG_PREFIX = "prespec"
BLOCK_START = "--- prespec registration ---"
BLOCK_END = "--- end ---"
#: The keys of a registration block, in the order they are written.
KEYS = ("id", "path", "commit", "start", "content-sha256", "tool")
_VERSION_RE = re.compile(r"^prespec/([a-z0-9]+(?:-[a-z0-9]+)*)/v([1-9][0-9]*)$")


class InvalidRegistration(ValueError):
    """A registration tag whose message has no complete, well-formed block."""


def tag_name(spec_id: str, version: int) -> str:
    return f"{TAG_PREFIX}/{spec_id}/v{version}"


def tag_version(name: str, spec_id: str) -> int | None:
    """The N of ``prespec/<spec_id>/vN``, or ``None`` for any other tag name."""
    match = _VERSION_RE.match(name)
    return int(match.group(2)) if match and match.group(1) == spec_id else None


def format_message(fields: dict[str, str]) -> str:
    lines = [f"prespec registration of {fields['id']}", "", BLOCK_START]
    lines += [f"{key}: {fields[key]}" for key in KEYS]
    lines.append(BLOCK_END)
    return "\n".join(lines) + "\n"


def parse_block(message: str) -> dict[str, str]:
    """The fields of the block in a tag message; raise :class:`InvalidRegistration` if incomplete."""
    lines = [line.strip() for line in message.splitlines()]
    try:
        begin = lines.index(BLOCK_START)
        end = lines.index(BLOCK_END, begin)
    except ValueError:
        raise InvalidRegistration("the tag message has no prespec registration block") from None
    fields: dict[str, str] = {}
    for line in lines[begin + 1:end]:
        key, sep, value = line.partition(":")
        if sep and key.strip() in KEYS:
            fields[key.strip()] = value.strip()
    missing = [key for key in KEYS if not fields.get(key)]
    if missing:
        raise InvalidRegistration(f"the registration block lacks {', '.join(missing)}")
    return fields
