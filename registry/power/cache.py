"""The simulation-verified size cache: the on-disk machinery lives in :mod:`registry.diskcache`."""

from __future__ import annotations

from ..diskcache import SizeCache, cache_key, default_cache_dir

__all__ = ["SizeCache", "cache_key", "default_cache_dir"]
