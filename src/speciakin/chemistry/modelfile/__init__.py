"""The reaction model file (TOML): an input format read into :class:`speciakin.chemistry.model.Model`.

The format is described for chemists in ``docs/model-file.md``; the commented
skeleton ``chemistry/templates/model_skeleton.toml`` shows every table.  Public API:

``load_model(path)``       read a file (opened read-only) -> Model
``parse_model(text)``      parse TOML text -> Model
``validate_model(model)``  semantic checks -> list of Problem
``model_summary(model)``   readable reaction scheme (string)
``dump_model(model)``      Model -> TOML text; ``parse_model(dump_model(m)) == m``
``FILE_KEYS``              the allowed keys of every table

Modules (one concern each; docs/model-file.md lists them): ``parse`` (entry
points, molecules and steps), ``runs``, ``phlog``, ``quantity``, ``units``,
``keys``, ``reader``, ``paths``, ``validate``, ``plausibility``, ``dump``,
``summary``, ``overrides`` (parameter overrides, imported on its own).
"""

from speciakin.chemistry.modelfile.dump import dump_model
from speciakin.chemistry.modelfile.keys import FILE_KEYS
from speciakin.chemistry.modelfile.parse import load_model, parse_model
from speciakin.chemistry.modelfile.summary import model_summary
from speciakin.chemistry.modelfile.validate import validate_model

__all__ = ["load_model", "parse_model", "validate_model", "model_summary", "dump_model", "FILE_KEYS"]
