"""tomo: shallow seismic refraction interpretation (public API; see tomo.api)."""

from .core.errors import InputError, SolverError, TomoError
from .core.version import __version__

__all__ = ["__version__", "TomoError", "InputError", "SolverError"]
