"""The campaign root: every path the page reads or writes is resolved inside it.

Nothing the browser sends is used as a path directly: a campaign or result
folder arrives as a name relative to the root, is resolved (symbolic links
followed) and refused unless it stays inside the root.  Uploaded file names
are reduced to a safe base name.
"""

from __future__ import annotations

import re
import time
from pathlib import Path

from speciakin._io import atomic_write_bytes
from speciakin.errors import InputError, Location

__all__ = ["inside_root", "campaign_folders", "result_folders", "safe_upload_name", "store_workbook",
           "campaign_inputs", "MAX_UPLOAD_BYTES", "RESULTS_FOLDER", "PREVIOUS_WORKBOOKS"]

#: Largest workbook accepted by the upload [bytes] (a campaign workbook is well under 1 MB).
MAX_UPLOAD_BYTES = 20 * 1024 * 1024
#: Folder inside a campaign that holds one sub-folder per job.
RESULTS_FOLDER = "results"
#: Folder inside a campaign that keeps the workbooks an upload replaced.
PREVIOUS_WORKBOOKS = "previous-workbooks"
_SAFE_NAME = re.compile(r"[^A-Za-z0-9._-]+")


def inside_root(root: Path, relative: str | None) -> Path:
    """``root / relative`` resolved, refused when it leaves ``root``.

    Parameters
    ----------
    root
        The campaign root (resolved).
    relative
        A name as the browser sent it.

    Raises
    ------
    InputError
        Empty, absolute, or resolving outside the root.
    """
    text = "" if relative is None else str(relative)
    if not text.strip() or "\x00" in text:
        raise InputError("no folder chosen", Location(key="folder"), text, "a folder inside the campaign root")
    if Path(text).is_absolute():
        raise InputError("the page accepts only folders inside the campaign root", Location(key="folder"),
                         text, f"a name relative to {root}")
    base = Path(root).resolve()
    target = (base / text).resolve()
    if target != base and base not in target.parents:
        raise InputError("the page accepts only folders inside the campaign root", Location(key="folder"),
                         text, f"a name relative to {root}")
    return target


def campaign_folders(root: Path) -> list[str]:
    """Names (relative to ``root``) of the folders that look like campaigns
    (a model file or a workbook inside), sorted; the root itself is ``"."``."""
    base = Path(root).resolve()
    found = []
    for folder in [base, *sorted(p for p in base.iterdir() if p.is_dir() and not p.name.startswith("."))]:
        if (folder / "model.toml").is_file() or any(folder.glob("*.xlsx")):
            if base == folder.resolve() or base in folder.resolve().parents:
                found.append("." if folder == base else folder.name)
    return found


def campaign_inputs(campaign: Path) -> list[Path]:
    """The input files of a campaign folder: workbooks, CSV files (also in ``csv/``), model and process files."""
    campaign = Path(campaign)
    files = list(campaign.glob("*.xlsx")) + list(campaign.glob("*.toml")) + list(campaign.glob("*.csv"))
    if (campaign / "csv").is_dir():
        files += list((campaign / "csv").glob("*.csv"))
    return files


def result_folders(campaign: Path) -> list[str]:
    """Result folders of a campaign that hold a ``fit.json``, newest first (names in ``results/``).

    Placeholder until the results index of the pipeline exists: this lists
    the folders the page's own jobs write.
    """
    folder = campaign / RESULTS_FOLDER
    if not folder.is_dir():
        return []
    names = [p.name for p in folder.iterdir() if p.is_dir() and (p / "fit.json").is_file()]
    return sorted(names, reverse=True)


def safe_upload_name(name: str | None) -> str:
    """A safe base name for an uploaded workbook: letters, digits, ``._-`` only, ending in ``.xlsx``.

    Raises
    ------
    InputError
        No usable name, or not an ``.xlsx`` file.
    """
    base = re.split(r"[\\/]", str(name or ""))[-1]
    clean = _SAFE_NAME.sub("_", base).lstrip("._")[:80]
    if not clean.lower().endswith(".xlsx") or len(clean) <= len(".xlsx"):
        raise InputError("only .xlsx workbooks can be uploaded", Location(file=base), base,
                         "a workbook saved as .xlsx")
    return clean


def store_workbook(campaign: Path, name: str | None, data: bytes) -> Path:
    """Write an uploaded workbook into ``campaign``; returns its path.

    The folder keeps one workbook (the importer wants exactly one): an older
    one is moved to ``previous-workbooks/<stamp>-<name>`` first, never deleted.

    Raises
    ------
    InputError
        Too large, or a bad name.
    """
    if len(data) > MAX_UPLOAD_BYTES:
        raise InputError("the workbook is too large", Location(file=str(name)), f"{len(data)} bytes",
                         f"at most {MAX_UPLOAD_BYTES // (1024 * 1024)} MB")
    clean = safe_upload_name(name)
    stamp = time.strftime("%Y%m%d-%H%M%S", time.gmtime())
    for old in sorted(campaign.glob("*.xlsx")):
        keep = campaign / PREVIOUS_WORKBOOKS
        keep.mkdir(exist_ok=True)
        target = keep / f"{stamp}-{old.name}"
        copy = 1
        while target.exists():  # two uploads within one second: never replace a kept workbook
            copy += 1
            target = keep / f"{stamp}-{copy}-{old.name}"
        old.rename(target)
    return atomic_write_bytes(campaign / clean, data)
