"""Synthetic shot records from first-arrival times, for testing the picker and teaching.

Each trace holds a causal source wavelet starting exactly at its first-arrival time, with
an amplitude falling as 1 / offset (geometric spreading of a wave front along the
surface, common practice for a rough near-surface decay), plus Gaussian white noise.
The amplitude is set so that the peak of the wavelet over the noise's standard
deviation, the signal-to-noise ratio, has a stated value at a stated (far) offset.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..core.errors import InputError
from ..core.fileio import atomic_path
from .gather import Gather

__all__ = ["berlage_wavelet", "RecordSettings", "synthetic_gather", "write_segy", "write_line_records"]


def berlage_wavelet(time_s, frequency_hz, n=1, cycles=2.5):
    """Berlage wavelet w(t) = t^n exp(-a t) sin(2 pi f t) for t >= 0, 0 before, scaled to
    a peak of 1 (Aldridge 1990, "The Berlage wavelet", Geophysics 55, 1508-1511).

    Causal: nothing before t = 0, and with ``n = 1`` it rises as t^2, a gentle onset
    that late picks are made of. The decay a = 2 pi f / ``cycles``.
    """
    t = np.maximum(np.asarray(time_s, dtype=float), 0.0)
    decay = 2.0 * np.pi * frequency_hz / cycles
    # the peak of t^n e^{-at} sin(2 pi f t) lies before the envelope's peak at n / a
    fine = np.linspace(0.0, 2.0 * n / decay + 1.0 / frequency_hz, 4001)
    peak = np.max(np.abs(fine**n * np.exp(-decay * fine) * np.sin(2 * np.pi * frequency_hz * fine)))
    return t**n * np.exp(-decay * t) * np.sin(2 * np.pi * frequency_hz * t) / peak


@dataclass(frozen=True)
class RecordSettings:
    """How synthetic records are made.

    Attributes
    ----------
    dt_s : float
        Sample interval, s.
    frequency_hz : float
        Frequency of the wavelet's oscillation (its dominant frequency), Hz.
    snr : float
        Peak of the first break over the noise's standard deviation at ``snr_offset_m``.
    snr_offset_m : float or None
        Offset at which the signal-to-noise ratio is ``snr``; None: the longest offset of
        the line (so the far traces are the noisy ones).
    record_s : float or None
        Record length, s; None: 1.3 times the latest first arrival plus 20 ms.
    delay_s : float
        Time of the first sample relative to the shot, s (whole ms, as SEG-Y stores it).
    """

    dt_s: float = 0.25e-3
    frequency_hz: float = 100.0
    snr: float = 3.0
    snr_offset_m: float | None = None
    record_s: float | None = None
    delay_s: float = 0.0

    def check(self):
        for name in ("dt_s", "frequency_hz", "snr"):
            if not getattr(self, name) > 0:
                raise InputError(f"{name} must be positive, got {getattr(self, name):g}", field=name)
        if self.frequency_hz >= 0.25 / self.dt_s:
            raise InputError(f"wavelet frequency {self.frequency_hz:g} Hz is too high for a sample interval of "
                             f"{self.dt_s * 1e3:g} ms (at most a quarter of the sampling rate)", field="frequency_hz")
        if abs(self.delay_s * 1e3 - round(self.delay_s * 1e3)) > 1e-9:
            raise InputError("record delay must be whole milliseconds (SEG-Y stores ms)", field="delay_s")
        return self


def synthetic_gather(source_x, source_z, receiver_x, receiver_z, time_s, settings=None, rng=None,
                     reference_offset_m=None, noise_rms=1.0):
    """One shot record with a Berlage wavelet at each first-arrival time.

    Parameters
    ----------
    source_x, source_z : float
        Shot position and elevation, m.
    receiver_x, receiver_z, time_s : array_like
        Geophones (m) and their first-arrival times (s).
    settings : RecordSettings, optional
    rng : numpy.random.Generator, optional
    reference_offset_m : float, optional
        Offset at which the signal-to-noise ratio is ``settings.snr`` (default: the
        settings' ``snr_offset_m``, else this gather's longest offset).
    noise_rms : float
        Standard deviation of the noise, in the record's units.

    Returns
    -------
    Gather
    """
    settings = (settings or RecordSettings()).check()
    rng = rng if rng is not None else np.random.default_rng()
    receiver_x = np.asarray(receiver_x, dtype=float)
    time_s = np.asarray(time_s, dtype=float)
    offset = np.abs(receiver_x - source_x)
    reference = reference_offset_m or settings.snr_offset_m or float(offset.max())
    spacing = float(np.median(np.diff(np.sort(receiver_x)))) if receiver_x.size > 1 else 1.0
    amplitude = settings.snr * noise_rms * reference / np.maximum(offset, spacing)
    record_s = settings.record_s or 1.3 * float(time_s.max()) + 0.02
    n = int(np.ceil((record_s - settings.delay_s) / settings.dt_s))
    t = settings.delay_s + np.arange(n) * settings.dt_s
    data = amplitude[:, None] * berlage_wavelet(t[None, :] - time_s[:, None], settings.frequency_hz)
    data += rng.normal(0.0, noise_rms, data.shape)
    count = receiver_x.size
    return Gather(
        data=data, dt_s=settings.dt_s, delay_s=settings.delay_s, source_x=float(source_x),
        source_z=float(source_z), receiver_x=receiver_x, receiver_z=np.asarray(receiver_z, dtype=float),
        channel=np.arange(1, count + 1), dead=np.zeros(count, dtype=bool), polarity=np.ones(count),
        notes=[f"synthetic: Berlage wavelet {settings.frequency_hz:g} Hz, signal-to-noise {settings.snr:g} at "
               f"{reference:g} m offset, falling as 1/offset"],
    )


def write_segy(path, gather, note="synthetic shot record"):
    """Write a gather as a SEG-Y file (IEEE floats) through ObsPy, atomically.

    Positions go to the source and group x coordinates and elevations to the surface
    elevation at source and receiver group elevation, in cm (scalar -100); the delay to
    the delay recording time in whole ms; dead channels get trace identification code 2.
    """
    from obspy import Stream, Trace
    from obspy.core import AttribDict
    from obspy.io.segy.segy import SEGYBinaryFileHeader, SEGYTraceHeader

    delay_ms = gather.delay_s * 1e3
    if abs(delay_ms - round(delay_ms)) > 1e-6:
        raise InputError(f"SEG-Y stores the delay in whole ms; got {delay_ms:g} ms", path=path)
    if gather.dt_s * 1e6 != round(gather.dt_s * 1e6):
        raise InputError(f"SEG-Y stores the sample interval in whole microseconds; got {gather.dt_s * 1e6:g}",
                         path=path)
    source_z = 0.0 if np.isnan(gather.source_z) else gather.source_z
    stream = Stream()
    for k in range(gather.n_traces):
        trace = Trace(np.ascontiguousarray(gather.data[k], dtype=np.float32))
        trace.stats.delta = gather.dt_s
        h = SEGYTraceHeader()
        h.trace_sequence_number_within_line = k + 1
        h.trace_number_within_the_original_field_record = int(gather.channel[k])
        h.trace_identification_code = 2 if gather.dead[k] else 1
        h.number_of_vertically_summed_traces_yielding_this_trace = int(gather.stack)
        h.scalar_to_be_applied_to_all_coordinates = -100
        h.scalar_to_be_applied_to_all_elevations_and_depths = -100
        h.source_coordinate_x = int(round(gather.source_x * 100))
        h.group_coordinate_x = int(round(gather.receiver_x[k] * 100))
        h.surface_elevation_at_source = int(round(source_z * 100))
        rz = gather.receiver_z[k]
        h.receiver_group_elevation = int(round((0.0 if np.isnan(rz) else rz) * 100))
        h.coordinate_units = 1
        h.delay_recording_time = int(round(delay_ms))
        h.number_of_samples_in_this_trace = gather.n_samples
        h.sample_interval_in_ms_for_this_trace = int(round(gather.dt_s * 1e6))
        trace.stats.segy = AttribDict(trace_header=h)
        stream.append(trace)
    binary = SEGYBinaryFileHeader()
    binary.number_of_data_traces_per_ensemble = gather.n_traces
    binary.sample_interval_in_microseconds = int(round(gather.dt_s * 1e6))
    binary.number_of_samples_per_data_trace = gather.n_samples
    stream.stats = AttribDict(textual_file_header=note.encode("ascii", "replace")[:3200],
                              binary_file_header=binary)
    with atomic_path(path) as tmp:
        stream.write(str(tmp), format="SEGY", data_encoding=5)
    return path


def write_line_records(folder, layout, time_s, settings=None, seed=None):
    """One SEG-Y record per shot of a layout, from its first-arrival times.

    Parameters
    ----------
    folder : str or Path
        Existing folder; files ``shot_001.sgy``, ... in order of shot position.
    layout : Picks
        The shot-geophone pairs (``tomo.survey.picks.Picks``).
    time_s : ndarray
        First-arrival time of every pair, s.
    settings : RecordSettings, optional
        The signal-to-noise ratio applies at the line's longest offset unless the
        settings name another.
    seed : int, optional

    Returns
    -------
    list of Path
    """
    from pathlib import Path

    folder = Path(folder)
    if not folder.is_dir():
        raise InputError("records folder does not exist", path=folder)
    settings = (settings or RecordSettings()).check()
    rng = np.random.default_rng(seed)
    offsets = np.abs(layout.receiver_x - layout.source_x)
    reference = settings.snr_offset_m or float(offsets.max())
    sources, index = layout.sources()
    paths = []
    for k in np.argsort(sources[:, 0]):
        mine = np.flatnonzero(index == k)
        mine = mine[np.argsort(layout.receiver_x[mine])]
        gather = synthetic_gather(sources[k, 0], sources[k, 1], layout.receiver_x[mine], layout.receiver_z[mine],
                                  time_s[mine], settings, rng=rng, reference_offset_m=reference)
        path = folder / f"shot_{len(paths) + 1:03d}.sgy"
        write_segy(path, gather, note=f"synthetic shot record made by tomo synth: shot at x = {sources[k, 0]:g} m")
        paths.append(path)
    return paths
