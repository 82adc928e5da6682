"""The bundled demo campaign (INVENTED data), shipped inside the package.

The folder holds ``campaign.xlsx`` (six invented lab runs), ``model.toml``,
``process.toml``, ``README.md`` (scenario, true parameters, seed, noise
model) and ``truth.json``.  It is written by ``scripts/make_demo_campaign.py``
from known true parameters; every compound, name and number is invented.

Examples
--------
>>> from speciakin.demo import demo_dir
>>> (demo_dir() / "model.toml").is_file()
True
"""

from __future__ import annotations

from pathlib import Path

from speciakin.errors import InputError, Location

__all__ = ["DEMO_FILES", "demo_dir", "demo_file"]

#: Files of the demo folder, by role.
DEMO_FILES = {
    "campaign": "campaign.xlsx",
    "model": "model.toml",
    "process": "process.toml",
    "readme": "README.md",
    "truth": "truth.json",
}


def demo_dir() -> Path:
    """Folder of the bundled demo campaign (inside the installed package).

    Returns
    -------
    pathlib.Path
        ``<package>/demo_data``.

    Raises
    ------
    InputError
        When the folder or its workbook is missing (a broken installation;
        ``python scripts/make_demo_campaign.py`` regenerates it in a checkout).
    """
    folder = Path(__file__).resolve().parent / "demo_data"
    if not (folder / DEMO_FILES["campaign"]).is_file():
        raise InputError("the bundled demo campaign is missing", Location(file=str(folder)),
                         expected="a demo_data folder with campaign.xlsx (run scripts/make_demo_campaign.py)")
    return folder


def demo_file(role: str) -> Path:
    """Path of one demo file by role (a key of :data:`DEMO_FILES`).

    Raises
    ------
    InputError
        For an unknown role (the message lists the known ones) or a missing file.
    """
    if role not in DEMO_FILES:
        raise InputError("unknown demo file", Location(key="role"), role, "one of: " + ", ".join(DEMO_FILES))
    path = demo_dir() / DEMO_FILES[role]
    if not path.is_file():
        raise InputError("demo file is missing", Location(file=str(path)), expected="the file written by "
                         "scripts/make_demo_campaign.py")
    return path
