"""Survey input: pick and layout files, terrain, layered model files, mesh specs, line geometry.

Everything is checked here, at the boundary; the types (``Picks``, ``Terrain``) are
SI inside (m, s). Imports only :mod:`tomo.core`.
"""
