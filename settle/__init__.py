"""settle: greenfield ground movements and damage assessment for pipejacked and microtunnelled drives.

Results are planning estimates: they support, and do not replace, the judgement of a qualified engineer and local
codes.
"""
from .errors import InputError

__version__ = "0.1.0"

__all__ = ["InputError", "__version__"]
