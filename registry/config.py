"""Registry-wide settings from an optional ``.prespec.yaml`` at the registry root."""

from __future__ import annotations

import re
from functools import lru_cache
from pathlib import Path
from typing import Callable

from pydantic import BaseModel, ConfigDict, Field, PrivateAttr, ValidationError, field_validator

from .discovery import SpecFile
from .problems import InvalidSpec
from .yamlio import load_file

__all__ = ["RegistryConfig", "TimestampSettings", "CONFIG_NAME", "load_config", "find_config", "config_loader",
           "trust_paths", "glob_matches"]

CONFIG_NAME = ".prespec.yaml"


class TimestampSettings(BaseModel):
    """Independent time-stamping authorities (RFC 3161) ``register`` asks, and the CA certificates
    ``verify`` trusts for them."""

    model_config = ConfigDict(extra="forbid", strict=True)

    authorities: list[str] = Field(
        default_factory=list,
        description="Addresses (http:// or https://) of RFC 3161 time-stamping authorities that register asks "
        "for a token.",
    )
    trust: list[str] = Field(
        default_factory=list,
        description="PEM files of the authorities' CA certificates, relative to this file's folder and inside it; "
        "verify checks tokens against them unless a reviewer passes --trust.",
    )
    timeout: float = Field(default=20.0, gt=0, le=300, description="Seconds to wait for an authority's answer.")


class RegistryConfig(BaseModel):
    """Settings a lab may set once for its whole registry."""

    model_config = ConfigDict(extra="forbid", strict=True, allow_inf_nan=False)

    oversize_margin: float = Field(
        default=0.25,
        ge=0,
        le=10,
        description="Flag a design as oversized when the planned enrolment exceeds the required one by more "
        "than this fraction (0.25 = 25%).",
    )
    locked_fields: list[str] = Field(
        default_factory=list,
        description="Extra dotted field paths to treat as locked, beyond those the spec model locks.",
    )
    require_history: bool = Field(
        default=False,
        description="Make a spec outside any git repository whose start has passed an error (no-history), "
        "not a warning.",
    )
    timestamp: TimestampSettings = Field(default_factory=TimestampSettings,
                                         description="RFC 3161 time-stamping authorities and trust anchors.")
    include: list[str] = Field(
        default_factory=list,
        description="Glob patterns, relative to the folder of .prespec.yaml, of the YAML files that are specs "
        "(e.g. specs/**/*.yaml); empty: every *.yaml and *.yml file. A pattern without '/' matches a file "
        "name in any folder; '**' matches any number of folders.",
    )
    exclude: list[str] = Field(
        default_factory=list,
        description="Glob patterns of YAML files that are not specs (e.g. environment.yaml, ci/**); they "
        "are not read. A spec file named on the command line is always read.",
    )
    _folder: Path | None = PrivateAttr(default=None)

    @field_validator("include", "exclude")
    @classmethod
    def _patterns(cls, patterns: list[str]) -> list[str]:
        for pattern in patterns:
            if not pattern.strip() or pattern.startswith("/") or ".." in Path(pattern).parts:
                raise ValueError(f"must be glob patterns relative to the registry folder; got {pattern!r}")
        return patterns

    def selects(self, path: Path) -> bool:
        """Whether a YAML file found in a registry folder is to be read as a spec."""
        if self._folder is None or not (self.include or self.exclude):
            return True
        try:
            relative = path.absolute().relative_to(self._folder.absolute()).as_posix()
        except ValueError:
            return True
        if self.include and not any(glob_matches(p, relative) for p in self.include):
            return False
        return not any(glob_matches(p, relative) for p in self.exclude)


@lru_cache(maxsize=256)
def _glob_regex(pattern: str) -> re.Pattern[str]:
    if "/" not in pattern.rstrip("/"):
        pattern = "**/" + pattern
    if pattern.endswith("/"):
        pattern += "**"
    out, i = [], 0
    while i < len(pattern):
        if pattern.startswith("**/", i):
            out.append("(?:[^/]*/)*")
            i += 3
        elif pattern.startswith("**", i):
            out.append(".*")
            i += 2
        elif pattern[i] == "*":
            out.append("[^/]*")
            i += 1
        elif pattern[i] == "?":
            out.append("[^/]")
            i += 1
        else:
            out.append(re.escape(pattern[i]))
            i += 1
    return re.compile("".join(out) + r"\Z")


def glob_matches(pattern: str, relative: str) -> bool:
    """Whether a '/'-separated relative path matches a registry glob pattern.

    >>> glob_matches("environment.yaml", "env/environment.yaml"), glob_matches("specs/**/*.yaml", "specs/a.yaml")
    (True, True)
    >>> glob_matches("specs/*.yaml", "specs/old/a.yaml"), glob_matches("ci/", "ci/jobs/build.yml")
    (False, True)
    """
    return _glob_regex(pattern).match(relative) is not None


def find_config(start: Path) -> Path | None:
    """The nearest ``.prespec.yaml`` at or above ``start``, not crossing a repository root."""
    folder = start if start.is_dir() else start.parent
    for candidate in (folder, *folder.resolve().parents):
        path = candidate / CONFIG_NAME
        if path.is_file():
            return path
        if (candidate / ".git").exists():
            return None
    return None


def trust_paths(config_path: Path | None, config: RegistryConfig) -> list[Path]:
    """The trust files a config names, resolved against its folder; :class:`InvalidSpec` for one
    outside that folder (a reviewer's prespec reads only inside the registry)."""
    if config_path is None:
        return []
    folder = config_path.parent.resolve()
    out = []
    for index, name in enumerate(config.timestamp.trust):
        path = (folder / name).resolve()
        try:
            path.relative_to(folder)
        except ValueError:
            from .problems import Problem

            raise InvalidSpec(str(config_path), [Problem(
                f"timestamp.trust[{index}]", f"{name!r} lies outside the registry folder {folder}; name a PEM file "
                "inside it (or pass --trust FILE)", None, None)], []) from None
        out.append(path)
    return out


def load_config(path: Path | None) -> RegistryConfig:
    """Load and validate a registry config; raise :class:`InvalidSpec` naming its problems."""
    if path is None:
        return RegistryConfig()
    doc = load_file(path)
    try:
        config = RegistryConfig.model_validate(doc.data)
        config._folder = path.parent
        return config
    except ValidationError as exc:
        from .validation import _problems

        raise InvalidSpec(str(path), _problems(exc, RegistryConfig, doc.data, doc), doc.source_lines) from None


def config_loader(errors: list[str], oversize_margin: float | None = None) -> Callable[[SpecFile], RegistryConfig]:
    """``config_for(spec_file)``: the settings of the registry a spec belongs to, each config file
    read once; a broken config adds its problems to ``errors`` and the defaults apply.
    ``oversize_margin`` (a command-line value) overrides every registry's own."""
    cache: dict[Path | None, RegistryConfig] = {}
    by_root: dict[Path, RegistryConfig] = {}

    def config_for(spec_file: SpecFile) -> RegistryConfig:
        if spec_file.root in by_root:  # every file of a registry shares its root: one search per registry
            return by_root[spec_file.root]
        where = find_config(spec_file.root)
        if where not in cache:
            try:
                config = load_config(where)
            except InvalidSpec as error:
                errors.append(str(error))
                config = RegistryConfig()
            if oversize_margin is not None:
                config = config.model_copy(update={"oversize_margin": oversize_margin})
            cache[where] = config
        by_root[spec_file.root] = cache[where]
        return cache[where]

    return config_for
