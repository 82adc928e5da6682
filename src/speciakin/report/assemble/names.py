"""Compound labels instead of model short names in legends and tables."""

from __future__ import annotations

from typing import Any, Mapping

from speciakin.decision.specs import AREA_LABEL, area_molecule

__all__ = ["relabel", "label_of"]


def label_of(names: Mapping[str, str] | None, key: Any) -> Any:
    """The compound label of ``key`` (``key`` itself when unknown or not text); an HPLC area% outcome
    column (``AREA_PREFIX`` + molecule) is its molecule's label and ", HPLC area%"."""
    if not isinstance(key, str):
        return key
    if area_molecule(key):
        return f"{label_of(names, area_molecule(key))}{AREA_LABEL}"
    return names.get(key, key) if names else key


def relabel(mapping: Mapping[str, Any] | None, names: Mapping[str, str] | None) -> Any:
    """``mapping`` with its keys replaced by compound labels (None stays None)."""
    if mapping is None:
        return None
    return {label_of(names, k): v for k, v in mapping.items()}
