"""Layered interpretation: travel-time branches, intercept-time and dipping-layer
formulas, delay times (plus-minus, GRM), pick QC, and the ``LayeredResult`` type.

All methods assume velocity increasing with depth. Imports :mod:`tomo.core` and
:mod:`tomo.survey`.
"""
