"""First-break picking: onset error against signal-to-noise ratio, and speed.

Prints three tables:

1. The onset error on a causal wavelet (Berlage, 100 Hz, Aldridge 1990) in white noise
   at 0.25 ms sampling, for signal-to-noise ratios (peak over noise standard deviation)
   of 2, 3, 5, 10 and 30: the AIC onset of a single trace alone (Maeda 1985, in the
   energy-ratio window, on the low-passed trace), and the whole picker on gathers in
   which every other trace is clear (so the gather's first-break waveform exists) and
   the others have the stated ratio; with the share of errors within 2 sigma.
2. The error of the first-break waveform's own onset from gather to gather (what
   ``tomo.records.picker.TEMPLATE_ONSET_SIGMA`` is taken from).
3. Picking speed, traces per second on one core (goal: above 5,000), for gathers of 48
   traces of 1024 samples.

Run: python benchmarks/picking.py [--quick]
"""

from __future__ import annotations

import os

# one core: keep numpy's BLAS from spreading the matrix products over threads
for name in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(name, "1")

import argparse  # noqa: E402
import time  # noqa: E402

import numpy as np  # noqa: E402

from tomo.records import onset  # noqa: E402
from tomo.records.picker import HIGHCUT_PERIODS, pick_gather  # noqa: E402
from tomo.records.synthetic import RecordSettings, berlage_wavelet, synthetic_gather  # noqa: E402

DT = 0.25e-3
FREQ = 100.0
SNRS = (2, 3, 5, 10, 30)


def aic_alone(rng, snr, count):
    """Errors (ms) of the two-step AIC onset on single traces."""
    n = 800
    t = np.arange(n) * DT
    t0 = rng.uniform(0.03, 0.15, count)
    x = snr * berlage_wavelet(t[None, :] - t0[:, None], FREQ) + rng.normal(size=(count, n))
    f = onset.lowpass(x, DT, HIGHCUT_PERIODS * FREQ)
    period = int(round(1 / (FREQ * DT)))
    ratio = onset.energy_ratio_from_start(f, period, floor=0.5)
    rough = np.argmax(ratio, axis=1)
    k = np.empty(count)
    for i in range(count):
        lo = max(rough[i] - 2 * period, 0)
        k[i] = lo + np.argmin(onset.aic(f[i:i + 1, lo:rough[i] + period // 2])[0])
    return (k * DT - t0) * 1e3


def picker_in_gather(rng, snr, gathers):
    """Errors and sigmas (ms) of the picker on the odd traces of gathers whose even
    traces are clear (signal-to-noise 30), with a straight moveout of 1500 m/s."""
    errors, sigmas, picked, total = [], [], 0, 0
    rx = np.arange(1, 25) * 2.0
    amplitude = np.where(np.arange(24) % 2 == 0, 30.0, snr)
    for _ in range(gathers):
        times = 0.01 + rx / 1500.0 + rng.uniform(0, DT)
        g = synthetic_gather(0.0, 0.0, rx, np.zeros(24), times, RecordSettings(snr=1.0, frequency_hz=FREQ), rng=rng,
                             reference_offset_m=1.0)
        # replace the 1/offset amplitudes by the two levels wanted
        clean = berlage_wavelet(g.time_s[None, :] - times[:, None], FREQ)
        g.data = amplitude[:, None] * clean + rng.normal(size=g.data.shape)
        p = pick_gather(g)
        odd = np.arange(1, 24, 2)
        ok = odd[p.picked[odd]]
        total += odd.size
        picked += ok.size
        errors += list((p.time_s[ok] - times[ok]) * 1e3)
        sigmas += list(p.sigma_s[ok] * 1e3)
    return np.array(errors), np.array(sigmas), picked / total


def template_onset(rng, gathers):
    """Per-gather median error (ms) of the clear picks: the waveform's onset error."""
    rx = np.arange(48) * 2.5
    medians = []
    for _ in range(gathers):
        s = rng.uniform(-5, 122)
        x = np.abs(rx - s)
        true = np.minimum(x / 450.0, x / 2500.0 + 2 * 5.0 * np.sqrt(2500.0**2 - 450.0**2) / (450.0 * 2500.0))
        true = true + rng.uniform(0, DT)
        g = synthetic_gather(s, 0.0, rx, np.zeros(48), true, RecordSettings(snr=3.0), rng=rng, reference_offset_m=123)
        p = pick_gather(g)
        ok = p.picked & (p.snr > 20)
        medians.append(np.median(p.time_s[ok] - true[ok]) * 1e3)
    return np.array(medians)


def speed(rng, gathers):
    """Traces per second of pick_gather on 48-trace, 1024-sample gathers."""
    rx = np.arange(48) * 2.5
    made = []
    for _ in range(gathers):
        s = rng.uniform(-5, 122)
        times = np.abs(rx - s) / 1800.0 + 0.004
        made.append(synthetic_gather(s, 0.0, rx, np.zeros(48), times, RecordSettings(snr=3.0, record_s=1024 * DT),
                                     rng=rng, reference_offset_m=123))
    pick_gather(made[0])                      # warm-up (imports, filter design)
    start = time.perf_counter()
    for g in made:
        pick_gather(g)
    elapsed = time.perf_counter() - start
    return gathers * 48 / elapsed, made[0].n_samples


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="fewer traces (a rough table in a few seconds)")
    args = parser.parse_args(argv)
    rng = np.random.default_rng(2026)
    count, gathers = (200, 10) if args.quick else (1000, 40)
    print(f"onset error (ms) on a {FREQ:g} Hz Berlage wavelet in white noise, {DT * 1e3:g} ms sampling")
    print(f"{'SNR':>4} | {'AIC alone: median':>17} {'p90 |err|':>9} | {'picker: picked':>14} {'median':>7} "
          f"{'p90 |err|':>9} {'<= 1 ms':>8} {'<= 2 sigma':>10} {'sigma':>6}")
    for snr in SNRS:
        a = aic_alone(rng, snr, count)
        e, s, share = picker_in_gather(rng, snr, gathers)
        print(f"{snr:>4} | {np.median(a):>17.3f} {np.percentile(np.abs(a), 90):>9.3f} | {share:>14.1%} "
              f"{np.median(e):>7.3f} {np.percentile(np.abs(e), 90):>9.3f} {np.mean(np.abs(e) <= 1):>8.1%} "
              f"{np.mean(np.abs(e) <= 2 * s):>10.1%} {np.median(s):>6.3f}")
    m = template_onset(rng, gathers)
    print(f"\nfirst-break waveform onset, per gather ({m.size} gathers of a line at SNR 3 at the far offsets): "
          f"mean {m.mean():+.3f} ms, spread {m.std():.3f} ms, RMS {np.sqrt(np.mean(m**2)) / (DT * 1e3):.2f} samples")
    rate, samples = speed(rng, 20 if args.quick else 100)
    print(f"\nspeed: {rate:,.0f} traces per second on one core ({samples}-sample traces, 48 per gather; goal 5,000)")


if __name__ == "__main__":
    main()
