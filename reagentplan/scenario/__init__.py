"""The scenario package (being split out of one module, `checks`)."""

from .checks import *  # noqa: F401,F403
from .checks import _Collector, _did_you_mean, _read_table, _show  # noqa: F401
