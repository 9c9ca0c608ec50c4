#!/usr/bin/env python3
"""Reference for the core's profile fit (tests/profile_scipy.rs writes the cases).

For every case: the same points, the same rule as core/src/profile.rs (points with y > 0
below the first C >= 0.9 are fitted; Y90 is held between the highest of them and that
first point; equal weights first, then two passes weighted from the previous model's C,
w = 1 / (k (f (1 - f))^2), k = sigma^2 / (c (1 - c))^2, C kept in [0.02, 0.98]), fitted
by scipy.optimize.least_squares (trust-region reflective, bounds) in float64. Checks:
n within 1e-3, D' within 1e-3 relative, Y90 within 0.1 mm, the standard errors within 2 %
of scipy's (J^T J)^-1 (scaled by S/dof without standard errors), the chi2 table against
scipy.stats.chi2.ppf(0.99, dof).

Usage: profile_vs_scipy.py CASES.json   (exit 0 when every check holds)
"""
import json
import sys

import numpy as np
from scipy import optimize, stats

C90 = 0.9
FLOOR = 0.02


def spread(c):
    c = np.clip(c, FLOOR, 1.0 - FLOOR)
    return c * (1.0 - c)


def model(shape, theta, y):
    a, p = theta
    if shape == "power_law":
        g = np.log(y) - a
    else:
        g = y * np.exp(-a) - 1.0
    return C90 * np.exp(p * g)


def fit(shape, y, c, w, bracket, start):
    lo = [bracket[0], 0.01]
    hi = [bracket[1], 100.0 if shape == "power_law" else 1000.0]
    x0 = np.clip(start, lo, hi)
    sw = np.sqrt(w)
    res = optimize.least_squares(
        lambda th: sw * (c - model(shape, th, y)),
        x0,
        bounds=(lo, hi),
        method="trf",
        xtol=1e-14,
        ftol=1e-14,
        gtol=1e-14,
        max_nfev=10000,
    )
    return res


def reference(case, shape):
    y = np.array(case["y"], dtype=float)
    c = np.array(case["c"], dtype=float)
    s = np.array(case["sigma"], dtype=float)
    order = np.argsort(y, kind="stable")
    y, c, s = y[order], c[order], s[order]
    j = int(np.argmax(c >= C90))
    assert c[j] >= C90 and j >= 1
    known = bool(np.all(s[: j + 1] > 0))
    keep = (np.arange(len(y)) < j) & (y > 0)
    yf, cf, sf = y[keep], c[keep], s[keep]
    bracket = (np.log(y[j - 1]), np.log(y[j]))
    frac = (C90 - c[j - 1]) / (c[j] - c[j - 1])
    y90_0 = y[j - 1] + frac * (y[j] - y[j - 1])
    start = np.array([np.log(y90_0), 1.0])
    w = np.ones_like(yf)
    res = fit(shape, yf, cf, w, bracket, start)
    if known:
        kf = sf**2 / spread(cf) ** 2
        for _ in range(2):
            w = 1.0 / (kf * spread(model(shape, res.x, yf)) ** 2)
            res = fit(shape, yf, cf, w, bracket, res.x)
    jac = res.jac
    cov = np.linalg.inv(jac.T @ jac)
    dof = len(yf) - 2
    chi2 = float(np.sum(res.fun**2))
    if not known:
        cov = cov * chi2 / dof if dof > 0 else cov * np.nan
    a, p = res.x
    y90 = np.exp(a)
    if shape == "power_law":
        shape_value, se_shape = p, np.sqrt(cov[1, 1])
    else:
        shape_value, se_shape = 1.0 / p, np.sqrt(cov[1, 1]) / p**2
    return y90, shape_value, y90 * np.sqrt(cov[0, 0]), se_shape, chi2


def main():
    doc = json.load(open(sys.argv[1]))
    failures = []
    want = [stats.chi2.ppf(0.99, d) for d in range(1, len(doc["chi2_99"]) + 1)]
    for d, (got, ref) in enumerate(zip(doc["chi2_99"], want), start=1):
        if abs(got - ref) > 1e-3:
            failures.append(f"chi2_99[{d}]: {got} vs scipy {ref:.4f}")
    worst = {"n": 0.0, "dp": 0.0, "y90": 0.0, "se": 0.0}
    compared = 0
    for i, case in enumerate(doc["cases"]):
        for shape in ("power_law", "exponential"):
            core = case[shape]
            if not core["converged"]:
                continue
            y90, sh, se_y, se_sh, chi2 = reference(case, shape)
            compared += 1
            dy = abs(core["y90"] - y90)
            worst["y90"] = max(worst["y90"], dy)
            if dy > 0.1:
                failures.append(f"case {i} {shape}: Y90 {core['y90']} vs scipy {y90:.4f}")
            if shape == "power_law":
                dn = abs(core["shape"] - sh)
                worst["n"] = max(worst["n"], dn)
                if dn > worst.get("n_case", (0.0,))[0]:
                    worst["n_case"] = (dn, i, core["shape"], core["se_shape"])
                if dn > 1e-3:
                    failures.append(f"case {i}: n {core['shape']} vs scipy {sh:.5f}")
            else:
                dd = abs(core["shape"] / sh - 1.0)
                worst["dp"] = max(worst["dp"], dd)
                if dd > 1e-3:
                    failures.append(f"case {i}: D' {core['shape']} vs scipy {sh:.5f}")
            for name, ref in (("se_y90", se_y), ("se_shape", se_sh)):
                got = core[name]
                if got is None or not np.isfinite(ref):
                    if (got is None) != (not np.isfinite(ref)):
                        failures.append(f"case {i} {shape}: {name} {got} vs scipy {ref}")
                    continue
                rel = abs(got / ref - 1.0)
                worst["se"] = max(worst["se"], rel)
                if rel > 0.02:
                    failures.append(f"case {i} {shape}: {name} {got} vs scipy {ref:.5g}")
    print(
        f"scipy least_squares: {compared} fits compared; worst |dn| {worst['n']:.2e}, "
        f"|dD'/D'| {worst['dp']:.2e}, |dY90| {worst['y90']:.2e} mm, "
        f"standard errors {worst['se'] * 100:.2f} %"
    )
    if "n_case" in worst:
        dn, i, n, se = worst["n_case"]
        print(f"  largest |dn| in case {i}: n {n:.4f}, its standard error {se}")
    for f in failures[:40]:
        print("FAIL", f)
    print(f"{compared - len(failures)} passed, {len(failures)} failed")
    sys.exit(1 if failures else 0)


if __name__ == "__main__":
    main()
