"""Reference least squares for the `lifeledger fit` tests, in numpy.

Called by tests/fit_larson_miller.rs and tests/fit_norton.rs with one JSON
argument, a job:

    {"model": "lm", "csv": PATH, "constant": null | C, "order": 1..3}
    {"model": "norton", "csv": PATH}

It reads the CSV itself (its own parser and unit conversions, written from
the documented file format, not from the Rust code), builds the design
matrix, and prints one JSON object:

    beta, se, cov, see, rss, dof, r2, fitted, residuals, leverage,
    standardized, score_bic, score_aic

Method: numpy.linalg.lstsq on the column-scaled design matrix for the
coefficients; the covariance s^2 (X^T X)^-1 from the SVD of the same
matrix, (X^T X)^-1 = D^-1 V S^-2 V^T D^-1, which is the same quantity as
numpy.linalg.inv(X.T @ X) without squaring the condition number (the
cubic Larson-Miller design is ill-conditioned enough that inv(X.T @ X)
alone would lose about eight digits). Leverages are the row sums of U^2.
"""

import csv
import json
import math
import sys

import numpy as np

R = 8.314462618  # J/(mol K), CODATA 2018
PSI_MPA = 6.894757e-3  # NIST SP 811: 1 psi = 6.894757 kPa


def read(path):
    with open(path, newline="") as f:
        lines = [l for l in f if l.strip() and not l.lstrip().startswith("#")]
    rows = list(csv.reader(lines))
    head = [h.strip().lower() for h in rows[0]]
    out = []
    for r in rows[1:]:
        rec = dict(zip(head, (v.strip() for v in r)))
        if "temperature_k" in rec:
            t = float(rec["temperature_k"])
        elif "temperature_c" in rec:
            t = float(rec["temperature_c"]) + 273.15
        else:
            t = (float(rec["temperature_f"]) + 459.67) / 1.8
        if "stress_mpa" in rec:
            s = float(rec["stress_mpa"])
        elif "stress_ksi" in rec:
            s = float(rec["stress_ksi"]) * PSI_MPA * 1e3
        else:
            s = float(rec["stress_psi"]) * PSI_MPA
        if "rupture_h" in rec:
            v = float(rec["rupture_h"])
        elif "rate_per_h" in rec:
            v = float(rec["rate_per_h"])
        elif "rate_per_s" in rec:
            v = float(rec["rate_per_s"]) * 3600.0
        else:
            v = float(rec["rate_percent_per_h"]) * 0.01
        out.append((t, s, v))
    return np.array(out, dtype=float)


def solve(X, y, tss_y):
    n, p = X.shape
    norms = np.linalg.norm(X, axis=0)
    Xs = X / norms
    beta_s, _, rank, _ = np.linalg.lstsq(Xs, y, rcond=None)
    assert rank == p, "rank deficient"
    beta = beta_s / norms
    fitted = X @ beta
    res = y - fitted
    rss = float(res @ res)
    dof = n - p
    U, S, Vt = np.linalg.svd(Xs, full_matrices=False)
    xtx_inv = (Vt.T @ np.diag(1.0 / S**2) @ Vt) / np.outer(norms, norms)
    lev = np.sum(U**2, axis=1)
    out = {
        "beta": beta.tolist(),
        "fitted": fitted.tolist(),
        "residuals": res.tolist(),
        "leverage": lev.tolist(),
        "rss": rss,
        "dof": dof,
        "score_bic": n * math.log(rss / n) + p * math.log(n) if rss > 0 else None,
        "score_aic": n * math.log(rss / n) + 2 * p if rss > 0 else None,
    }
    if dof > 0:
        s2 = rss / dof
        cov = s2 * xtx_inv
        out["cov"] = cov.tolist()
        out["se"] = np.sqrt(np.diag(cov)).tolist()
        out["see"] = math.sqrt(s2)
        out["standardized"] = (res / (math.sqrt(s2) * np.sqrt(1.0 - lev))).tolist()
        out["r2"] = 1.0 - rss / tss_y
    return out


def main():
    job = json.loads(sys.argv[1])
    d = read(job["csv"])
    T, s, v = d[:, 0], d[:, 1], d[:, 2]
    if job["model"] == "lm":
        x = np.log10(s)
        order = job["order"]
        cols = [x**j / T for j in range(order + 1)]
        logt = np.log10(v)
        if job.get("constant") is None:
            cols.append(-np.ones_like(T))
            y = logt
        else:
            y = logt + job["constant"]
        X = np.column_stack(cols)
        tss = float(np.sum((logt - logt.mean()) ** 2))
    else:
        X = np.column_stack([np.ones_like(T), np.log(s), -1.0 / (R * T)])
        y = np.log(v)
        tss = float(np.sum((y - y.mean()) ** 2))
    print(json.dumps(solve(X, y, tss)))


if __name__ == "__main__":
    main()
