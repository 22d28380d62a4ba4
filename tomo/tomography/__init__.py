"""Travel-time tomography: model and forward grids, the eikonal solver (scikit-fmm),
rays and sensitivities, starting models, the regularised inversion, synthetic picks
and the ``RunData`` record of a run.

Imports :mod:`tomo.core`, :mod:`tomo.survey` and :mod:`tomo.layered`.
"""
