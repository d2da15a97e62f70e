#!/usr/bin/env python3
"""Baseline for the pipeline benchmark: the straightforward pandas/numpy/scipy way to compare
two lot files, and a second numeric cross-check of lotshift.

Usage: python3 benches/baseline.py A.csv B.csv  -> prints JSON with the results and the time.
Loads both files with pandas.read_csv, keeps the numeric columns, and computes Hotelling's T²,
F, p, the critical values, the simultaneous and Bonferroni intervals, Box's M, and Mardia's
skewness and kurtosis (skewness through the third-moment tensor with numpy.einsum: the O(n²)
pair sum is out of reach for 200,000 units in any language).
"""
import json
import sys
import time

import numpy as np
import pandas as pd
from scipy import stats


def main(a_path, b_path, alpha=0.05):
    t0 = time.perf_counter()
    a = pd.read_csv(a_path)
    b = pd.read_csv(b_path)
    cols = [c for c in a.columns if pd.api.types.is_numeric_dtype(a[c]) and c in b.columns]
    x = a[cols].dropna().to_numpy(dtype=float)
    y = b[cols].dropna().to_numpy(dtype=float)
    t_load = time.perf_counter() - t0
    n1, p = x.shape
    n2 = y.shape[0]
    n = n1 + n2
    m1, m2 = x.mean(0), y.mean(0)
    d = m2 - m1  # candidate − reference, as lotshift reports it
    s1 = np.cov(x, rowvar=False)
    s2 = np.cov(y, rowvar=False)
    sp = ((n1 - 1) * s1 + (n2 - 1) * s2) / (n - 2)
    t2 = n1 * n2 / n * float(d @ np.linalg.solve(sp, d))
    df2 = n - p - 1
    f = df2 / ((n - 2) * p) * t2
    pval = float(stats.f.sf(f, p, df2))
    crit_f = float(stats.f.isf(alpha, p, df2))
    crit_t2 = (n - 2) * p / df2 * crit_f
    se = np.sqrt((1 / n1 + 1 / n2) * np.diag(sp))
    c = np.sqrt(crit_t2)
    tb = stats.t.isf(alpha / (2 * p), n - 2)
    sim = np.column_stack([d - c * se, d + c * se])
    bon = np.column_stack([d - tb * se, d + tb * se])
    v1, v2 = n1 - 1, n2 - 1
    box_m = (v1 + v2) * np.linalg.slogdet(sp)[1] - v1 * np.linalg.slogdet(s1)[1] - v2 * np.linalg.slogdet(s2)[1]
    mardia = []
    for z0 in (x, y):
        zc = z0 - z0.mean(0)
        cov_n = zc.T @ zc / len(zc)
        z = np.linalg.solve(np.linalg.cholesky(cov_n), zc.T).T
        m3 = np.einsum("ia,ib,ic->abc", z, z, z, optimize=True) / len(z)
        b1 = float((m3**2).sum())
        b2 = float(((z**2).sum(1) ** 2).mean())
        mardia.append({"skewness": b1, "kurtosis": b2})
    total = time.perf_counter() - t0
    print(json.dumps({
        "seconds": total, "load_seconds": t_load, "t2": t2, "f": f, "p_value": pval,
        "critical_t2": crit_t2, "simultaneous": sim.tolist(), "bonferroni": bon.tolist(),
        "box_m": float(box_m), "mardia": mardia,
    }))


if __name__ == "__main__":
    main(sys.argv[1], sys.argv[2])
