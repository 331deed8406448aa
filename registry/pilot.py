"""Pilot and control data: read one CSV column, summarise its SD and an upper confidence limit.

The upper limit follows Browne (1995): with a pilot SD ``s`` from ``n`` values, the
one-sided ``confidence`` upper limit of the population SD is

    s_upper = s * sqrt((n - 1) / chi2_{1 - confidence, n - 1})

where ``chi2_{q, df}`` is the lower ``q`` quantile of the chi-square distribution with ``df``
degrees of freedom (so ``P(sigma <= s_upper) = confidence`` for normal data). Planning with
``s_upper`` instead of ``s`` protects the power against a pilot SD that came out low by chance.

Reference: Browne, R. H. (1995). On the use of a pilot sample for sample size determination.
*Statistics in Medicine* 14, 1933-1940.

This module reads files, so it lives outside :mod:`registry.power`, which is pure statistics.

Examples
--------
>>> summary = summarize([4.1, 5.3, 6.0, 4.8, 5.5, 6.2, 3.9, 5.1], confidence=0.8)
>>> summary.n, round(summary.sd, 4), round(summary.sd_upper, 4)
(8, 0.8236, 1.1146)
"""

from __future__ import annotations

import csv
import hashlib
import io
import math
import os
import re
import stat
import statistics
from dataclasses import dataclass
from pathlib import Path

from .hints import name_hint
from .problems import escaped

__all__ = ["PilotSummary", "InvalidPilot", "PilotMissing", "read_column", "summarize", "read_pilot",
           "sd_upper_limit", "file_sha256", "MISSING_MARKERS", "MAX_PILOT_BYTES", "pilot_root"]

#: Cells that mean "no value" and are skipped (counted in ``PilotSummary.missing``).
MISSING_MARKERS = frozenset({"", "na", "n/a", "nan", "."})
#: A pilot file is a table of measurements; larger files are refused.
MAX_PILOT_BYTES = 50_000_000


class InvalidPilot(ValueError):
    """Pilot data that cannot be used; the message names the file, line and column."""


class PilotMissing(InvalidPilot):
    """The pilot file does not exist (or cannot be opened)."""


@dataclass(frozen=True, repr=False)
class PilotSummary:
    """A pilot column's size, mean, SD, the SD's upper confidence limit and the file's SHA-256."""

    n: int
    mean: float
    sd: float
    sd_upper: float
    confidence: float
    missing: int = 0
    file: str | None = None
    column: str | None = None
    sha256: str | None = None

    def __repr__(self) -> str:
        return (f"PilotSummary(n={self.n}, sd={self.sd:.4g}, sd_upper={self.sd_upper:.4g}, "
                f"confidence={self.confidence:g})")

    def to_dict(self) -> dict[str, object]:
        return {"file": self.file, "column": self.column, "n": self.n, "missing": self.missing,
                "mean": self.mean, "sd": self.sd, "sd_upper": self.sd_upper, "confidence": self.confidence,
                "sha256": self.sha256}


def sd_upper_limit(sd: float, n: int, confidence: float = 0.8) -> float:
    """One-sided upper confidence limit of a normal SD from a sample SD of ``n`` values (Browne 1995).

    ``chdtri(df, p)`` is the chi-square quantile with upper-tail probability ``p``, so
    ``chdtri(n - 1, confidence)`` is the lower ``1 - confidence`` quantile.

    >>> round(sd_upper_limit(1.0, 10, 0.8), 4)
    1.2934
    """
    if n < 2:
        raise InvalidPilot(f"an SD needs at least 2 values; got {n}")
    if not 0 < confidence < 1:
        raise InvalidPilot(f"confidence must be in (0, 1); got {confidence!r}")
    from scipy.special import chdtri  # here, not at import: reading a file's hash needs no scipy

    return sd * math.sqrt((n - 1) / chdtri(n - 1, confidence))


def summarize(values: list[float], confidence: float = 0.8, **source: object) -> PilotSummary:
    """Size, mean, sample SD (n - 1 denominator) and the SD's upper limit of ``values``."""
    if len(values) < 2:
        raise InvalidPilot(f"an SD needs at least 2 values; got {len(values)}")
    try:
        sd = statistics.stdev(values)
        mean = statistics.fmean(values)
    except OverflowError:
        sd = mean = math.inf
    if not (math.isfinite(sd) and math.isfinite(mean)):
        raise InvalidPilot(f"{source.get('file') or '<pilot>'}: column {source.get('column')!r}: the values are too "
                           "large to summarise (their mean or SD overflows a floating-point number); check the units")
    return PilotSummary(n=len(values), mean=mean, sd=sd,
                        sd_upper=sd_upper_limit(sd, len(values), confidence), confidence=confidence,
                        **source)  # type: ignore[arg-type]


def file_sha256(path: str | Path) -> str:
    """SHA-256 of the file's bytes, as lowercase hex."""
    return hashlib.sha256(_read_bytes(Path(path), str(path))).hexdigest()


#: A header name shown in messages only when it looks like a column name (a header line may hold secrets).
_SAFE_NAME = re.compile(r"[A-Za-z0-9_][A-Za-z0-9_ .()%/+-]{0,39}")
#: Files already read in this process, by identity (device, inode, size, modification and change time).
_READ: dict[tuple[int, ...], tuple[bytes, str]] = {}
_READ_LIMIT = 64


def _confine(path: Path, root: Path, shown: str) -> Path:
    """``path`` with symbolic links and ``..`` resolved, refused unless it lies inside ``root``."""
    try:
        real = path.resolve(strict=True)
    except FileNotFoundError:
        raise PilotMissing(f"{shown}: pilot data file not found") from None
    except (OSError, RuntimeError) as exc:
        raise PilotMissing(f"{shown}: cannot be read: {getattr(exc, 'strerror', None) or exc}") from None
    try:
        real.relative_to(root.resolve())
    except ValueError:
        raise InvalidPilot(f"{shown}: lies outside the registry ({_display_root(root)}); a pilot file must be a file "
                           "inside the registry, so a spec cannot make prespec read other files") from None
    return real


def pilot_root(registry: Path) -> Path:
    """The folder a spec's pilot file must lie in: the git working tree holding the registry folder
    ``registry`` (the nearest folder at or above it with a ``.git``), else ``registry`` itself."""
    folder = registry.resolve()
    for candidate in (folder, *folder.parents):
        if (candidate / ".git").exists():
            return candidate
    return folder


def _display_root(root: Path) -> str:
    text = str(root)
    return text if text.isprintable() else "".join(ch if ch.isprintable() else escaped(ch) for ch in text)


def _read_bytes(path: Path, shown: str, root: Path | None = None) -> bytes:
    """The file's bytes: a regular file only (opened without blocking, so a FIFO cannot hang the run),
    inside ``root`` when given, each file read once per process while it is unchanged."""
    if root is not None:
        path = _confine(path, root, shown)
    flags = os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_NOCTTY", 0)
    try:
        fd = os.open(path, flags)
    except FileNotFoundError:
        raise PilotMissing(f"{shown}: pilot data file not found") from None
    except IsADirectoryError:
        raise InvalidPilot(f"{shown}: is a folder, not a CSV file") from None
    except OSError as exc:
        raise PilotMissing(f"{shown}: cannot be read: {exc.strerror or exc}") from None
    try:
        info = os.fstat(fd)
        if stat.S_ISDIR(info.st_mode):
            raise InvalidPilot(f"{shown}: is a folder, not a CSV file")
        if not stat.S_ISREG(info.st_mode):
            raise InvalidPilot(f"{shown}: is not a regular file (a FIFO, device or socket); a pilot file must be "
                               "a CSV file")
        if info.st_size > MAX_PILOT_BYTES:
            raise InvalidPilot(f"{shown}: larger than {MAX_PILOT_BYTES:,} bytes; a pilot file is a table of values")
        key = (info.st_dev, info.st_ino, info.st_size, info.st_mtime_ns, info.st_ctime_ns)
        if key in _READ:
            return _READ[key][0]
        os.set_blocking(fd, True)
        with os.fdopen(fd, "rb", closefd=False) as handle:
            raw = handle.read(MAX_PILOT_BYTES + 1)
    except OSError as exc:
        raise PilotMissing(f"{shown}: cannot be read: {exc.strerror or exc}") from None
    finally:
        os.close(fd)
    if len(raw) > MAX_PILOT_BYTES:
        raise InvalidPilot(f"{shown}: larger than {MAX_PILOT_BYTES:,} bytes; a pilot file is a table of values")
    if len(_READ) >= _READ_LIMIT:
        _READ.clear()
    _READ[key] = (raw, hashlib.sha256(raw).hexdigest())
    return raw


def _decode(raw: bytes, shown: str) -> str:
    try:
        return raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = raw[: exc.start].count(b"\n") + 1
        raise InvalidPilot(f"{shown}:{line}: not UTF-8 text (byte 0x{raw[exc.start]:02x}); "
                           "save the file as UTF-8 CSV") from None


class _Delimited(csv.excel):
    delimiter = ","


def _dialect(text: str) -> type[csv.Dialect]:
    """The delimiter (comma, semicolon or tab) that splits the first lines into the most equal rows of two
    or more fields; a comma when none does. Linear in the sample (a general sniffer can take seconds on
    a hostile file)."""
    lines = [line for line in text[:20_000].splitlines()[:50] if line.strip()]
    best, best_score = ",", 0
    for delimiter in ",;\t":
        try:
            widths = [len(row) for row in csv.reader(lines, delimiter=delimiter)]
        except csv.Error:
            continue
        if not widths or widths[0] < 2:
            continue
        score = sum(width == widths[0] for width in widths)
        if score > best_score:
            best, best_score = delimiter, score
    return type("_Sniffed", (_Delimited,), {"delimiter": best})


def read_column(text: str, column: str, shown: str = "<pilot>") -> tuple[list[float], int]:
    """The numbers in ``column`` of CSV ``text`` and how many cells were missing (blank, NA).

    The first row is the header. Raises :class:`InvalidPilot` naming file, line and column.
    """
    rows = csv.reader(io.StringIO(text, newline=""), _dialect(text))
    try:
        header = next(rows)
    except StopIteration:
        raise InvalidPilot(f"{shown}: the file is empty; expected a header row naming the columns") from None
    except csv.Error as exc:
        raise InvalidPilot(f"{shown}:1: not readable as CSV: {exc}") from None
    names = [name.strip() for name in header]
    if column not in names:
        safe = [name for name in names if _SAFE_NAME.fullmatch(name)]
        hidden = sum(1 for name in names if name) - len(safe)
        shown_names = ", ".join(repr(name) for name in safe) or "none"
        if hidden:
            shown_names += f" and {hidden} name{'s' if hidden != 1 else ''} not shown (not a plain column name)"
        hint = name_hint(column, safe)
        raise InvalidPilot(f"{shown}:1: no column {column!r}{hint + ' The' if hint else '; the'} header has "
                           f"{shown_names}")
    index = names.index(column)
    values: list[float] = []
    missing = 0
    try:
        for row in rows:
            line = rows.line_num
            if not any(cell.strip() for cell in row):
                continue  # blank line
            cell = row[index].strip() if index < len(row) else ""
            if cell.lower() in MISSING_MARKERS:
                missing += 1
                continue
            values.append(_number(cell, shown, line, column))
    except csv.Error as exc:
        raise InvalidPilot(f"{shown}:{rows.line_num}: not readable as CSV: {exc}") from None
    if len(values) < 2:
        raise InvalidPilot(f"{shown}: column {column!r} has {len(values)} numeric value"
                           f"{'s' if len(values) != 1 else ''}; an SD needs at least 2")
    return values, missing


def _number(cell: str, shown: str, line: int, column: str) -> float:
    try:
        value = float(cell)
    except ValueError:
        hint = ""
        if "," in cell and cell.replace(",", "", 1).replace("-", "", 1).isdigit():
            hint = "; write decimals with a point (3.5, not 3,5)"
        raise InvalidPilot(f"{shown}:{line}: column {column!r}: the cell ({len(cell)} characters, not shown) is "
                           f"not a number{hint} (blank cells and NA count as missing)") from None
    if not math.isfinite(value):
        raise InvalidPilot(f"{shown}:{line}: column {column!r}: {cell!r} is not a finite number")  # number-shaped
    return value


def read_pilot(path: str | Path, column: str, confidence: float = 0.8, shown: str | None = None,
               root: Path | None = None) -> PilotSummary:
    """Read ``column`` of the CSV file at ``path`` and summarise it, with the file's SHA-256.

    With ``root``, the file (symbolic links and ``..`` resolved) must lie inside that folder.
    """
    shown = shown or str(path)
    raw = _read_bytes(Path(path), shown, root)
    values, missing = read_column(_decode(raw, shown), column, shown)
    return summarize(values, confidence, missing=missing, file=shown, column=column,
                     sha256=hashlib.sha256(raw).hexdigest())
