"""Former name of :mod:`speciakin.pipeline`, kept so that older scripts still import."""

from speciakin.pipeline import *  # noqa: F401,F403
from speciakin.pipeline import __all__  # noqa: F401
