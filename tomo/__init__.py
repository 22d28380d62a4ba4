"""tomo: shallow seismic refraction interpretation.

Picks and terrain in; pick QC, layered (intercept-time and delay-time) interpretation,
eikonal travel-time tomography, figures, a report and exports out. SI units inside
(m, s, m/s); milliseconds only in files and on screen.

The public functions, by stage:

- survey files: :func:`read_picks`, :func:`write_picks`, :func:`read_terrain`
- mesh: :func:`mesh_for_picks`, :func:`build_mesh`, :func:`read_mesh_spec`
- synthetic models: :func:`read_model`, :func:`synthetic_times`
- forward modelling: :func:`travel_times`, :func:`solve_field`
- pick QC and layered methods: :func:`check_line`, :func:`interpret_line`,
  :func:`starting_model`
- tomography: :func:`invert`, :func:`run_inversion`, :class:`InversionSettings`
- run files: :func:`read_run`, :func:`write_run`

Figures live in :mod:`tomo.figures` (imported on demand: they need matplotlib).
"""

__version__ = "0.1.0"

from .errors import InputError, SolverError, TomoError  # noqa: E402
from .survey import Picks, Terrain, read_picks, read_terrain, write_picks  # noqa: E402
from .mesh import Mesh, MeshSpec, build_mesh, mesh_for_picks, read_mesh_spec  # noqa: E402
from .model import Model, read_model  # noqa: E402
from .forward import solve_field, travel_times  # noqa: E402
from .synth import synthetic_times  # noqa: E402
from .qc import check_line  # noqa: E402
from .layered import LayeredResult, interpret_line, starting_model  # noqa: E402
from .inversion import InversionSettings, invert, run_inversion  # noqa: E402
from .runfile import RunData, read_run, write_run  # noqa: E402

__all__ = [
    "__version__", "TomoError", "InputError", "SolverError",
    "Picks", "Terrain", "read_picks", "read_terrain", "write_picks",
    "Mesh", "MeshSpec", "build_mesh", "mesh_for_picks", "read_mesh_spec",
    "Model", "read_model", "solve_field", "travel_times", "synthetic_times",
    "check_line", "LayeredResult", "interpret_line", "starting_model",
    "InversionSettings", "invert", "run_inversion",
    "RunData", "read_run", "write_run",
]
