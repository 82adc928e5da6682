"""Helpers shared by the sub-command modules (argument parsing, output files)."""

from __future__ import annotations

import os
from pathlib import Path

from speciakin._io import atomic_write_bytes, atomic_write_text  # noqa: F401  (re-exported)
from speciakin.errors import InputError, Location


def output_dir(path: str | os.PathLike) -> Path:
    """Create (if needed) and return an output folder."""
    p = Path(path)
    try:
        p.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise InputError(f"cannot create output folder: {exc.strerror}", Location(file=str(p))) from None
    return p


def new_file(path: str | os.PathLike) -> Path:
    """``path`` for a file the command is about to write; an existing file is refused (nothing is
    overwritten)."""
    p = Path(path)
    if p.exists():
        raise InputError("the file already exists; nothing is overwritten", Location(file=str(p)),
                         expected="a file name not used yet (or move the old file away first)")
    return p


def _taken(p: Path) -> bool:
    """True when ``p`` cannot serve as a new output folder: a file, or a folder holding files."""
    return p.exists() and (not p.is_dir() or any(p.iterdir()))


def refuse_filled_dir(path: str | os.PathLike, expected: str = "a new or empty folder for --out") -> Path:
    """``path`` when it is a new or an empty folder; a file, or a folder holding files, is refused
    (nothing is overwritten; ``expected`` says what to give instead)."""
    p = Path(path)
    if p.exists() and not p.is_dir():
        raise InputError("the output path is a file", Location(file=str(p)), expected="a new or empty folder")
    if _taken(p):
        raise InputError("the output folder is not empty; nothing is overwritten", Location(file=str(p)),
                         expected=expected)
    return p


def new_or_empty_dir(path: str | os.PathLike) -> Path:
    """Create (if needed) and return an output folder that holds no file yet (:func:`refuse_filled_dir`)."""
    return output_dir(refuse_filled_dir(path))


def next_free_dir(path: str | os.PathLike) -> Path:
    """``path`` when it is new or empty, else the first of ``path-2``, ``path-3``, ... that is (a default
    output folder of a command run again: the earlier files stay)."""
    base = Path(path)
    candidate, k = base, 1
    while _taken(candidate):
        k += 1
        candidate = base.with_name(f"{base.name}-{k}")
    return output_dir(candidate)


def existing_file(path: str | os.PathLike, what: str) -> Path:
    p = Path(path)
    if not p.exists():
        raise InputError(f"{what} not found", Location(file=str(p)), expected="an existing file")
    return p


def add_campaign_arguments(parser, *, process: bool = False, out_default: str | None = None) -> None:
    """The campaign / model / process / output options shared by the pipeline commands."""
    parser.add_argument("campaign", help="campaign folder (from 'speciakin new') or workbook (.xlsx)")
    parser.add_argument("--model", metavar="MODEL.toml",
                        help="reaction model file (default: model.toml in the campaign folder)")
    if process:
        parser.add_argument("--process", metavar="PROCESS.toml",
                            help="planned process and specifications (default: process.toml in the campaign folder)")
    parser.add_argument("--out", metavar="DIR", default=out_default,
                        help="output folder" + (f" (default: {out_default})" if out_default else ""))


def default_out(args, name: str) -> Path:
    """``--out`` or ``<campaign folder>/results``."""
    if args.out:
        return output_dir(args.out)
    c = Path(args.campaign)
    folder = c if c.is_dir() else c.parent
    return output_dir(folder / "results")


class StageProgress:
    """A tqdm bar per stage for ``progress(stage, done, total)`` callbacks (stderr)."""

    def __init__(self, enabled: bool = True) -> None:
        self.enabled = enabled
        self.bars: dict = {}

    def __call__(self, stage: str, done: int, total: int) -> None:
        if not self.enabled:
            return
        from tqdm import tqdm

        bar = self.bars.get(stage)
        if bar is None:
            labels = {"starts": "fit (starting points)", "profiles": "profile likelihood",
                      "sample": "posterior (stored steps)", "window": "pH window (batches)"}
            bar = self.bars[stage] = tqdm(total=total, desc=labels.get(stage, stage), unit="step", leave=True)
        bar.total = total
        if done >= bar.n:
            bar.update(done - bar.n)  # through update(), so tqdm's rate and time left follow the work
        else:
            bar.n = done
            bar.refresh()
        if done >= total:
            bar.close()

    def close(self) -> None:
        for bar in self.bars.values():
            bar.close()


def add_sampler_options(parser) -> None:
    """The posterior sampler's options, one wording for ``sample``, ``run`` and ``demo``:
    ``--steps``, ``--walkers``, ``--seed``, ``--jobs``, ``--scheduler``."""
    parser.add_argument("--steps", type=int, default=None,
                        help="fixed posterior steps per walker (default: until converged, at most 5000)")
    parser.add_argument("--walkers", type=int, default=None, help="walkers (default max(32, 4 x parameters))")
    parser.add_argument("--seed", type=int, default=1, help="random seed (default 1)")
    parser.add_argument("--jobs", type=int, default=1,
                        help="local worker processes for the posterior's likelihood")
    parser.add_argument("--scheduler", metavar="ADDRESS", help="address of an existing Dask distributed scheduler")


# ------------------------------------------------------------------ result folders (docs/workflow.md)
def add_source_argument(parser, what: str = "fit") -> None:
    """``--from RESULT``: the earlier result folder a step builds on."""
    parser.add_argument("--from", dest="source", metavar="RESULT", default=None,
                        help=f"earlier result folder (path, or an id from 'speciakin history') holding the {what} "
                             "(default: the newest complete one under <campaign>/results/)")


def earlier_result(args, inputs, having: str) -> Path | None:
    """The result folder a step builds on: ``--from``; else an explicit ``--out`` that already holds
    the file of ``having`` (steps chained in one folder); else the newest complete folder with it; else None."""
    from speciakin.pipeline import outputs
    from speciakin.pipeline.record import find_result

    if getattr(args, "source", None):
        return find_result(inputs.campaign, args.source, having=having)
    if getattr(args, "out", None) and outputs.result_path(args.out, having).is_file():
        return Path(args.out)
    try:
        return find_result(inputs.campaign, having=having)
    except InputError:
        return None


def recording(args, inputs, step: str, *, writes=(), resume=None, built_on=None, carry=(), seeds=None):
    """The :class:`~speciakin.pipeline.record.Recording` of a command: ``--out`` or a new result folder."""
    from speciakin.pipeline.record import Recording

    return Recording(inputs, step=step, out=getattr(args, "out", None), resume=resume, built_on=built_on,
                     carry=carry, writes=writes, seeds=seeds)


def print_notes(rec) -> None:
    """Say where the results are and anything the recording could not do."""
    import sys

    for note in rec.notes:
        print(f"speciakin: note: {note}", file=sys.stderr)
    print(f"result folder: {rec.folder} ({rec.status})")
