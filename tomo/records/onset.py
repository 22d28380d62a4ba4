"""Onset detectors on the traces of a gather, vectorised over traces (rows).

Each function takes an (n_traces, n_samples) array and returns one of the same shape
(or per-trace values), so a whole gather costs a few numpy passes rather than a Python
loop per trace. ``tests/test_picking.py`` compares them with ObsPy's single-trace
implementations (``obspy.signal.trigger``).
"""

from __future__ import annotations

import numpy as np
from scipy import signal

__all__ = ["lowpass", "dominant_frequency", "sta_lta", "energy_ratio", "aic", "clipped_from"]


def lowpass(data, dt_s, cutoff_hz, order=4):
    """Zero-phase Butterworth low-pass along each row.

    Zero phase (forward and backward) so that the filter does not delay the onset; the
    cut-off is kept well above the signal band (see :mod:`tomo.records.picker`), where
    the small precursor a zero-phase filter puts before a sharp onset stays below the
    noise.
    """
    nyquist = 0.5 / dt_s
    if cutoff_hz is None or cutoff_hz <= 0 or cutoff_hz >= 0.95 * nyquist:
        return np.array(data, dtype=float)
    sos = signal.butter(order, cutoff_hz, fs=1.0 / dt_s, output="sos")
    return signal.sosfiltfilt(sos, data, axis=-1)


def dominant_frequency(data, dt_s, min_hz=5.0):
    """Frequency of the peak of the mean amplitude spectrum of the rows, Hz.

    Noise with a flat spectrum does not move the peak; the first breaks and what
    follows them do. Rows should have their means removed.
    """
    n = data.shape[-1]
    rows = data.reshape(-1, n)
    # sixteen rows spread over the gather tell the peak as well as all of them
    rows = rows[np.linspace(0, rows.shape[0] - 1, min(rows.shape[0], 16)).astype(int)]
    nfft = int(2 ** np.ceil(np.log2(max(n, 16))))
    spectrum = np.abs(np.fft.rfft(rows * np.hanning(n), n=nfft, axis=-1))
    mean = spectrum.mean(axis=0)
    freq = np.fft.rfftfreq(nfft, dt_s)
    usable = freq >= min_hz
    # a light smoothing so that one noisy bin does not win
    smooth = np.convolve(mean, np.ones(5) / 5, mode="same")
    return float(freq[usable][np.argmax(smooth[usable])])


def _windowed_energy(data, n):
    """Sum of squares over n samples ending at each sample (zero-padded at the start)."""
    c = np.cumsum(data * data, axis=-1)
    c = np.concatenate([np.zeros(data.shape[:-1] + (1,)), c], axis=-1)
    lagged = np.concatenate([np.zeros(data.shape[:-1] + (n,)), c[..., :-n]], axis=-1) if n < c.shape[-1] else 0 * c
    return (c - lagged)[..., 1:]


def sta_lta(data, nsta, nlta):
    """Classic STA/LTA: mean power over the last ``nsta`` samples over that of the last
    ``nlta`` samples, zero for the first ``nlta - 1`` samples (Allen 1978, Bull. Seismol.
    Soc. Am. 68, 1521-1532; the same convention as ObsPy's ``classic_sta_lta``)."""
    sta = _windowed_energy(data, nsta) / nsta
    lta = _windowed_energy(data, nlta) / nlta
    out = np.divide(sta, lta, out=np.zeros_like(sta), where=lta > 0)
    out[..., : nlta - 1] = 0.0
    return out


def energy_ratio(data, n):
    """Energy ratio: the energy of the ``n`` samples from each sample on over that of the
    ``n`` samples before it (Coppens 1985, Geophys. Prospect. 33, 1212-1231; the same
    convention as ObsPy's ``energy_ratio``). Zero where either window leaves the trace.

    Near the start of a record (a first break within ``n`` samples of the first sample)
    use :func:`energy_ratio_from_start`.
    """
    c = np.cumsum(data * data, axis=-1)
    c = np.concatenate([np.zeros(data.shape[:-1] + (1,)), c], axis=-1)
    m = data.shape[-1]
    out = np.zeros(data.shape)
    if 2 * n > m:
        return out
    after = c[..., 2 * n:] - c[..., n:-n]          # samples i .. i+n-1 for i = n .. m-n
    before = c[..., n:-n] - c[..., : m + 1 - 2 * n]  # samples i-n .. i-1
    np.divide(after, before, out=out[..., n: m - n + 1], where=before > 0)
    return out


def energy_ratio_from_start(data, n, min_before=4, floor=0.0, power=None):
    """Energy ratio whose earlier window is cut at the first sample: the mean power of
    the ``n`` samples from each sample on over the mean power of the up to ``n`` samples
    before it (at least ``min_before``), the latter no less than ``floor``. Lets a first
    break a few samples after the start of the record be found (:func:`energy_ratio`
    would ignore it); the floor (a share of the noise power) keeps a few quiet samples
    at the start from making a spurious peak. ``power`` (optional) replaces
    ``data * data``, e.g. the power summed over blocks of samples."""
    power = data * data if power is None else power
    m = power.shape[-1]
    lead = np.zeros(power.shape[:-1] + (1,))
    c = np.concatenate([lead, np.cumsum(power, axis=-1)], axis=-1)            # c[j]: samples 0..j-1
    # slices of padded running sums instead of fancy indexing: several times faster
    tail = np.concatenate([c, np.repeat(c[..., -1:], n, axis=-1)], axis=-1)  # c[min(j, m)]
    head = np.concatenate([np.zeros(power.shape[:-1] + (n,)), c], axis=-1)    # c[max(j - n, 0)]
    i = np.arange(m)
    after = (tail[..., n:n + m] - c[..., :m]) / np.maximum(np.minimum(i + n, m) - i, 1)
    before = np.maximum((c[..., :m] - head[..., :m]) / np.maximum(np.minimum(i, n), 1), floor)
    out = np.divide(after, before, out=np.zeros(power.shape), where=before > 0)
    out[..., :min_before] = 0.0
    return out


def aic(data):
    """Akaike information criterion of a split of each row into two stationary parts:
    AIC(k) = k log var(x[0..k]) + (N - k - 1) log var(x[k+1..N-1]) (Maeda 1985, Zisin 38,
    365-379; the form of ObsPy's ``aic_simple``). The minimum marks the onset.

    Returns an array of the input's shape; entries whose segments hold fewer than two
    samples are +inf.
    """
    x = np.asarray(data, dtype=float)
    m = x.shape[-1]
    s1 = np.cumsum(x, axis=-1)
    s2 = np.cumsum(x * x, axis=-1)
    k = np.arange(1, m + 1, dtype=float)  # k[j] = j + 1 samples in the head x[0..j]
    var_head = s2 / k - (s1 / k) ** 2
    tail_n = m - k
    tail_s1 = s1[..., -1:] - s1
    tail_s2 = s2[..., -1:] - s2
    with np.errstate(divide="ignore", invalid="ignore"):
        var_tail = tail_s2 / tail_n - (tail_s1 / tail_n) ** 2
        # index j: head x[0..j] (j + 1 samples), tail x[j+1..m-1] (m - j - 1 samples)
        out = k * np.log(np.maximum(var_head, 1e-300)) + (tail_n - 1) * np.log(np.maximum(var_tail, 1e-300))
    out[..., 0] = np.inf
    out[..., m - 2:] = np.inf
    return out


def clipped_from(data, run=3, level=0.999):
    """First sample of each row inside a run of ``run`` or more samples at the row's
    largest absolute value (a clipped recorder), or -1 where there is none."""
    peak = np.max(np.abs(data), axis=-1, keepdims=True)
    at = (np.abs(data) >= level * peak) & (peak > 0)
    # a run of `run` samples ends at j when the windowed count reaches `run`
    count = np.cumsum(at, axis=-1)
    count = count - np.concatenate([np.zeros(data.shape[:-1] + (run,)), count[..., :-run]], axis=-1)
    hit = count >= run
    first = np.where(hit.any(axis=-1), np.argmax(hit, axis=-1) - (run - 1), -1)
    return first
