"""Quality-assurance block of the report: versions, commit, document ID, people.

The document ID is a prefix of the SHA-256 digest (NIST FIPS 180-4) of the
report's content (every section, table and figure, without the creation
time), so two reports made from the same results carry the same ID and any
change of a number changes it.
"""

from __future__ import annotations

import hashlib
import json
import re
import subprocess
from importlib import metadata
from pathlib import Path
from typing import Any, Mapping

from speciakin.report.document import KeyValues, Paragraph, Section

__all__ = ["DEPENDENCIES", "QA_TITLE", "dependency_versions", "tool_commit", "document_id", "qa_section",
           "strip_absolute_paths", "DOCUMENT_ID_LENGTH"]

QA_TITLE = "Quality assurance"

#: Packages whose versions make the numbers (the report lists each).
DEPENDENCIES = ("numpy", "scipy", "lmfit", "emcee", "numba", "matplotlib", "speciakin")

#: Hex digits of the SHA-256 digest kept as the document ID.
DOCUMENT_ID_LENGTH = 16


def dependency_versions() -> list[tuple[str, str]]:
    """(package, installed version or "not installed") for :data:`DEPENDENCIES`."""
    out = []
    for name in DEPENDENCIES:
        try:
            version = metadata.version(name)
        except metadata.PackageNotFoundError:
            if name == "speciakin":
                from speciakin import __version__ as version
            else:
                version = "not installed"
        out.append((name, version))
    return out


def tool_commit(package: str | Path | None = None) -> str:
    """Commit of the speciakin checkout the code runs from (``git rev-parse HEAD``), else "unknown";
    "with uncommitted changes" when the package's own files (``src/speciakin``) differ from it (a
    report written into the checkout, such as ``reports/example``, is not a change of the code).

    ``package``: the package folder (default: the one imported).
    """
    if package is None:
        import speciakin

        package = Path(speciakin.__file__).parent
    here = Path(package).resolve()
    try:
        top = subprocess.run(["git", "rev-parse", "--show-toplevel"], cwd=here, capture_output=True, text=True,
                             timeout=10, check=False)
        if top.returncode != 0 or not (Path(top.stdout.strip()) / "src" / "speciakin").is_dir():
            return "unknown"
        head = subprocess.run(["git", "rev-parse", "HEAD"], cwd=here, capture_output=True, text=True,
                              timeout=10, check=False)
        dirty = subprocess.run(["git", "status", "--porcelain", "--untracked-files=no", "--", "."], cwd=here,
                               capture_output=True, text=True, timeout=10, check=False)
    except (OSError, subprocess.SubprocessError):
        return "unknown"
    commit = head.stdout.strip()
    if head.returncode != 0 or not re.fullmatch(r"[0-9a-f]{40}", commit):
        return "unknown"
    return commit + (" (with uncommitted changes)" if dirty.returncode == 0 and dirty.stdout.strip() else "")


def document_id(content: Mapping[str, Any]) -> str:
    """``SK-`` and the first :data:`DOCUMENT_ID_LENGTH` hex digits of the SHA-256 of ``content``
    (a JSON-ready dict; keys sorted)."""
    text = json.dumps(content, sort_keys=True, separators=(",", ":"), default=str)
    return "SK-" + hashlib.sha256(text.encode("utf-8")).hexdigest()[:DOCUMENT_ID_LENGTH].upper()


def qa_section(doc_id: str, author: str = "", reviewer: str = "", created: str = "") -> Section:
    """The "Quality assurance" section: document ID, people, versions and commit."""
    rows: list[tuple[str, Any]] = [
        ("Document ID", doc_id),
        ("Author", author or "not stated"),
        ("Reviewer", reviewer or "not stated"),
        ("Report date (UTC)", created or None),
        ("speciakin commit", tool_commit()),
    ]
    rows += [(f"{name} version", version) for name, version in dependency_versions()]
    return Section(QA_TITLE, [
        KeyValues(rows),
        Paragraph("The document ID is the first 16 hex digits of the SHA-256 digest (FIPS 180-4) of the "
                  "report's content (sections, tables, figures; the creation time left out): the same results "
                  "give the same ID. Author and reviewer come from the report options or the process file's "
                  "[report] table. Signatures: author ________________  reviewer ________________"),
    ], anchor="qa")


# an absolute POSIX path (at least two components) or a Windows drive path, as a token in text
_ABSOLUTE = re.compile(r"(?<![\w.~])(?:[A-Za-z]:[\\/]|/)(?:[^\s/\\'\",;()\[\]]+[\\/])+[^\s/\\'\",;()\[\]]*")


def strip_absolute_paths(text: str, base: str | Path | None = None) -> str:
    """``text`` with every absolute path made relative to ``base`` when under it, else cut to its last
    component (so no report shows the folders of the machine that made it)."""
    root = Path(base).resolve() if base is not None else None

    def one(match: re.Match) -> str:
        raw = match.group(0)
        path = Path(raw)
        if root is not None:
            try:
                rel = path.resolve().relative_to(root)
                return rel.as_posix() or "."
            except (ValueError, OSError):
                pass
        name = re.split(r"[\\/]", raw.rstrip("\\/"))[-1]
        return name or raw

    return _ABSOLUTE.sub(one, text)
