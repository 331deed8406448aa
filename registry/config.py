"""Registry-wide settings from an optional ``.prespec.yaml`` at the registry root."""

from __future__ import annotations

from pathlib import Path

from pydantic import BaseModel, ConfigDict, Field, ValidationError

from .problems import InvalidSpec
from .yamlio import load_file

__all__ = ["RegistryConfig", "CONFIG_NAME", "load_config", "find_config"]

CONFIG_NAME = ".prespec.yaml"


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


def load_config(path: Path | None) -> RegistryConfig:
    """Load and validate a registry config; raise :class:`InvalidSpec` naming its problems."""
    if path is None:
        return RegistryConfig()
    doc = load_file(path)
    try:
        return RegistryConfig.model_validate(doc.data)
    except ValidationError as exc:
        from .validation import _problems

        raise InvalidSpec(str(path), _problems(exc, RegistryConfig, doc.data, doc), doc.source_lines) from None
