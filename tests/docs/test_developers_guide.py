"""The contributor guide's pictures name code that exists.

DEVELOPERS.md draws the layers (a folder listing) and the data flow (dotted
names of functions and classes).  A name that no longer resolves, or a
module or package of ``src/speciakin`` missing from the layer listing, fails
here, so the pictures follow the code.
"""

from __future__ import annotations

import importlib
import re
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
GUIDE = (ROOT / "DEVELOPERS.md").read_text(encoding="utf-8")
LAYERS = ("chemistry", "simulation", "data", "estimation", "decision", "pipeline", "report", "web", "cli")
#: File names in the data-flow picture that look like dotted names (report.html, ...).
FILE_SUFFIXES = {"html", "pdf", "xlsx", "json", "h5", "toml", "sqlite", "csv"}


def text_blocks() -> list[str]:
    return re.findall(r"```text\n(.*?)```", GUIDE, flags=re.S)


def layer_listing() -> str:
    return next(b for b in text_blocks() if b.startswith("src/speciakin/"))


def data_flow() -> str:
    return next(b for b in text_blocks() if "-->" in b)


def resolve(dotted: str):
    """The object a dotted name (below ``speciakin``) stands for; a trailing ``_`` (from
    ``save_*``) must be the prefix of at least one attribute."""
    parts = dotted.split(".")
    for i in range(len(parts), 0, -1):
        try:
            obj = importlib.import_module("speciakin." + ".".join(parts[:i]))
        except ModuleNotFoundError:
            continue
        for j, name in enumerate(parts[i:]):
            if name.endswith("_") and j == len(parts[i:]) - 1:
                assert any(a.startswith(name) for a in dir(obj)), f"nothing named {name}* in {obj.__name__}"
                return obj
            obj = getattr(obj, name)
        return obj
    raise ModuleNotFoundError(dotted)


def flow_names() -> list[str]:
    pattern = r"\b(?:%s)(?:\.\w+)+" % "|".join(LAYERS)
    return [n for n in dict.fromkeys(re.findall(pattern, data_flow())) if n.rsplit(".", 1)[1] not in FILE_SUFFIXES]


def test_the_data_flow_names_resolve():
    names = flow_names()
    assert "pipeline.fit.fit_campaign" in names and len(names) > 15
    missing = []
    for name in names:
        try:
            resolve(name)
        except (ImportError, AttributeError) as exc:
            missing.append(f"{name}: {exc}")
    assert not missing, "\n".join(missing)


def test_a_wrong_name_is_found():
    try:
        resolve("pipeline.fit.no_such_function")
    except AttributeError:
        return
    raise AssertionError("an unknown name resolved")


def test_the_layer_listing_names_every_package_and_top_level_module():
    listing = layer_listing()
    src = ROOT / "src" / "speciakin"
    entries = [p.name + "/" for p in src.iterdir() if p.is_dir() and (p / "__init__.py").is_file()]
    entries += [p.name for p in src.glob("*.py") if p.name != "__init__.py"]
    missing = [e for e in entries if not re.search(rf"^\s+{re.escape(e)}\s", listing, flags=re.M)]
    assert not missing, f"not in the layer listing of DEVELOPERS.md: {missing}"
    # the packages stand in the order of the layers (each imports only those above it)
    order = [listing.index(f"  {layer}/") for layer in LAYERS]
    assert order == sorted(order)
