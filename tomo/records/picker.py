"""Automatic first breaks of a shot gather, each with its own uncertainty.

The steps, per gather (all traces at once):

1. Remove each trace's mean; mark dead channels (flagged in the headers or the layout,
   or with less than 1 % of the gather's median RMS) and the trace at the shot.
2. Low-pass (zero phase) at ``HIGHCUT_PERIODS`` times the gather's dominant frequency,
   which removes the noise above the signal band without delaying the onset.
3. Rough onset: the largest energy ratio over one dominant period (Coppens 1985).
4. Onset: the minimum of the Akaike information criterion (Maeda 1985) in a window
   around the rough onset, the second step of a two-step picker (Zhang, Thurber & Rowe
   2003, Bull. Seismol. Soc. Am. 93, 1904-1912).
5. Refinement: the onsets of the clear traces (signal-to-noise ratio at least
   ``TEMPLATE_SNR``) align their first breaks; their stack is the gather's first-break
   waveform, whose own onset the AIC finds on a nearly noise-free trace. Each trace's
   onset is then the shift that best matches that waveform (normalised
   cross-correlation, sub-sample by a parabola through the peak), which removes the
   late bias an energy or AIC onset has on weak traces (``benchmarks/picking.py``).
   Polarity does not matter: the match may be of either sign.
6. Uncertainty: the Cramer-Rao bound for the arrival time of a known waveform in white
   noise, var(t) >= sigma_n^2 / sum_k s'(t_k)^2 (Kay 1993, Fundamentals of Statistical
   Signal Processing: Estimation Theory, example 3.13, range estimation), with the
   waveform scaled to the trace's amplitude: the trace's own signal-to-noise ratio and
   the sharpness of its onset; plus the uncertainty of the waveform's own onset.
7. Consistency with the neighbours (:mod:`tomo.records.consistency`): a pick far off
   its neighbours' trend is re-picked in a narrow window about the trend, or dropped.

Traces with no clear onset get no pick and a reason: dead, noisy (signal-to-noise ratio
below ``min_snr``), clipped (the recorder saturated at or before the onset), at the shot.
"""

from __future__ import annotations

import functools
from dataclasses import asdict, dataclass, field

import numpy as np
from numpy.lib.stride_tricks import sliding_window_view
from scipy import signal

from ..core.errors import InputError
from . import onset
from .consistency import find_outliers, trend_at

__all__ = ["PickSettings", "GatherPicks", "pick_gather", "STATUSES"]

#: Low-pass cut-off in multiples of the dominant frequency. On the benchmark's wavelet
#: 4 left the smallest AIC bias from SNR 3 to 30 (2 and 3 bring zero-phase precursors
#: ahead of strong onsets, 6 leaves more noise); measured, see benchmarks/picking.py.
HIGHCUT_PERIODS = 4.0
#: Traces at least this clear make the gather's first-break waveform.
TEMPLATE_SNR = 10.0
#: At most this many of the clearest traces are stacked into it.
TEMPLATE_TRACES = 16
#: Uncertainty of the first-break waveform's own onset, samples, shared by every pick of
#: a gather. Measured (benchmarks/picking.py, 40 synthetic gathers of a 100 Hz Berlage
#: wavelet at 0.25 ms): the onsets of the clear traces are late by 0.32 samples on
#: average with a spread of 0.21 samples from gather to gather (RMS 0.39). 0.3 puts
#: 86-97 % of the benchmark's errors within 2 sigma (a Gaussian: 95 %); the RMS would
#: put 90-99.6 % there, the spread alone 80-95 %.
TEMPLATE_ONSET_SIGMA = 0.3
#: A channel is taken as reversed when the turned-over waveform matches it at least this
#: well and this much better than the upright one (normalised cross-correlation).
REVERSED_MIN_CC = 0.7
REVERSED_MARGIN = 0.2
#: The unfiltered stack's AIC onset is late on a gently rising onset (by 0.8 samples on
#: the benchmark's wavelet); the filtered stack's onset is looked for from this many
#: samples before it up to it, which keeps out the filter's ripple further ahead.
RAW_ONSET_LEAD = 2
#: The first-break waveform is upsampled this many times to find its onset.
UPSAMPLE = 8
#: A trace whose RMS is below this share of the gather's median RMS is dead.
DEAD_RMS_SHARE = 0.01

STATUSES = ("picked", "re-picked", "dead", "noisy", "clipped", "inconsistent", "at shot")


@dataclass(frozen=True)
class PickSettings:
    """Settings of the automatic picker (defaults suit hammer and weight-drop records).

    Attributes
    ----------
    highcut_hz : float or None
        Low-pass cut-off, Hz; None: ``HIGHCUT_PERIODS`` times the gather's dominant
        frequency; 0: no filter.
    min_snr : float
        Traces whose first break is weaker than this many noise standard deviations (on
        the filtered trace) get no pick.
    consistency_sigmas : float
        A pick further than this many combined sigmas (and an eighth of a period) from every
        prediction of its neighbours is re-picked about the trend or dropped.
    """

    highcut_hz: float | None = None
    min_snr: float = 3.0
    consistency_sigmas: float = 4.0

    def check(self):
        if self.highcut_hz is not None and not (self.highcut_hz >= 0 and np.isfinite(self.highcut_hz)):
            raise InputError(f"high-cut frequency must be >= 0 Hz, got {self.highcut_hz:g}", field="highcut_hz")
        for name in ("min_snr", "consistency_sigmas"):
            value = getattr(self, name)
            if not (value > 0 and np.isfinite(value)):
                raise InputError(f"{name} must be positive, got {value:g}", field=name)
        return self

    def as_dict(self):
        return asdict(self)


@dataclass
class GatherPicks:
    """First breaks of one gather: one entry per trace, picked or not.

    Attributes
    ----------
    record : str
        The record file(s), comma-separated.
    source_x, source_z : float
        m (``source_z`` NaN: on the ground).
    receiver_x, receiver_z : ndarray
        m (NaN elevations: on the ground).
    channel : ndarray of int
    time_s, sigma_s : ndarray
        First-arrival time relative to the shot and its uncertainty (one standard
        deviation), s; NaN where there is no pick.
    snr : ndarray
        Peak of the first break over the noise's standard deviation (filtered trace).
    status : ndarray of str
        One of :data:`STATUSES`.
    reason : list of str
        Why a trace has no pick (or was re-picked); empty for a plain pick.
    dominant_hz, highcut_hz : float
        The gather's dominant frequency and the low-pass used (0: none).
    template_traces : int
        Traces stacked into the first-break waveform (0: none clear enough; the picks
        are then AIC onsets with a quarter-period sigma).
    reversed : ndarray of bool
        Traces whose first break matched the waveform with the opposite sign.
    """

    record: str
    source_x: float
    source_z: float
    receiver_x: np.ndarray
    receiver_z: np.ndarray
    channel: np.ndarray
    time_s: np.ndarray
    sigma_s: np.ndarray
    snr: np.ndarray
    status: np.ndarray
    reason: list
    dominant_hz: float
    highcut_hz: float
    template_traces: int
    reversed: np.ndarray
    notes: list = field(default_factory=list)

    @property
    def picked(self):
        """Traces with a pick."""
        return np.isin(self.status, ("picked", "re-picked"))


def pick_gather(gather, settings=None):
    """Pick the first break of every trace of a gather (see the module docstring).

    Returns
    -------
    GatherPicks
    """
    settings = (settings or PickSettings()).check()
    raw = gather.data - gather.data.mean(axis=1, keepdims=True)
    raw = raw * gather.polarity[:, None]
    n, m = raw.shape
    status = np.full(n, "picked", dtype=object)
    reason = [""] * n
    _mark_unusable(gather, raw, status, reason)
    live = status == "picked"
    dominant = onset.dominant_frequency(raw[live], gather.dt_s) if live.any() else 0.25 / gather.dt_s
    highcut = settings.highcut_hz if settings.highcut_hz is not None else HIGHCUT_PERIODS * dominant
    filtered = onset.lowpass(raw, gather.dt_s, highcut)
    period = max(int(round(1.0 / (dominant * gather.dt_s))), 8)
    k_aic = _aic_onsets(filtered, period, live)
    noise_f = _noise_rms(filtered, k_aic, period)
    noise_r = _noise_rms(raw, k_aic, period)
    amplitude = _peak_after(filtered, k_aic, period)
    snr = amplitude / np.maximum(noise_f, 1e-300)
    onset_k, amp, sigma_k, reversed_, waveform, edge = _refine(filtered, raw, k_aic, snr, noise_r, period, live)
    if amp is not None:
        snr = amp / np.maximum(noise_f, 1e-300)
    _mark_noisy_and_clipped(raw, onset_k, snr, settings.min_snr, period, status, reason)
    time_s = np.where(status == "picked", gather.delay_s + onset_k * gather.dt_s, np.nan)
    sigma_s = np.where(status == "picked", sigma_k * gather.dt_s, np.nan)
    picks = GatherPicks(
        record=", ".join(gather.paths) or gather.path, source_x=gather.source_x, source_z=gather.source_z,
        receiver_x=gather.receiver_x, receiver_z=gather.receiver_z, channel=gather.channel,
        time_s=time_s, sigma_s=sigma_s, snr=snr, status=status.astype(object), reason=reason,
        dominant_hz=dominant, highcut_hz=float(highcut or 0.0),
        template_traces=0 if waveform is None else waveform[2],
        reversed=reversed_ & (status == "picked"), notes=list(gather.notes),
    )
    _check_neighbours(picks, filtered, noise_r, gather, period, waveform, settings, edge)
    if waveform is not None:
        _recover_near_trend(picks, filtered, noise_f, noise_r, gather, period, waveform, settings)
    picks.status = picks.status.astype(str)
    return picks


def _check_neighbours(picks, filtered, noise_r, gather, period, waveform, settings, edge):
    """Re-pick, in a narrow window about their neighbours' trend, the picks that break
    from it (:mod:`tomo.records.consistency`) and those whose match stopped at the edge
    of its search window (the first estimate was too far off to be trusted); drop those
    that still break from the trend."""
    dt = gather.dt_s
    # an eighth of a period: smaller misses are within a first break's own shape
    floor_s = period * dt / 8
    picked = picks.status == "picked"
    found = find_outliers(gather.offset, picks.time_s, picks.sigma_s, picked, settings.consistency_sigmas, floor_s)
    suspects = found.flagged | (edge & picked)
    trusted = picked & ~suspects
    for k in np.flatnonzero(suspects):
        # predicted from the trusted picks only: two bad picks side by side must not
        # vouch for each other
        predicted, predicted_sigma = trend_at(gather.offset, picks.time_s, picks.sigma_s, trusted, k)
        why = "first pick" if found.flagged[k] else "first match at the edge of its window,"
        if not np.isfinite(predicted):
            if found.flagged[k]:
                predicted, predicted_sigma = found.predicted_s[k], found.predicted_sigma_s[k]
            else:
                continue
        miss_ms = abs(picks.time_s[k] - predicted) * 1e3
        if waveform is not None:
            seg, pre, _ = waveform
            centre = np.array([(predicted - gather.delay_s) / dt])
            onset_k, amp, _, _ = _match(filtered[k:k + 1], centre, seg, pre, max(period // 8, 1))
            new_s = gather.delay_s + onset_k[0] * dt
            sigma = _sigma(noise_r[k:k + 1], amp, seg)[0] * dt
            allowed = max(settings.consistency_sigmas * np.hypot(sigma, predicted_sigma), floor_s)
            if abs(new_s - predicted) <= allowed:
                picks.time_s[k], picks.sigma_s[k] = new_s, np.hypot(sigma, predicted_sigma)
                picks.status[k] = "re-picked"
                picks.reason[k] = f"re-picked near its neighbours' trend ({why} {miss_ms:.1f} ms off it)"
                continue
        picks.status[k] = "inconsistent"
        picks.reason[k] = f"inconsistent ({miss_ms:.1f} ms off its neighbours' trend, no onset near the trend)"
        picks.time_s[k] = picks.sigma_s[k] = np.nan
        picks.reversed[k] = False


def _mark_unusable(gather, raw, status, reason):
    """Dead channels and the trace at the shot: no pick, with the reason."""
    rms = np.sqrt(np.mean(raw * raw, axis=1))
    alive = rms > 0
    median = np.median(rms[alive]) if alive.any() else 0.0
    quiet = (rms == 0) | (rms < DEAD_RMS_SHARE * median)
    at_shot = np.abs(gather.receiver_x - gather.source_x) < 1e-6
    for k in np.flatnonzero(gather.dead | quiet | at_shot):
        if gather.dead[k]:
            status[k], reason[k] = "dead", "dead (marked in the header or layout)"
        elif quiet[k]:
            share = rms[k] / median if median else 0.0
            status[k], reason[k] = "dead", f"dead (no signal: RMS {share:.1%} of the gather's median)"
        else:
            status[k], reason[k] = "at shot", "geophone at the shot"


def _windows(data, start, length):
    """Rows' samples start[k] .. start[k] + length - 1 as an (n, length) array (start clipped)."""
    m = data.shape[1]
    start = np.clip(start, 0, max(m - length, 0))
    index = start[:, None] + np.arange(min(length, m))[None, :]
    return np.take_along_axis(data, index, axis=1), start


def _aic_onsets(filtered, period, live):
    """Two steps: the largest energy ratio, then the AIC minimum from two periods
    before it to half a period after it (sample indices)."""
    # noise power: the median over live traces of their first period (few first breaks
    # come that early); half of it floors the energy ratio's earlier window
    first = np.mean(filtered[live, :period] ** 2, axis=1) if live.any() else np.zeros(1)
    # the rough onset only places the AIC window, so an eighth of a period will do:
    # the power summed over blocks of that many samples makes it several times cheaper
    block = max(period // 8, 1)
    n, m = filtered.shape
    power = (filtered[:, : m // block * block] ** 2).reshape(n, -1, block).sum(axis=2)
    ratio = onset.energy_ratio_from_start(None, max(period // block, 2), power=power,
                                          floor=0.5 * block * float(np.median(first)))
    rough = np.argmax(ratio, axis=1) * block + block // 2
    length = 2 * period + period // 2
    window, start = _windows(filtered, rough - 2 * period, length)
    return start + np.argmin(onset.aic(window), axis=1)


def _noise_rms(data, k, period):
    """RMS of up to eight periods ending a quarter period before sample k of each row;
    rows with fewer than 8 such samples take the median of the others (the noise level
    of one recording hardly changes from channel to channel)."""
    c = np.concatenate([np.zeros((data.shape[0], 1)), np.cumsum(data * data, axis=1)], axis=1)
    stop = np.clip(k - period // 4, 0, data.shape[1])
    start = np.maximum(stop - 8 * period, 0)
    count = stop - start
    rows = np.arange(data.shape[0])
    power = (c[rows, stop] - c[rows, start]) / np.maximum(count, 1)
    rms = np.sqrt(power)
    enough = count >= 8
    if enough.any():
        rms = np.where(enough, rms, np.median(rms[enough]))
    return rms


def _peak_after(data, k, period):
    """Largest absolute sample within one period from sample k of each row."""
    window, _ = _windows(data, k, period)
    return np.max(np.abs(window), axis=1)


def _aligned_windows(data, onset, before, length):
    """Rows' samples from ``before`` samples ahead of a (fractional) onset on, ``length``
    of them, shifted by linear interpolation so that every onset falls on one index."""
    whole = np.floor(onset).astype(int)
    frac = (onset - whole)[:, None]
    window, _ = _windows(data, whole - before, length + 1)
    return window[:, :-1] * (1 - frac) + window[:, 1:] * frac


def _template(filtered, raw, k, snr, period, live, reach):
    """The gather's first-break waveform from its clearest traces, or None.

    Stacks (peak 1) the filtered windows from one period before to two after each chosen
    onset (fractional onsets aligned by interpolation), polarity aligned with the
    clearest trace; the median of the traces, so that one trace whose onset was
    misjudged does not blur it. The waveform's own onset is the AIC minimum (within
    ``reach`` samples of where the traces' onsets put it) of the same stack made of the
    unfiltered traces: a zero-phase filter puts a faint ripple ahead of a sharp onset,
    which a nearly noise-free stack would show, and the AIC would take it for the onset.
    Both stacks are upsampled ``UPSAMPLE`` times (by a band-limited interpolation) to
    place the onset to a fraction of a sample. Returns (upsampled filtered stack, its
    onset in samples from the window start, traces used).
    """
    # whole windows only: a window cut at the start of the record would misalign the stack
    whole = (k >= period) & (k + 2 * period + 1 <= filtered.shape[1])
    clear = np.flatnonzero(live & whole & (snr >= TEMPLATE_SNR))
    if clear.size < 3:
        return None
    clear = clear[np.argsort(-snr[clear])][:TEMPLATE_TRACES]
    window = _aligned_windows(filtered[clear], k[clear].astype(float), period, 3 * period)
    unfiltered = _aligned_windows(raw[clear], k[clear].astype(float), period, 3 * period)
    scale = np.max(np.abs(window), axis=1, keepdims=True)
    window, unfiltered = window / scale, unfiltered / scale
    head = window[:, period - period // 4: 2 * period]
    sign = np.sign(head @ head[0])[:, None]
    sign[sign == 0] = 1.0
    stack = np.median(window * sign, axis=0)
    peak = np.max(np.abs(stack))
    fine = signal.resample_poly(stack / peak, UPSAMPLE, 1, window=_upsampling_filter())
    fine_raw = signal.resample_poly(np.median(unfiltered * sign, axis=0) / peak, UPSAMPLE, 1,
                                    window=_upsampling_filter())
    # the onset lies near index `period` (the chosen traces' onsets)
    lo, hi = (period // 2) * UPSAMPLE, (period // 2 + period + 1) * UPSAMPLE
    index = np.arange(lo, hi)
    criterion = onset.aic(fine_raw[None, lo:hi])[0]
    criterion[np.abs(index - period * UPSAMPLE) > reach * UPSAMPLE] = np.inf
    bound = lo + int(np.argmin(criterion))
    criterion = onset.aic(fine[None, lo:hi])[0]
    criterion[(index < bound - RAW_ONSET_LEAD * UPSAMPLE) | (index > bound)] = np.inf
    start = (lo + int(np.argmin(criterion))) / UPSAMPLE
    return fine, start, clear.size


@functools.cache
def _upsampling_filter():
    """The FIR filter resample_poly would design for ``UPSAMPLE`` (designed once)."""
    half = 10 * UPSAMPLE
    return signal.firwin(2 * half + 1, 1.0 / UPSAMPLE, window=("kaiser", 5.0))


def _segment(fine, start, pre, length):
    """``length`` samples of the upsampled waveform from ``pre`` samples before its onset."""
    at = (start - pre + np.arange(length)) * UPSAMPLE
    return np.interp(at, np.arange(fine.size), fine)


def _match(filtered, centre, seg, pre, search):
    """Best match of waveform ``seg`` (onset at index ``pre``) with each row within
    ``search`` samples of ``centre``: (onset in samples, amplitude, sign, whether the
    best match lies at the edge of the search)."""
    n = filtered.shape[0]
    width = seg.size + 2 * search
    window, start = _windows(filtered, np.round(centre).astype(int) - pre - search, width)
    frames = sliding_window_view(window, seg.size, axis=1)          # (n, 2 search + 1, len)
    dots = frames @ seg
    norms = np.sqrt(np.maximum(np.einsum("ijk,ijk->ij", frames, frames), 1e-300))
    signed = dots / (norms * np.linalg.norm(seg))
    rows = np.arange(n)
    # The gather's polarity is the waveform's; the opposite sign wins only when it is
    # clearly the better match (a reversed channel), because the waveform turned over
    # and shifted by half a period resembles itself (a cycle skip).
    pos, neg = np.argmax(signed, axis=1), np.argmin(signed, axis=1)
    flip = -signed[rows, neg] > np.maximum(signed[rows, pos] + REVERSED_MARGIN, REVERSED_MIN_CC)
    cc = signed * np.where(flip, -1.0, 1.0)[:, None]
    best = np.where(flip, neg, pos)
    peak = cc[rows, best]
    left = cc[rows, np.maximum(best - 1, 0)]
    right = cc[rows, np.minimum(best + 1, cc.shape[1] - 1)]
    curve = left - 2 * peak + right
    inside = (best > 0) & (best < cc.shape[1] - 1) & (curve < 0)
    shift = np.where(inside, 0.5 * (left - right) / np.where(inside, curve, 1.0), 0.0)
    amplitude = np.abs(dots[rows, best]) / float(seg @ seg)
    edge = (best == 0) | (best == cc.shape[1] - 1)
    return start + best + shift + pre, amplitude, np.sign(dots[rows, best]), edge


def _sigma(noise_raw, amplitude, seg):
    """Cramer-Rao bound for the arrival time (samples), from the unfiltered trace's
    noise (white there) and the slope energy of the waveform at the trace's amplitude,
    and, in quadrature, the uncertainty of the waveform's own onset
    (``TEMPLATE_ONSET_SIGMA``)."""
    slope = np.gradient(seg)
    crb = np.minimum(noise_raw / np.maximum(amplitude * np.sqrt(slope @ slope), 1e-300), 1e6)
    return np.hypot(crb, TEMPLATE_ONSET_SIGMA)


def _refine(filtered, raw, k_aic, snr, noise_r, period, live):
    """Match every trace with the gather's first-break waveform (see module docstring).

    Two passes: the waveform stacked on the AIC onsets gives first matches; stacked
    again on those (sharper, as they are aligned to a fraction of a sample) it gives
    the final ones.

    Returns (onset, amplitude or None, sigma, reversed, waveform or None, match at the
    edge of its search), in samples; without a waveform, the AIC onsets and a
    quarter-period sigma.
    """
    n = filtered.shape[0]
    pre = period // 4
    centre, search = k_aic.astype(float), period // 4
    for _ in range(2):
        found = _template(filtered, raw, centre, snr, period, live, reach=search)
        if found is None:
            none = np.zeros(n, dtype=bool)
            return k_aic.astype(float), None, np.full(n, period / 4.0), none, None, none
        fine, t0, used = found
        seg = _segment(fine, t0, pre, pre + period)
        centre, amplitude, sign, edge = _match(filtered, centre, seg, pre, search)
        search = max(period // 8, 1)
    return centre, amplitude, _sigma(noise_r, amplitude, seg), sign < 0, (seg, pre, used), edge


def _recover_near_trend(picks, filtered, noise_f, noise_r, gather, period, waveform, settings):
    """Look again, about their neighbours' trend, at the traces found too weak: their
    first estimate may have been off (a burst of noise), and the waveform matched where
    the neighbours say the first break is can be clear enough after all."""
    seg, pre, _ = waveform
    dt = gather.dt_s
    usable = np.isin(picks.status, ("picked", "re-picked"))
    for k in np.flatnonzero(picks.status == "noisy"):
        predicted, predicted_sigma = trend_at(gather.offset, picks.time_s, picks.sigma_s, usable, k)
        if not np.isfinite(predicted):
            continue
        centre = np.array([(predicted - gather.delay_s) / dt])
        onset_k, amp, _, _ = _match(filtered[k:k + 1], centre, seg, pre, max(period // 8, 1))
        snr = amp[0] / max(noise_f[k], 1e-300)
        new_s = gather.delay_s + onset_k[0] * dt
        sigma = _sigma(noise_r[k:k + 1], amp, seg)[0] * dt
        allowed = max(settings.consistency_sigmas * np.hypot(sigma, predicted_sigma), period * dt / 4)
        if snr >= settings.min_snr and abs(new_s - predicted) <= allowed:
            picks.time_s[k], picks.sigma_s[k], picks.snr[k] = new_s, np.hypot(sigma, predicted_sigma), snr
            picks.status[k] = "re-picked"
            picks.reason[k] = (f"re-picked near its neighbours' trend (first estimate too weak, "
                               f"signal-to-noise {snr:.1f})")


def _mark_noisy_and_clipped(raw, onset_k, snr, min_snr, period, status, reason):
    clip_start = onset.clipped_from(raw)
    open_ = status == "picked"
    suspect = open_ & (((clip_start >= 0) & (clip_start <= onset_k + period / 4)) | ~(snr >= min_snr))
    for k in np.flatnonzero(suspect):
        if 0 <= clip_start[k] <= onset_k[k] + period / 4:
            status[k], reason[k] = "clipped", f"clipped (flat at its peak from {clip_start[k]} samples on)"
        elif not snr[k] >= min_snr:
            status[k], reason[k] = "noisy", f"noisy (signal-to-noise {snr[k]:.1f}, below {min_snr:g})"
