"""``Run``: the record of one inversion with what a user does with it.

:class:`Run` is the tomography stage's :class:`~tomo.tomography.run.RunData` (the
model, the fit, every setting) with methods from the stages above it: write it as a run
file, read an iso-velocity surface out of it, hand it to xarray. The inversion itself
returns a plain ``RunData``; :func:`tomo.api.invert` and :meth:`Run.read` give a
``Run``, so the tomography stage never imports upward and the run file format stays
the one :mod:`tomo.results.runfile` documents.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, fields
from pathlib import Path
from typing import TYPE_CHECKING

from ..analysis.surface import Surface, contour_surface
from ..tomography.run import RunData
from .runfile import read_run, write_run

if TYPE_CHECKING:  # xarray is imported only when a dataset is asked for
    import xarray

    from ..uncertainty.bands import SurfaceBand

__all__ = ["Run"]


@dataclass
class Run(RunData):
    """One inversion run: its model, fit and settings (attributes of ``RunData``).

    Examples
    --------
    >>> run = Run.read("tomo-demo/run.h5")                    # doctest: +SKIP
    >>> run.surface(2100.0).depth_m                           # doctest: +SKIP
    """

    @classmethod
    def from_data(cls, data: RunData) -> Run:
        """The same record as a ``Run`` (arrays shared, not copied)."""
        if isinstance(data, cls):
            return data
        return cls(**{f.name: getattr(data, f.name) for f in fields(RunData)})

    @classmethod
    def read(cls, path: str | os.PathLike) -> Run:
        """Read a run file (HDF5; layout in :mod:`tomo.results.runfile`).

        Raises
        ------
        InputError
            If the file is missing, not a run file, from a newer format or damaged.
        """
        return read_run(path, cls=cls)

    def write(self, path: str | os.PathLike) -> Path:
        """Write the run file (HDF5) atomically: a temporary name, then a rename, so an
        interrupted write leaves no torn file. Returns the path."""
        write_run(path, self)
        return Path(path)

    def surface(self, velocity_m_s: float) -> Surface:
        """The ``velocity_m_s`` iso-velocity surface, column by column (m/s in, m out).

        The usual reading of a refractor out of a tomogram; see
        :func:`tomo.analysis.surface.contour_surface`. ``Surface.constrained`` is false
        where the surface lies below the depth of investigation (the starting model's,
        not the picks').

        Raises
        ------
        InputError
            If ``velocity_m_s`` is outside the model's range.
        """
        return contour_surface(self, velocity_m_s)

    def band(self, velocity_m_s: float) -> SurfaceBand:
        """The depth band of the ``velocity_m_s`` surface across the members of an
        ensemble (:func:`tomo.uncertainty.bands.surface_band`): median depth and the 5-95 %
        range per column, m.

        Raises
        ------
        InputError
            If the run is not an ensemble's, or the velocity is outside the model's range.
        """
        from ..core.errors import InputError
        from ..uncertainty.bands import surface_band

        if self.ensemble is None:
            raise InputError("a depth band needs an ensemble (tomo ensemble); this run is a single inversion")
        return surface_band(self, velocity_m_s)

    def to_xarray(self) -> xarray.Dataset:
        """The velocity grid as an :class:`xarray.Dataset` following the CF conventions.

        ``velocity``, ``start_velocity`` (m s-1) and ``coverage`` (m) on (z, x), ground
        and depth-of-investigation elevations per column, map coordinates on a
        surveyed line, the fit and settings as attributes: the content of ``tomo
        export --netcdf`` (:func:`tomo.results.netcdf.grid_dataset`). xarray is
        imported here, not before.
        """
        from .netcdf import grid_dataset

        return grid_dataset(self)
