"""Former name of :mod:`speciakin.pipeline.steps`, kept so that older scripts still import."""

from speciakin.pipeline.steps import *  # noqa: F401,F403
from speciakin.pipeline.steps import __all__  # noqa: F401
