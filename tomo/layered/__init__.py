"""Layered interpretation: travel-time branches, intercept-time and dipping-layer
formulas, delay times (plus-minus, GRM), pick QC, and the ``LayeredResult`` type.

Modules, in the order :func:`tomo.layered.interpret.interpret_line` uses them:
``sidefit`` (branch and side-fit values), ``splits`` (the split-point search),
``branches`` (fitting a shot side), ``matching`` (the line's layers and each branch
matched to one), ``velocities`` (layer velocities, reversed pairs), ``thickness``
(intercept-time thicknesses), ``delay`` and ``profile`` (delay-time refractor),
``result`` (``LayeredResult``, ``Layer``), ``codes`` (the notices' codes and hints),
``formulas`` (closed forms), ``qc`` (pick QC).

All methods assume velocity increasing with depth. Imports :mod:`tomo.core` and
:mod:`tomo.survey`.
"""
