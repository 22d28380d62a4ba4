"""The public Python API: whole steps of the workflow, from files or arrays to results.

A session in a notebook::

    import tomo

    survey = tomo.read_survey("picks.csv", terrain="terrain.csv")
    layers = tomo.interpret_layers(survey)          # intercept-time and delay-time layers
    run = tomo.invert(survey, layers=layers)        # tomography from those layers
    bedrock = run.surface(2100.0)                   # the 2100 m/s surface, depth in m
    print(run.chi2, bedrock.depth_m)

The command line calls only these functions (``tomo/cli``), so both use one set of
defaults, each defined once: the model cell (half the station spacing,
:func:`tomo.survey.meshspec.inversion_mesh_spec`), the pick sigma where a pick file has
none (:data:`DEFAULT_SIGMA_MS`, for the QC, the layers and the inversion alike), the
smoothing of the layered start
(:data:`START_SMOOTHING_CELLS`). Progress goes to a callback or, without one, to the
``logging`` logger ``"tomo"``; nothing here prints. Figures and reports import
matplotlib when they are asked for, not before.
"""

from __future__ import annotations

from .design import *  # noqa: F403
from .design import __all__ as _design_all
from .resolution import *  # noqa: F403
from .resolution import __all__ as _resolution_all
from .uncertainty import *  # noqa: F403
from .uncertainty import __all__ as _uncertainty_all
from .workflow import *  # noqa: F403
from .workflow import __all__ as _workflow_all

__all__ = [*_workflow_all, *_uncertainty_all, *_resolution_all, *_design_all]
