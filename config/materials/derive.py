#!/usr/bin/env python3
"""Derive the Larson-Miller master curves (and local Norton laws) of the
material library from the reference rupture strengths kept in each TOML file.

Usage (from the repository root or anywhere):

    python3 config/materials/derive.py            # print fits, change nothing
    python3 config/materials/derive.py --write    # rewrite the derived lines
    python3 config/materials/derive.py --check    # exit 1 if a file is stale or misses the 5 % rule
    python3 config/materials/derive.py --scan-c   # also print max error vs C

Needs Python >= 3.11 (tomllib) and numpy.

What is derived, and how
------------------------
Larson-Miller parameter  P = T_K * (C + log10 t_h).
Master curve             P = a0 + a1*x + a2*x^2 (+ a3*x^3),  x = log10(sigma/MPa).

* C is NOT fitted here: it is read from `constant_c` in the file (fixed per
  grade; the reason is in the comment above it). Policy: C = 20, the
  conventional value for ferritic steels, wherever the curve then reproduces
  every reference point within the acceptance (ACCEPT_PCT, 5 % in stress);
  otherwise the lowest integer C (with the lowest order) at which every point
  is within the acceptance is written into the file by hand (see --scan-c).
  The lowest such C is the conservative one: it gives the shortest lives
  beyond the longest reference time, where no point checks the curve.
  (304H, 347H, 9Cr-1Mo-V and P235GH were fitted under an earlier rule, the
  integer C that minimises the largest error; they meet the 5 % rule too and
  are kept as they are, so that their results do not move.)
* The polynomial order is the number of entries in `coefficients` minus one,
  as already present in the file (2 normally, 3 only where needed).
* The coefficients are the ordinary least-squares fit of P against x over the
  reference points of the grade (numpy.polyfit), i.e. the error is minimised
  in P, and then checked in stress.
* A reference point may carry `dropped = "reason"`: it is then left out of the
  fit, the ranges and the acceptance, but stays in the file and is still
  compared with the curve (by this script and by `lifeledger materials show`),
  so the reason and the size of the miss stay visible. Drop a point only with
  a reason that holds for the point itself, never to make a fit pass.
* temperature_range_k = span of the reference temperatures.
* stress_range_mpa = span of the reference stresses, widened (if needed) to
  also contain the mean-curve stress at every reference point, so that every
  reference point can be evaluated inside the declared range. Rounded outward
  to 0.1 MPa.
* The fit check inverts the curve at each reference (T, t) and compares the
  mean-curve stress with the reference stress; the largest |error| in percent
  is written into the `source` text. --check fails when a file is stale or
  when a point that is not dropped misses by more than ACCEPT_PCT (the
  library rule, also enforced by tests/material_library.rs, which runs
  `derive.py --check`).

Local Norton law (the [norton] block, only where the file has one)
------------------------------------------------------------------
No Norton constants for these grades were recalled with enough confidence to
quote, so the [norton] block is derived from the mean master curve itself,
assuming the Monkman-Grant relation  eps_min * t_r = C_MG:

* anchor point: the 100 000 h reference point at the median temperature of the
  grade's 100 000 h points (or of all points if there are none);
* n = -dP/dx / T                (stress slope of log t_r on the curve);
* Q = ln(10) * R * P            (apparent activation energy of t_r at fixed stress);
* A = (C_MG / t_r) / (sigma^n * exp(-Q / (R*T)))  at the anchor point;
* C_MG = 0.03 (assumption: published Monkman-Grant products for steels are
  commonly quoted in the range ~0.01-0.1, from memory).

This law is a tangent to the rupture surface at the anchor point; it is a
screening estimate of minimum creep rate, not a measured Norton law, and the
block says so with `basis = "derived_from_rupture"`: creep strain computed
with it restates the life fraction and is no independent evidence, which
every screen of lifeledger that shows strain points out.
"""

from __future__ import annotations

import argparse
import math
import pathlib
import re
import sys
import tomllib

import numpy as np

HERE = pathlib.Path(__file__).resolve().parent
R_GAS = 8.314462618  # J/(mol K), CODATA 2018 exact value
C_MG = 0.03  # Monkman-Grant product, assumption (see module docstring)
ACCEPT_PCT = 5.0  # largest |stress error| of the mean curve at a reference point, %


def poly(coeffs, x):
    """coeffs = [a0, a1, ...] (ascending)."""
    return sum(c * x**i for i, c in enumerate(coeffs))


def dpoly(coeffs, x):
    return sum(i * c * x ** (i - 1) for i, c in enumerate(coeffs) if i > 0)


def invert(coeffs, p_target, x_guess):
    """Solve P(x) = p_target for x; the real root nearest x_guess."""
    c = list(coeffs)
    c[0] -= p_target
    roots = np.roots(c[::-1])
    real = [r.real for r in roots if abs(r.imag) < 1e-9]
    if not real:
        return None
    return min(real, key=lambda r: abs(r - x_guess))


def round_sig(v, sig=10):
    if v == 0.0:
        return 0.0
    return float(f"{v:.{sig}g}")


def fmt(v):
    """A TOML float literal (always with '.' or an exponent)."""
    s = repr(float(v))
    if "e" in s or "E" in s or "." in s or "inf" in s or "nan" in s:
        return s
    return s + ".0"


def fit_grade(path: pathlib.Path, c_override=None):
    data = tomllib.loads(path.read_text())
    lm = data["larson_miller"]
    c = lm["constant_c"] if c_override is None else c_override
    order = len(lm["coefficients"]) - 1
    all_refs = data.get("reference_rupture_strengths", [])
    refs = [r for r in all_refs if not r.get("dropped")]
    if len(refs) < order + 2:
        raise SystemExit(f"{path.name}: {len(refs)} reference points are too few for order {order}")
    t_k = np.array([r["temperature_c"] + 273.15 for r in refs])
    hours = np.array([r["hours"] for r in refs])
    sigma = np.array([r["stress_mpa"] for r in refs])
    x = np.log10(sigma)
    p = t_k * (c + np.log10(hours))
    coeffs = [round_sig(v) for v in np.polyfit(x, p, order)[::-1]]

    def curve_row(r):
        ti = r["temperature_c"] + 273.15
        si = r["stress_mpa"]
        xf = invert(coeffs, ti * (c + math.log10(r["hours"])), math.log10(si))
        sf = 10.0**xf if xf is not None else float("nan")
        return (r["temperature_c"], r["hours"], si, sf, 100.0 * (sf - si) / si, r.get("dropped"))

    rows = [curve_row(r) for r in all_refs]
    fitted = [row[3] for row in rows if not row[5]]
    max_err = max(abs(r[4]) for r in rows if not r[5])
    rms_p = float(np.sqrt(np.mean((np.array([poly(coeffs, xi) for xi in x]) - p) ** 2)))

    lo = math.floor(min(sigma.min(), min(fitted)) * 10.0) / 10.0
    hi = math.ceil(max(sigma.max(), max(fitted)) * 10.0) / 10.0
    s_range = [lo, hi]
    t_range = [round(float(t_k.min()), 2), round(float(t_k.max()), 2)]

    # P must fall with stress over the whole declared stress range.
    xs = np.linspace(math.log10(lo), math.log10(hi), 400)
    slopes = [dpoly(coeffs, xx) for xx in xs]
    monotone = all(s < 0.0 for s in slopes)

    out = dict(
        data=data, c=c, order=order, coeffs=coeffs, rows=rows, max_err=max_err,
        rms_p=rms_p, s_range=s_range, t_range=t_range, monotone=monotone, n_refs=len(refs),
        n_dropped=len(all_refs) - len(refs),
    )

    if "norton" in data:
        at_1e5 = [r for r in refs if r["hours"] == 1e5] or refs
        at_1e5 = sorted(at_1e5, key=lambda r: r["temperature_c"])
        anchor = at_1e5[(len(at_1e5) - 1) // 2]
        ta = anchor["temperature_c"] + 273.15
        # Use the mean-curve stress at the anchor (T, t), so the law is a
        # tangent to the fitted surface, not to the raw point.
        pa = ta * (c + math.log10(anchor["hours"]))
        xa = invert(coeffs, pa, math.log10(anchor["stress_mpa"]))
        sa = 10.0**xa
        n = -dpoly(coeffs, xa) / ta
        q = math.log(10.0) * R_GAS * pa
        rate = C_MG / anchor["hours"]
        a = rate / (sa**n * math.exp(-q / (R_GAS * ta)))
        out["norton"] = dict(
            a=round_sig(a, 6), n=round(n, 3), q=round(q, -2),
            anchor=(float(anchor["temperature_c"]), float(anchor["hours"]), float(sa)),
        )
    return out


def lm_source(f):
    minimum = f["data"]["larson_miller"]["minimum"]
    if minimum["rule"] == "stress_factor":
        mtext = (f"minimum curve = {minimum['factor']} x mean stress (a -{round((1 - minimum['factor']) * 100)} % "
                 "scatter band, the usual EN/ECCC convention for minimum vs mean rupture strength)")
    else:
        mtext = f"minimum curve = mean log10 t_r minus {minimum['offset']}"
    dropped = (f" ({f['n_dropped']} more dropped, each with its reason)" if f["n_dropped"] else "")
    return (
        f"Fitted by config/materials/derive.py (least squares of P = T(C + log10 t) on log10 stress, "
        f"order {f['order']}, C = {f['c']:g} fixed) to the {f['n_refs']} reference points below{dropped}; "
        f"max |stress error| {f['max_err']:.1f} %; {mtext}. Screening curve: the reference points "
        f"are mostly from memory, see their sources."
    )


def norton_source(f):
    t, h, s = f["norton"]["anchor"]
    return (
        f"Derived by config/materials/derive.py from the mean Larson-Miller curve at {t:g} C, "
        f"{h:g} h ({s:.1f} MPa): n = -dP/dx / T, Q = ln(10) R P, A from an assumed Monkman-Grant "
        f"product eps_min * t_r = {C_MG:g} (typical published range ~0.01-0.1, from memory). Local "
        f"tangent to the rupture curve, not a measured Norton law."
    )


def rewritten_text(path, f):
    """Return the file text with the derived lines replaced."""
    lines = path.read_text().splitlines()
    section = None
    want_lm = {
        "coefficients": "[" + ", ".join(fmt(v) for v in f["coeffs"]) + "]",
        "stress_range_mpa": "[" + ", ".join(fmt(v) for v in f["s_range"]) + "]",
        "temperature_range_k": "[" + ", ".join(fmt(v) for v in f["t_range"]) + "]",
        "source": toml_str(lm_source(f)),
    }
    want_no = {}
    if "norton" in f:
        no = f["norton"]
        want_no = {
            "basis": toml_str("derived_from_rupture"),
            "a_per_h": fmt(no["a"]),
            "n": fmt(no["n"]),
            "q_j_per_mol": fmt(no["q"]),
            "source": toml_str(norton_source(f)),
        }
    key_re = re.compile(r"^([A-Za-z_][A-Za-z0-9_]*)\s*=")
    out = []
    for line in lines:
        stripped = line.strip()
        if stripped.startswith("["):
            section = stripped.strip("[]").strip()
        m = key_re.match(line)
        if m:
            key = m.group(1)
            table = {"larson_miller": want_lm, "norton": want_no}.get(section)
            if table is not None and key in table:
                line = f"{key} = {table[key]}"
        out.append(line)
    return "\n".join(out) + "\n"


def toml_str(s):
    return '"' + s.replace("\\", "\\\\").replace('"', '\\"') + '"'


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--write", action="store_true", help="rewrite the derived lines in the TOML files")
    ap.add_argument("--check", action="store_true", help="exit 1 if any TOML file differs from the derivation")
    ap.add_argument("--scan-c", action="store_true", help="print max fit error for C = 10..36 (information only)")
    ap.add_argument("files", nargs="*", help="TOML files (default: all in this directory)")
    args = ap.parse_args()

    files = [pathlib.Path(p) for p in args.files] or sorted(HERE.glob("*.toml"))
    stale = []
    failing = []
    summary = []
    for path in files:
        f = fit_grade(path)
        g = f["data"]["grade"]
        print(f"== {g}  ({path.name})")
        print(f"   C = {f['c']:g}, order {f['order']}, coefficients [a0, a1, ...] = {f['coeffs']}")
        print(f"   rms residual in P = {f['rms_p']:.1f}; P falls with stress over range: {f['monotone']}")
        print(f"   stress_range_mpa = {f['s_range']}, temperature_range_k = {f['t_range']}")
        print("   T/C      hours      ref MPa   curve MPa   error %")
        for t, h, s, sf, e, dropped in f["rows"]:
            note = f"   dropped: {dropped}" if dropped else ""
            print(f"   {t:6.1f}  {h:9.0f}  {s:9.1f}  {sf:9.1f}  {e:+7.2f}{note}")
        print(f"   max |error| = {f['max_err']:.2f} % (points not dropped)")
        if "norton" in f:
            no = f["norton"]
            print(f"   norton: A = {no['a']:.6g} 1/h/MPa^n, n = {no['n']}, Q = {no['q']:.0f} J/mol (anchor {no['anchor']})")
        if args.scan_c:
            scan = []
            for cc in range(10, 37):
                scan.append(f"{cc}:{fit_grade(path, float(cc))['max_err']:.1f}")
            print("   max |error| % vs C:", " ".join(scan))
        if not f["monotone"]:
            print("   WARNING: master curve is not monotone over its stress range")
        if f["max_err"] > ACCEPT_PCT:
            print(f"   FAILS ACCEPTANCE: a reference point is missed by more than {ACCEPT_PCT:g} %")
            failing.append(path.name)
        if not f["monotone"]:
            failing.append(path.name)
        new = rewritten_text(path, f)
        if new != path.read_text():
            stale.append(path.name)
            if args.write:
                path.write_text(new)
                print("   written")
        summary.append((g, f))
    print()
    print(f"{'grade':<14} {'T range C':<14} {'stress range MPa':<18} {'max err %':>9}")
    for g, f in summary:
        t0, t1 = (v - 273.15 for v in f["t_range"])
        print(f"{g:<14} {t0:5.0f}-{t1:<8.0f} {f['s_range'][0]:6.1f}-{f['s_range'][1]:<11.1f} {f['max_err']:9.2f}")
    if args.check and (stale or failing):
        if stale:
            print("stale (run derive.py --write):", ", ".join(stale))
        if failing:
            print(f"fails the library rule (every reference point within {ACCEPT_PCT:g} %, "
                  "P falling with stress):", ", ".join(sorted(set(failing))))
        return 1
    return 0


if __name__ == "__main__":
    sys.exit(main())
