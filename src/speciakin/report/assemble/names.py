"""Compound labels instead of model short names in legends and tables."""

from __future__ import annotations

from typing import Any, Mapping

__all__ = ["relabel", "label_of"]


def label_of(names: Mapping[str, str] | None, key: Any) -> Any:
    """The compound label of ``key`` (``key`` itself when unknown or not text)."""
    if not names or not isinstance(key, str):
        return key
    return names.get(key, key)


def relabel(mapping: Mapping[str, Any] | None, names: Mapping[str, str] | None) -> Any:
    """``mapping`` with its keys replaced by compound labels (None stays None)."""
    if mapping is None:
        return None
    return {label_of(names, k): v for k, v in mapping.items()}
