"""Closed-form travel-time formulas of layered ground (all velocities increasing with depth).

- n horizontal layers, intercept-time method. The head wave of layer n arrives at
  ``t_n = x/V_n + sum_{i<n} 2 h_i sqrt(V_n^2 - V_i^2) / (V_i V_n)``, so the thicknesses
  follow from the intercept times one layer at a time (Telford, Geldart & Sheriff 1990,
  Applied Geophysics, 2nd ed., sec. 4.3; Lowrie & Fichtner 2020, Fundamentals of
  Geophysics, 3rd ed.). With dipping layers the same formula applied to the true
  velocities gives the thickness perpendicular to the layers under the shot.
- Dipping refractor from reversed shots: with ``a_d``, ``a_u`` the down-dip and up-dip
  apparent velocities, ``dip = (asin(V1/a_d) - asin(V1/a_u))/2`` and
  ``theta_c = (asin(V1/a_d) + asin(V1/a_u))/2``, ``V = V1/sin(theta_c)`` (Telford et al.
  1990, sec. 4.3.3, from memory).
- Crossover and critical distances, and the rule of thumb for a hidden layer.
"""

from __future__ import annotations

import math

import numpy as np

from ..core.errors import InputError

__all__ = ["intercept_times", "intercept_thicknesses", "crossover_distances", "critical_distances",
           "dipping_refractor", "hidden_layer_thickness", "cos_term"]


def cos_term(v_i, v_n):
    """sqrt(V_n^2 - V_i^2) / (V_i V_n) = cos(theta_in) / V_i, s/m."""
    return math.sqrt(max(v_n * v_n - v_i * v_i, 0.0)) / (v_i * v_n)


def intercept_times(velocities_m_s, thicknesses_m):
    """Intercept times (s) of the head waves of layers 2..n over horizontal layers.

    ``t_n = sum_{i<n} 2 h_i sqrt(V_n^2 - V_i^2) / (V_i V_n)`` (Telford et al. 1990, sec. 4.3).

    Parameters
    ----------
    velocities_m_s : sequence of float, length n
        Layer velocities top to bottom, m/s, increasing.
    thicknesses_m : sequence of float, length n-1
        Thicknesses of the layers above the last, m.
    """
    v = [float(x) for x in velocities_m_s]
    h = [float(x) for x in thicknesses_m]
    return np.array([sum(2 * h[i] * cos_term(v[i], v[n]) for i in range(n)) for n in range(1, len(v))])


def intercept_thicknesses(velocities_m_s, intercepts_s):
    """Thicknesses (m) of layers 1..n-1 from the intercept times of layers 2..n.

    Inverts :func:`intercept_times` layer by layer:
    ``h_{n-1} = (t_n - sum_{i<n-1} 2 h_i cos(theta_in)/V_i) V_{n-1} V_n / (2 sqrt(V_n^2 - V_{n-1}^2))``.

    Parameters
    ----------
    velocities_m_s : sequence of float, length n
    intercepts_s : sequence of float, length n-1
        Intercept time of the branch of layer k (k = 2..n), s.

    Returns
    -------
    ndarray, length n-1
        NaN for a layer whose velocity does not increase downward.
    """
    v = [float(x) for x in velocities_m_s]
    t = [float(x) for x in intercepts_s]
    if len(t) != len(v) - 1:
        raise InputError(f"need {len(v) - 1} intercept times for {len(v)} velocities, got {len(t)}")
    h = []
    for n in range(1, len(v)):
        if not v[n] > v[n - 1]:
            h.append(float("nan"))
            continue
        above = sum(2 * h[i] * cos_term(v[i], v[n]) for i in range(n - 1) if math.isfinite(h[i]))
        h.append((t[n - 1] - above) / (2 * cos_term(v[n - 1], v[n])))
    return np.array(h)


def crossover_distances(velocities_m_s, thicknesses_m):
    """Offsets (m) where branch k+1 overtakes branch k over horizontal layers.

    ``x_c = (t_{k+1} - t_k) / (1/V_k - 1/V_{k+1})``; for two layers this is
    ``2H sqrt((V2+V1)/(V2-V1))`` (Telford et al. 1990, sec. 4.3).
    """
    v = np.asarray(velocities_m_s, float)
    t = np.concatenate([[0.0], intercept_times(v, thicknesses_m)])
    return (t[1:] - t[:-1]) / (1 / v[:-1] - 1 / v[1:])


def critical_distances(velocities_m_s, thicknesses_m):
    """Critical distances (m): nearest offset at which each head wave exists.

    ``x_crit,n = sum_{i<n} 2 h_i tan(theta_in)``, ``sin(theta_in) = V_i/V_n``; for two
    layers ``2H tan(theta_c)`` (Telford et al. 1990, sec. 4.3).
    """
    v = [float(x) for x in velocities_m_s]
    h = [float(x) for x in thicknesses_m]
    out = []
    for n in range(1, len(v)):
        total = 0.0
        for i in range(n):
            s = v[i] / v[n]
            total += 2 * h[i] * s / math.sqrt(1 - s * s)
        out.append(total)
    return np.array(out)


def dipping_refractor(v1_m_s, apparent_down_m_s, apparent_up_m_s, intercept_down_s=None,
                      intercept_up_s=None):
    """True velocity, dip and depths of a plane dipping refractor from reversed shots.

    Parameters
    ----------
    v1_m_s : float
        Velocity of the first layer, m/s.
    apparent_down_m_s, apparent_up_m_s : float
        Apparent velocities shooting down-dip (slower) and up-dip, m/s. If the "down"
        one is faster the dip comes out negative (the refractor rises that way).
    intercept_down_s, intercept_up_s : float, optional
        Intercept times of the two branches, s.

    Returns
    -------
    dict
        ``velocity_m_s``, ``dip_deg`` (positive: deepening in the down-dip shooting
        direction), ``critical_angle_deg`` and, with intercepts, ``perpendicular_depth_down_m``,
        ``perpendicular_depth_up_m`` (under the down-dip and up-dip shots) and the vertical
        depths ``vertical_depth_*_m = perpendicular / cos(dip)``.

    Notes
    -----
    ``dip = (asin(V1/a_d) - asin(V1/a_u))/2``, ``theta_c = (asin(V1/a_d) + asin(V1/a_u))/2``,
    ``V2 = V1 / sin(theta_c)``, ``h = t_i V1 / (2 cos(theta_c))`` (Telford, Geldart &
    Sheriff 1990, sec. 4.3.3, from memory).
    """
    v1 = float(v1_m_s)
    ad, au = float(apparent_down_m_s), float(apparent_up_m_s)
    if not (ad > v1 and au > v1):
        raise InputError(f"apparent velocities ({ad:.0f}, {au:.0f} m/s) must exceed the top-layer velocity "
                         f"({v1:.0f} m/s)")
    ed, eu = math.asin(v1 / ad), math.asin(v1 / au)
    dip = 0.5 * (ed - eu)
    theta = 0.5 * (ed + eu)
    out = {"velocity_m_s": v1 / math.sin(theta), "dip_deg": math.degrees(dip),
           "critical_angle_deg": math.degrees(theta)}
    for name, ti in (("down", intercept_down_s), ("up", intercept_up_s)):
        if ti is not None:
            h = float(ti) * v1 / (2 * math.cos(theta))
            out[f"perpendicular_depth_{name}_m"] = h
            out[f"vertical_depth_{name}_m"] = h / math.cos(dip)
    return out


def hidden_layer_thickness(spacing_m, v_top_m_s, v_below_m_s):
    """Rough thickness (m) below which a layer gives no first arrivals of its own.

    ``spacing / sqrt((Vn - V1)/(Vn + V1))`` — a rule of thumb (common practice): such a
    layer's branch would span less than about one geophone spacing.
    """
    return float(spacing_m) / math.sqrt((v_below_m_s - v_top_m_s) / (v_below_m_s + v_top_m_s))
