"""tomo: shallow seismic refraction interpretation.

Picks and terrain in; pick QC, layered (intercept-time and delay-time) interpretation,
eikonal travel-time tomography, figures, a report and exports out. SI units inside
(m, s, m/s); milliseconds only in files and on screen.
"""

__version__ = "0.1.0"

from .errors import InputError, SolverError, TomoError  # noqa: E402
from .survey import Picks, Terrain, read_picks, read_terrain, write_picks  # noqa: E402
from .mesh import Mesh, MeshSpec, build_mesh, mesh_for_picks, read_mesh_spec  # noqa: E402

__all__ = [
    "__version__", "TomoError", "InputError", "SolverError",
    "Picks", "Terrain", "read_picks", "read_terrain", "write_picks",
    "Mesh", "MeshSpec", "build_mesh", "mesh_for_picks", "read_mesh_spec",
]
