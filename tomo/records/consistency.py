"""Consistency of first breaks along a gather: first arrivals move smoothly with offset.

On each side of the shot, with the picks ordered by distance from it, every pick is
predicted three ways from its neighbours: linear interpolation between the pick before
and the pick after it, and straight-line extrapolation from the two picks on either
side. A first-arrival curve is piecewise straight (one slope per refractor), so at a
kink (a crossover) one of the three predictions still runs along the pick's own branch;
a pick is an outlier only when it misses all of them by more than ``n_sigma`` combined
standard deviations and by more than a floor (an eighth of a period, below which a miss
is within the first break's own shape). Outliers are removed one at a time, the
worst first, and the predictions recomputed, so that one bad pick does not condemn its
neighbours.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["Outliers", "find_outliers", "trend_at"]


@dataclass
class Outliers:
    """Result of :func:`find_outliers`, one entry per trace.

    Attributes
    ----------
    flagged : ndarray of bool
        Picks off every prediction of their neighbours.
    predicted_s, predicted_sigma_s : ndarray
        For flagged picks, the median of the neighbours' predictions and its
        uncertainty, s (NaN elsewhere).
    miss_s : ndarray
        How far the flagged pick was from the nearest prediction, s.
    """

    flagged: np.ndarray
    predicted_s: np.ndarray
    predicted_sigma_s: np.ndarray
    miss_s: np.ndarray


def _predictions(x, t, s, i):
    """Predictions of pick i from its neighbours in the sorted arrays: list of
    (time, sigma) from interpolation and left/right extrapolation where possible."""
    out = []
    n = x.size
    if 0 < i < n - 1:
        w = (x[i] - x[i - 1]) / (x[i + 1] - x[i - 1])
        out.append(((1 - w) * t[i - 1] + w * t[i + 1], np.hypot((1 - w) * s[i - 1], w * s[i + 1])))
    if i >= 2:
        a = (x[i] - x[i - 1]) / (x[i - 1] - x[i - 2])
        out.append((t[i - 1] + a * (t[i - 1] - t[i - 2]), np.hypot((1 + a) * s[i - 1], a * s[i - 2])))
    if i <= n - 3:
        a = (x[i + 1] - x[i]) / (x[i + 2] - x[i + 1])
        out.append((t[i + 1] - a * (t[i + 2] - t[i + 1]), np.hypot((1 + a) * s[i + 1], a * s[i + 2])))
    return out


def _scores(x, t, s, n_sigma, floor_s):
    """Each pick's smallest miss of its neighbours' predictions, in allowances (a pick
    with no prediction scores 0), all picks at once; the same predictions as
    :func:`_predictions`."""
    n = x.size
    best = np.full(n, np.inf)
    i = np.arange(n)

    def consider(index, predicted, sigma):
        score = np.abs(t[index] - predicted) / np.maximum(n_sigma * np.hypot(s[index], sigma), floor_s)
        best[index] = np.minimum(best[index], score)

    if n >= 3:
        k = i[1:-1]
        w = (x[k] - x[k - 1]) / (x[k + 1] - x[k - 1])
        consider(k, (1 - w) * t[k - 1] + w * t[k + 1], np.hypot((1 - w) * s[k - 1], w * s[k + 1]))
        k = i[2:]
        a = (x[k] - x[k - 1]) / (x[k - 1] - x[k - 2])
        consider(k, t[k - 1] + a * (t[k - 1] - t[k - 2]), np.hypot((1 + a) * s[k - 1], a * s[k - 2]))
        k = i[:-2]
        a = (x[k + 1] - x[k]) / (x[k + 2] - x[k + 1])
        consider(k, t[k + 1] - a * (t[k + 2] - t[k + 1]), np.hypot((1 + a) * s[k + 1], a * s[k + 2]))
    return np.where(np.isfinite(best), best, 0.0)


def _worst(x, t, s, n_sigma, floor_s):
    """Index (into the sorted arrays) of the worst outlier and its predictions, or None."""
    scores = _scores(x, t, s, n_sigma, floor_s)
    i = int(np.argmax(scores)) if scores.size else 0
    if not scores.size or scores[i] <= 1.0:
        return None, None
    return i, _predictions(x, t, s, i)


def find_outliers(offset, time_s, sigma_s, usable, n_sigma=4.0, floor_s=0.0):
    """Flag picks that break from their neighbours' trend (see the module docstring).

    Parameters
    ----------
    offset : ndarray
        Signed offset receiver_x - source_x, m.
    time_s, sigma_s : ndarray
        Picks and their uncertainties, s.
    usable : ndarray of bool
        Traces with a pick.
    n_sigma : float
    floor_s : float
        Smallest miss that can flag a pick, s.

    Returns
    -------
    Outliers
    """
    n = offset.size
    flagged = np.zeros(n, dtype=bool)
    predicted = np.full(n, np.nan)
    predicted_sigma = np.full(n, np.nan)
    miss = np.full(n, np.nan)
    for side in (-1.0, 1.0):
        index = np.flatnonzero(usable & (np.sign(offset) == side))
        index = index[np.argsort(np.abs(offset[index]))]
        while index.size >= 3:
            x, t, s = np.abs(offset[index]), time_s[index], sigma_s[index]
            i, preds = _worst(x, t, s, n_sigma, floor_s)
            if i is None:
                break
            k = index[i]
            flagged[k] = True
            times = np.array([p for p, _ in preds])
            predicted[k] = float(np.median(times))
            predicted_sigma[k] = float(np.median([ps for _, ps in preds]))
            miss[k] = float(np.min(np.abs(times - time_s[k])))
            index = np.delete(index, i)
    return Outliers(flagged, predicted, predicted_sigma, miss)


def trend_at(offset, time_s, sigma_s, usable, k):
    """The neighbours' prediction of the first break of trace ``k`` (which need not have
    a pick): the median of the interpolation and extrapolations of the usable picks on
    its side of the shot, and its uncertainty, s; NaN without two usable neighbours."""
    side = np.sign(offset[k])
    index = np.flatnonzero(usable & (np.sign(offset) == side))
    index = index[index != k]
    if index.size < 2:
        return np.nan, np.nan
    x = np.abs(offset[index])
    order = np.argsort(x)
    index, x = index[order], x[order]
    pos = int(np.searchsorted(x, abs(offset[k])))
    xs = np.insert(x, pos, abs(offset[k]))
    ts = np.insert(time_s[index], pos, np.nan)
    ss = np.insert(sigma_s[index], pos, np.nan)
    preds = _predictions(xs, ts, ss, pos)
    if not preds:
        return np.nan, np.nan
    return float(np.median([p for p, _ in preds])), float(np.median([s for _, s in preds]))
