"""The one safety check of a program, called at every door (see :mod:`.check`)."""

from .check import *  # noqa: F401,F403  (replaced by explicit names when the check is split)
from .check import IMPACT_LABELS, __all__  # noqa: F401
