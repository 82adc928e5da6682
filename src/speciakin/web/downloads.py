"""Downloads of a result's files (report HTML, PDF, XLSX, figures, JSON) from the page.

A download is asked for as ``/download?campaign=NAME&result=ID&file=NAME``;
nothing in it is used as a path directly.  The campaign is resolved inside
the root (:func:`speciakin.web.paths.inside_root`), the result must be a
folder directly inside the campaign's ``results/``, and the file, resolved
with symbolic links followed, must lie inside that result folder and not be
hidden (the lock, the probe files).  Anything else is refused with 403,
a file that does not exist gets 404.  Files are sent as attachments, never
shown in the page's own origin.
"""

from __future__ import annotations

import re
from pathlib import Path, PurePosixPath
from urllib.parse import urlencode

from speciakin.errors import InputError, Location
from speciakin.web.paths import RESULTS_FOLDER, inside_root

__all__ = ["ROUTE", "download_url", "download_path", "result_files", "register_route", "REPORT_FIRST"]

ROUTE = "/download"
_RESULT_NAME = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_.-]{0,80}$")
#: Files listed first (what a chemist downloads most), the rest follow by name.
REPORT_FIRST = ("report.html", "report.pdf", "report.xlsx", "fit.json", "window.json", "posterior.json",
                "suggest.json")


def _refuse(what: str, value: str, expected: str) -> InputError:
    return InputError(f"download refused: {what}", Location(key="download"), value, expected)


def result_folder(root: Path, campaign: str | None, result: str | None) -> Path:
    """The result folder ``<campaign>/results/<result>`` inside the root (resolved).

    Raises
    ------
    InputError
        The campaign leaves the root, or the result is not a folder directly inside its ``results/``.
    """
    folder = inside_root(root, campaign)
    name = "" if result is None else str(result)
    if not _RESULT_NAME.match(name):
        raise _refuse("not a result of this campaign", name, "a result listed on the page")
    results = (folder / RESULTS_FOLDER).resolve()
    target = (results / name).resolve()
    if target.parent != results or not target.is_dir():
        raise _refuse("not a result of this campaign", name, "a result listed on the page")
    return target


def download_path(root: Path, campaign: str | None, result: str | None, name: str | None) -> Path:
    """The file ``name`` of a result, refused unless it lies inside that result folder.

    Raises
    ------
    InputError
        A path that is absolute, climbs out (``..``), names a hidden file or
        resolves (through a link) outside the result folder.
    FileNotFoundError
        Inside the folder but no such file.
    """
    folder = result_folder(root, campaign, result)
    text = "" if name is None else str(name)
    parts = PurePosixPath(text).parts
    if (not text or "\x00" in text or "\\" in text or text.startswith("/") or not parts
            or any(p in ("..", ".") or p.startswith(".") for p in parts)):
        raise _refuse("not a file of this result", text, "a file listed on the page")
    target = (folder / Path(*parts)).resolve()
    if folder not in target.parents:
        raise _refuse("not a file of this result", text, "a file listed on the page")
    if not target.is_file():
        raise FileNotFoundError(text)
    return target


def result_files(folder: Path) -> list[str]:
    """Every downloadable file of a result folder (names relative to it): the report first, then by name."""
    folder = Path(folder)
    names = sorted(p.relative_to(folder).as_posix() for p in folder.rglob("*")
                   if p.is_file() and not any(part.startswith(".") for part in p.relative_to(folder).parts))
    first = [n for n in REPORT_FIRST if n in names]
    return first + [n for n in names if n not in first]


def download_url(campaign: str, result: str, name: str) -> str:
    """The address of one file of a result, as the page links it."""
    return ROUTE + "?" + urlencode({"campaign": campaign, "result": result, "file": name})


def register_route(server, root: Path) -> None:
    """Serve :data:`ROUTE` on the page's Flask server (the token and loopback guards apply to it too)."""
    from flask import abort, request, send_file

    @server.route(ROUTE)
    def download():
        args = request.args
        try:
            path = download_path(root, args.get("campaign"), args.get("result"), args.get("file"))
        except InputError:
            abort(403)
        except FileNotFoundError:
            abort(404)
        response = send_file(path, as_attachment=True, download_name=path.name)
        response.headers["X-Content-Type-Options"] = "nosniff"
        return response
