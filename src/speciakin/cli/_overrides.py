"""``--fix``, ``--free``, ``--start``, ``--bounds`` and ``--save-overrides`` of ``fit`` and ``run``
(:mod:`speciakin.chemistry.modelfile.overrides` on the command line)."""

from __future__ import annotations

#: File in the output folder that holds the model with the overrides of a full ``run``.
OVERRIDDEN_MODEL = "model-with-overrides.toml"


def add_override_options(parser) -> None:
    """The parameter options shared by ``fit`` and ``run``."""
    g = parser.add_argument_group("parameters (without editing the model file; recorded in fit.json)")
    g.add_argument("--fix", action="append", default=[], metavar="NAME",
                   help="keep a parameter at its value, e.g. --fix 'pKa[S.N_aryl]' (repeatable)")
    g.add_argument("--free", action="append", default=[], metavar="NAME",
                   help="fit a parameter the model file keeps fixed (repeatable)")
    g.add_argument("--start", action="append", default=[], metavar="NAME=VALUE",
                   help="starting value as the model file writes it, e.g. 'pKa[S.N_aryl]=4.7' or "
                        "'log10k[acyl]=2 L/(mol*min)'")
    g.add_argument("--bounds", action="append", default=[], metavar="NAME=LOW:HIGH",
                   help="bounds on the model file's scale (pKa: shift; rate constant: log10 k)")
    g.add_argument("--save-overrides", nargs="?", const="", default=None, metavar="FILE",
                   help="write the changes into the model file (or into FILE, a new file), keeping its "
                        "comments, then go on")


def overrides_of(args) -> list:
    """The overrides the options ask for (empty when none)."""
    from speciakin.chemistry.modelfile.overrides import parse_overrides

    return parse_overrides(args.fix, args.free, args.start, args.bounds)


def apply_overrides(inputs, args, out=None):
    """Check the overrides against the model file, write them back when
    ``--save-overrides`` asks; return ``(inputs, overrides)``.

    With ``out`` (a full ``run``) and overrides not written back, the model
    with the overrides goes to ``out/model-with-overrides.toml`` and the
    returned inputs point at it.
    """
    from pathlib import Path

    from speciakin.chemistry.modelfile.overrides import load_model_with_overrides, write_overrides
    from speciakin.cli._common import new_file

    overrides = overrides_of(args)
    if not overrides:
        return inputs, overrides
    load_model_with_overrides(inputs.model, overrides)  # unknown names and bad values stop here
    if args.save_overrides is not None:
        if args.save_overrides and Path(args.save_overrides).resolve() != Path(inputs.model).resolve():
            new_file(args.save_overrides)  # another file than the model: never over an existing one
        written = write_overrides(inputs.model, overrides, args.save_overrides or None)
        print(f"model file with the changes written: {written}")
        return type(inputs)(inputs.campaign, written, inputs.process), []
    if out is not None:
        note = (f"Model file {inputs.model.name} with the parameter overrides of this run:\n"
                + "\n".join(str(o.to_dict()) for o in overrides))
        derived = write_overrides(inputs.model, overrides, out / OVERRIDDEN_MODEL, note=note)
        inputs = type(inputs)(inputs.campaign, derived, inputs.process)
    return inputs, overrides


def model_hook(inputs, overrides):
    """``model -> model`` that applies ``overrides`` (for the quick mode), or None."""
    if not overrides:
        return None
    from speciakin.chemistry.modelfile.overrides import load_model_with_overrides

    return lambda model: load_model_with_overrides(inputs.model, overrides)
