"""The registration record ``prespec register`` writes into an annotated git tag, and reads back.

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

followed, when an independent time-stamping authority was asked, by one section per
authority holding its RFC 3161 reply in base64 (``git push --tags`` carries it with the tag):

    --- rfc3161 timestamp ---
    authority: https://tsa.example/
    MIIH...
    --- end timestamp ---

>>> fields = {"id": "a", "path": "a.yaml", "commit": "c" * 40, "start": "2027-01-04",
...           "content-sha256": "0" * 64, "tool": "prespec 0.1.0"}
>>> parse_block(format_message(fields)) == fields
True
>>> parse_tokens(format_message(fields, [("https://tsa.example/", b"reply")]))
[('https://tsa.example/', b'reply')]
>>> tag_name("fibre-butyrate", 2)
'prespec/fibre-butyrate/v2'
"""

from __future__ import annotations

import base64
import binascii
import re
import textwrap
from collections.abc import Sequence

__all__ = ["TAG_PREFIX", "BLOCK_START", "BLOCK_END", "KEYS", "tag_name", "tag_version", "format_message",
           "parse_block", "parse_tokens", "InvalidRegistration", "TOKEN_START", "TOKEN_END"]

TAG_PREFIX = "prespec"
BLOCK_START = "--- prespec registration ---"
BLOCK_END = "--- end ---"
TOKEN_START = "--- rfc3161 timestamp ---"
TOKEN_END = "--- end timestamp ---"
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


def format_message(fields: dict[str, str], tokens: Sequence[tuple[str, bytes]] = ()) -> str:
    """The tag message: the block, then one section per (authority, RFC 3161 reply) in ``tokens``."""
    lines = [f"prespec registration of {fields['id']}", "", BLOCK_START]
    lines += [f"{key}: {fields[key]}" for key in KEYS]
    lines.append(BLOCK_END)
    for authority, reply in tokens:
        lines += ["", TOKEN_START, f"authority: {authority}"]
        lines += textwrap.wrap(base64.b64encode(reply).decode("ascii"), 76)
        lines.append(TOKEN_END)
    return "\n".join(lines) + "\n"


def parse_tokens(message: str) -> list[tuple[str, bytes]]:
    """(authority, reply bytes) of every timestamp section; a section whose base64 is damaged gives
    ``b""`` so that the check reports it rather than skipping it."""
    out: list[tuple[str, bytes]] = []
    lines = [line.strip() for line in message.splitlines()]
    index = 0
    while TOKEN_START in lines[index:]:
        begin = lines.index(TOKEN_START, index)
        end = lines.index(TOKEN_END, begin) if TOKEN_END in lines[begin:] else len(lines)
        body = lines[begin + 1:end]
        authority = body[0].partition(":")[2].strip() if body and body[0].startswith("authority:") else ""
        text = "".join(body[1:] if authority else body)
        try:
            reply = base64.b64decode(text, validate=True)
        except (binascii.Error, ValueError):
            reply = b""
        out.append((authority, reply))
        index = end + 1
    return out


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
