"""``speciakin demo``: the whole job on the bundled, invented demo campaign."""

from __future__ import annotations

NAME = "demo"
HELP = "run the whole job on the bundled demo campaign (invented compound, invented data)"

EPILOG = """example:
  speciakin demo                        # writes reports/demo/
  speciakin demo --out /tmp/demo --steps 1000

The demo compound, reagent and every number are invented for illustration."""


def add_arguments(parser) -> None:
    from speciakin.cli.cmd_run import add_pipeline_options

    parser.epilog = EPILOG
    parser.add_argument("--out", metavar="DIR", default="reports/demo", help="output folder (default reports/demo)")
    add_pipeline_options(parser)


def run(args) -> int:
    import time
    from pathlib import Path

    from speciakin import pipeline
    from speciakin.cli._common import output_dir
    from speciakin.cli.cmd_run import execute
    from speciakin.demo import demo_dir

    t0 = time.perf_counter()
    folder = demo_dir()
    inputs = pipeline.resolve_inputs(folder, folder / "model.toml", folder / "process.toml")
    out = output_dir(Path(args.out))
    print(f"demo campaign (INVENTED data): {folder}")
    code = execute(inputs, out, args, invented=True)
    print(f"demo finished in {time.perf_counter() - t0:.0f} s")
    return code
