"""A plain, competent numpy/scipy implementation of frothline's per-probe analysis, used as
the speed reference for `frothline replay` (bench/replay_vs_numpy.sh).

Per probe over the whole record: threshold each tip at 50 % between its two levels (levels
from the 5th/95th percentiles of the signal), void fraction, bubble count rate, bubble chord
times, the normalised cross-correlation of leading and trailing phases over lags 0..L with
scipy.signal.correlate(method="fft"), parabolic peak refinement, and the turbulence
intensity Tu = 0.851 sqrt(tau05^2 - T05^2) / T from the auto- and cross-correlation widths.
"""
import sys
import tomllib

import numpy as np
from scipy.io import wavfile
from scipy.signal import correlate


def phases(x, air_is_high=True):
    lo, hi = np.percentile(x, [5, 95])
    thr = 0.5 * (lo + hi)
    return (x > thr) if air_is_high else (x < thr)


def half_width(r, start):
    """First lag after `start` where r falls to half of r[start], linearly interpolated."""
    target = 0.5 * r[start]
    below = np.nonzero(r[start:] <= target)[0]
    if below.size == 0:
        return np.nan
    k = start + below[0]
    if k == 0:
        return 0.0
    return k - 1 + (r[k - 1] - target) / (r[k - 1] - r[k])


def analyse(a, b, fs, max_lag):
    n = a.size
    c = a.mean()
    edges = np.diff(a.astype(np.int8))
    starts = np.nonzero(edges == 1)[0] + 1
    ends = np.nonzero(edges == -1)[0] + 1
    if ends.size and starts.size and ends[0] < starts[0]:
        ends = ends[1:]
    m = min(starts.size, ends.size)
    chords = (ends[:m] - starts[:m]) / fs
    f = ends.size / (n / fs)
    out = {"C": c, "F": f, "chord_mean": chords.mean() if m else np.nan}
    if b is None:
        return out
    az = a - a.mean()
    bz = b - b.mean()
    xc = correlate(bz, az, mode="full", method="fft")[n - 1 : n + max_lag]
    ac = correlate(az, az, mode="full", method="fft")[n - 1 : n + max_lag]
    norm = np.sqrt((az * az).sum() * (bz * bz).sum())
    xc = xc / norm
    ac = ac / ac[0]
    k = int(np.argmax(xc))
    if 0 < k < max_lag:
        y0, y1, y2 = xc[k - 1], xc[k], xc[k + 1]
        d = 0.5 * (y0 - y2) / (y0 - 2 * y1 + y2)
    else:
        d = 0.0
    t = (k + d) / fs
    t05 = half_width(ac, 0) / fs
    # half width at half maximum of the cross-correlation peak, above the peak lag
    tau05 = (half_width(xc, k) - k) / fs if k < max_lag else np.nan
    tu = 0.851 * np.sqrt(tau05**2 - t05**2) / t if tau05 > t05 and t > 0 else np.nan
    out.update({"T": t, "R": xc[k], "Tu": tu})
    return out


def main(wav_path, layout_path, max_lag):
    fs, data = wavfile.read(wav_path)
    with open(layout_path, "rb") as f:
        layout = tomllib.load(f)
    results = []
    for p in layout["probe"]:
        a = phases(data[:, p["leading"]], p.get("air_is_high", True)).astype(np.float64)
        b = None
        if "trailing" in p:
            b = phases(data[:, p["trailing"]], p.get("air_is_high", True)).astype(np.float64)
        r = analyse(a, b, fs, max_lag)
        if "T" in r and r["T"] > 0:
            r["V"] = p["tip_spacing_mm"] * 1e-3 / r["T"]
        results.append((p["name"], r))
    for name, r in results:
        print(name, " ".join(f"{k}={v:.4g}" for k, v in r.items()))


if __name__ == "__main__":
    main(sys.argv[1], sys.argv[2], int(sys.argv[3]) if len(sys.argv) > 3 else 256)
