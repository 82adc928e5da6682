"""``speciakin demo``: the whole job on the bundled, invented demo campaign.

Nothing is overwritten (docs/workflow.md, "Result folders"): without
``--out`` every call writes a new folder ``reports/demo/<UTC time>-<id>/``;
``--out DIR`` writes into DIR only when DIR is new or empty (else exit
code 2, before any work).  Either folder carries the lock while it is
written and ``status.json`` after.
"""

from __future__ import annotations

NAME = "demo"
HELP = "run the whole job on the bundled demo campaign (invented compound, invented data)"

#: Where the demo's result folders go when --out is not given (relative to the working folder).
DEMO_ROOT = "reports/demo"

EPILOG = f"""example:
  speciakin demo                        # writes a new folder {DEMO_ROOT}/<UTC time>-<id>/ at every call
  speciakin demo --out /tmp/demo --steps 1000    # a new or empty folder (refused when it holds files)
  speciakin demo --resume               # continue the newest interrupted demo in place

The demo compound, reagent and every number are invented for illustration."""


def add_arguments(parser) -> None:
    from speciakin.cli.cmd_run import add_pipeline_options

    parser.epilog = EPILOG
    parser.add_argument("--out", metavar="DIR", default=None,
                        help=f"a new or empty output folder (default: a new folder under {DEMO_ROOT}/)")
    add_pipeline_options(parser)


def demo_folder(out, resume: bool):
    """The folder the demo writes: a new one under :data:`DEMO_ROOT`, an empty ``out``, or the folder to resume.

    Raises
    ------
    InputError
        ``out`` holds files (nothing is overwritten), cannot be written, or
        there is no interrupted demo to resume (exit code 2).
    """
    from pathlib import Path

    from speciakin.cli._common import refuse_filled_dir
    from speciakin.errors import InputError, Location
    from speciakin.pipeline import folders

    if resume:
        if out is not None:
            return Path(out)
        found = folders.latest_result(DEMO_ROOT, ("interrupted", "failed"), having="posterior")
        if found is None:
            raise InputError("no interrupted demo to resume", Location(file=DEMO_ROOT),
                             expected="a demo folder left interrupted (or name it with --out)")
        return found
    if out is None:
        return folders.new_result_folder(DEMO_ROOT)
    folder = refuse_filled_dir(out, expected=f"a new or empty folder for --out, or leave out --out (every call "
                                            f"then writes a new folder under {DEMO_ROOT}/)")
    folders.check_writable(folder)
    return folder


def run(args) -> int:
    import time

    from speciakin import pipeline
    from speciakin.cli.cmd_run import _Reported, execute
    from speciakin.demo import demo_dir
    from speciakin.pipeline import folders, outputs

    t0 = time.perf_counter()
    folder = demo_dir()
    inputs = pipeline.resolve_inputs(folder, folder / "model.toml", folder / "process.toml")
    out = demo_folder(args.out, args.resume)
    print(f"demo campaign (INVENTED data): {folder}")
    print(f"result folder: {out}")
    try:
        with folders.ResultWriter(out, outputs.command_line(out), "demo", resume=args.resume):
            code = execute(inputs, out, args, invented=True, raise_errors=True)
    except _Reported as reported:
        code = reported.code
    print(f"demo finished in {time.perf_counter() - t0:.0f} s; results in {out}")
    return code
