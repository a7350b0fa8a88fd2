"""wallscreen: stability screening of a register of existing gravity retaining walls.

A screening aid, not a design tool: results must be reviewed by a qualified
engineer; local codes and the asset owner's standards govern.
"""

from screening.config import Config, load_config
from screening.pipeline import RESULT_COLUMNS, Screening, evaluate, screen

__version__ = "0.1.0"

__all__ = ["RESULT_COLUMNS", "Config", "Screening", "__version__", "evaluate", "load_config", "screen"]
