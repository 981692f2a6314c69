"""User-facing errors, as the engine's modules import them.

The class lives in :mod:`querylang.errors` because the query language reports its own
mistakes and never imports ``engine/``; the engine raises the same class for files and options.
"""
from __future__ import annotations

from querylang.errors import EXIT_USER_ERROR, StrataError

__all__ = ["EXIT_USER_ERROR", "StrataError"]
