"""Posterior length options: by default the sampler runs until converged; --steps fixes the length."""

import pytest

from speciakin.cli.main import build_parser


@pytest.mark.parametrize("command", ["sample", "run", "demo"])
def test_steps_default_to_until_converged(command):
    argv = [command] if command == "demo" else [command, "campaign-folder"]
    args = build_parser().parse_args(argv)
    assert args.steps is None  # None = until converged (docs/sampling.md, "Stopping when converged")
    fixed = build_parser().parse_args(argv + ["--steps", "300"])
    assert fixed.steps == 300


def test_too_few_fixed_steps_is_a_clear_error(capsys):
    from speciakin.cli.main import main

    assert main(["sample", "campaign-folder", "--steps", "5"]) == 2
    assert "--steps" in capsys.readouterr().err
