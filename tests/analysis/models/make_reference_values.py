#!/usr/bin/python3
"""Generate tests/analysis/models/reference_values.csv: high-precision reference values
for lphi's special functions and magnetoconductance models.

Every value is computed with mpmath (Debian package python3-mpmath) working
at 50 significant digits or more, from the published formulas written out
literally (see analysis/magnetoconductance.hpp and the sources named there),
not from lphi's rearranged forms. Derivatives are mpmath's numerical
derivatives (mpmath.diff) of those formulas. The SI constants are the exact
2019 definitions of e and h.

Rows: function,a1,a2,a3,a4,value,scale
  function  which lphi function the row checks
  a1..a4    its arguments, printed so that they read back as the same doubles
  value     the reference value (20 significant digits)
  scale     the size the error is measured against: |value| normally; for
            functions that change sign (Hurwitz zeta, the spin-orbit forms)
            the sum of the magnitudes of the terms that are added; 0 marks an
            exact zero.

The script also checks the closed form f3(d) = -zeta(1/2, 1/2 + d) - 2 sqrt(d)
against direct summation of Kawabata's series and stops if they disagree.

Run:  /usr/bin/python3 tests/analysis/models/make_reference_values.py
"""

import csv
import math
import os

import mpmath
from mpmath import mp, mpf

mp.dps = 50
EXTRA_DPS = 40  # headroom for the cancellation in psi(1/2 + x) - ln x and f3; added to
                # whatever precision is current, so mpmath.diff keeps its own margin

E = mpf("1.602176634e-19")   # C, exact (SI 2019)
H = mpf("6.62607015e-34")    # J s, exact (SI 2019)
HBAR = H / (2 * mp.pi)
WL_UNIT = E**2 / (mp.pi * H)  # e^2/(pi h)


def bracket(x):
    """psi(1/2 + x) - ln x (HLN)."""
    with mp.extradps(EXTRA_DPS):
        x = mpf(x)
        return mpmath.digamma(mpf(1) / 2 + x) - mpmath.log(x)


def F(z):
    """F(z) = ln z + psi(1/2 + 1/z) (HLN 1980, Bergmann 1984)."""
    with mp.extradps(EXTRA_DPS):
        return mpmath.log(z) + mpmath.digamma(mpf(1) / 2 + 1 / z)


def f3(d):
    """Kawabata's f3 via the Hurwitz zeta closed form."""
    with mp.extradps(EXTRA_DPS):
        d = mpf(d)
        return -mpmath.zeta(mpf(1) / 2, mpf(1) / 2 + d) - 2 * mpmath.sqrt(d)


def f3_series(d):
    """Kawabata's series summed directly (mpmath.nsum with Levin-type extrapolation)."""
    d = mpf(d)
    term = lambda n: 2 * (mpmath.sqrt(n + 1 + d) - mpmath.sqrt(n + d)) - 1 / mpmath.sqrt(n + mpf(1) / 2 + d)
    return mpmath.nsum(term, [0, mpmath.inf], method="levin")


def b_field(length):
    return HBAR / (4 * E * mpf(length) ** 2)


def hln2d(b, alpha, lphi):
    if b == 0:
        return mpf(0)
    x = b_field(lphi) / abs(mpf(b))
    return mpf(alpha) * bracket(x)


def hln2d_so_terms(b, lphi, lso):
    """The three terms of -[F(B/B_phi)/2 - F(B/(B_phi+B_so)) - F(B/(B_phi+2B_so))/2]."""
    bb = abs(mpf(b))
    bphi, bso = b_field(lphi), b_field(lso)
    return [-F(bb / bphi) / 2, F(bb / (bphi + bso)), F(bb / (bphi + 2 * bso)) / 2]


def wire_lb2_inv(b, w):
    """1/L_B^2 with L_B^2 = 3 hbar^2 / (e^2 w^2 B^2)."""
    return (E**2 * mpf(w) ** 2 * mpf(b) ** 2) / (3 * HBAR**2)


def wire1d(b, lphi, w):
    """Delta G L / w in e^2/(pi h), Delta G = e^2/(pi hbar L)[L_phi - (1/L_phi^2 + 1/L_B^2)^(-1/2)]."""
    with mp.extradps(EXTRA_DPS):
        lphi = mpf(lphi)
        dg_times_l = E**2 / (mp.pi * HBAR) * (lphi - (1 / lphi**2 + wire_lb2_inv(b, w)) ** (-mpf(1) / 2))
        return dg_times_l / mpf(w) / WL_UNIT


def wire1d_so_terms(b, lphi, lso, w):
    """The two field-dependent terms of Pierre et al.'s form, each minus its B = 0 value."""
    with mp.extradps(EXTRA_DPS):
        lphi, lso = mpf(lphi), mpf(lso)
        pre = E**2 / (mp.pi * HBAR) / mpf(w) / WL_UNIT
        k = wire_lb2_inv(b, w)
        t = lambda kk: (1 / lphi**2 + 4 / (3 * lso**2) + kk) ** (-mpf(1) / 2)
        s = lambda kk: (1 / lphi**2 + kk) ** (-mpf(1) / 2)
        return [-pre * mpf(3) / 2 * (t(k) - t(0)), pre * mpf(1) / 2 * (s(k) - s(0))]


def kawabata3d(b, lphi, t):
    """t Delta sigma_3D in e^2/(pi h); Delta sigma_3D = e^2/(2 pi^2 hbar) sqrt(eB/hbar) f3(B_phi/B)."""
    if b == 0:
        return mpf(0)
    bb = abs(mpf(b))
    with mp.extradps(EXTRA_DPS):
        sigma3 = E**2 / (2 * mp.pi**2 * HBAR) * mpmath.sqrt(E * bb / HBAR) * f3(b_field(lphi) / bb)
        return mpf(t) * sigma3 / WL_UNIT


def d_ln(fun, length):
    """Derivative of fun(L) with respect to ln L, numerically at high precision."""
    with mp.extradps(EXTRA_DPS):
        return mpmath.diff(lambda u: fun(mpmath.exp(u)), mpmath.log(mpf(length)))


def logspace(lo, hi, n):
    return [10.0 ** (lo + (hi - lo) * i / (n - 1)) for i in range(n)]


rows = []


def add(name, args, value, scale=None):
    value = mpf(value)
    if scale is None:
        scale = abs(value)
    args = list(args) + [0.0] * (4 - len(args))
    rows.append([name] + [repr(float(a)) for a in args] + [mpmath.nstr(value, 20), mpmath.nstr(mpf(scale), 6)])


def main():
    # --- closed form of f3 against the series itself -----------------------
    for d in [0.0, 0.3, 1.0, 7.5, 20.0]:
        closed, direct = f3(d), f3_series(d)
        if abs(closed - direct) > mpf("1e-25") * abs(closed):
            raise SystemExit(f"f3 closed form disagrees with the series at d = {d}: {closed} vs {direct}")

    # --- wl_bracket and its derivative --------------------------------------
    xs = logspace(-3, 8, 441)
    xs += [7.0, 7.5, 7.9, 7.99, 7.999999, 8.0, 8.000001, 8.01, 8.1, 8.5, 9.0, 10.0, 12.0]
    xs += [math.nextafter(8.0, 0.0), 1e10, 1e12, 1e15]
    for x in xs:
        add("wl_bracket", [x], bracket(x))
        with mp.extradps(EXTRA_DPS):
            deriv = mpmath.psi(1, mpf(1) / 2 + mpf(x)) - 1 / mpf(x)
        add("wl_bracket_derivative", [x], deriv)

    # --- Hurwitz zeta(1/2, a) ------------------------------------------------
    for a in logspace(-3, 8, 221) + [0.25, 0.3, 0.35, 0.5, 1.0, 2.0, 7.5, 7.99, 8.0, 8.01, 9.0]:
        with mp.extradps(EXTRA_DPS):
            value = mpmath.zeta(mpf(1) / 2, mpf(a))
        # the leading term a^(-1/2) and the growth 2 sqrt(a) set the size of
        # the sum where it passes through zero (near a = 0.3)
        add("hurwitz_zeta_half", [a], value, abs(value) + 1 / mpmath.sqrt(mpf(a)))

    # --- Kawabata f3 and its derivative -------------------------------------
    ds = [0.0] + logspace(-8, 8, 321)
    ds += [0.5, 1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 7.0, 7.5, 7.9, 7.999999, 8.0, 8.000001, 8.5, 9.0, 10.0]
    ds += [math.nextafter(8.0, 0.0), math.nextafter(3.0, 0.0)]
    for d in ds:
        add("kawabata_f3", [d], f3(d))
        if d > 0:
            with mp.extradps(EXTRA_DPS):
                deriv = mpmath.diff(f3, mpf(d))
            add("kawabata_f3_derivative", [d], deriv)

    # --- models over the range fits visit ------------------------------------
    fields = logspace(-6, 1, 15) + [-1e-3, -0.5]
    lphis = [1e-8, 1e-7, 1e-6, 1e-5, 1e-4]
    lsos = [1e-8, 1e-7, 1e-6, 1e-5]
    for lphi in lphis:
        for b in fields:
            for alpha in [1.0, -0.5]:
                add("hln2d", [b, alpha, lphi], hln2d(b, alpha, lphi))
                add("hln2d_d_ln_lphi", [b, alpha, lphi], d_ln(lambda L: hln2d(b, alpha, L), lphi))
            add("hln2d_d_alpha", [b, 1.0, lphi], hln2d(b, 1.0, lphi))
            for lso in lsos:
                terms = hln2d_so_terms(b, lphi, lso)
                add("hln2d_so", [b, lphi, lso], sum(terms), sum(abs(t) for t in terms))
                dphi = d_ln(lambda L: sum(hln2d_so_terms(b, L, lso)), lphi)
                dso = d_ln(lambda L: sum(hln2d_so_terms(b, lphi, L)), lso)
                # the derivative terms scale like the value terms; use their magnitudes
                dphi_terms = [d_ln(lambda L, i=i: hln2d_so_terms(b, L, lso)[i], lphi) for i in range(3)]
                dso_terms = [d_ln(lambda L, i=i: hln2d_so_terms(b, lphi, L)[i], lso) for i in range(1, 3)]
                add("hln2d_so_d_ln_lphi", [b, lphi, lso], dphi, sum(abs(t) for t in dphi_terms))
                add("hln2d_so_d_ln_lso", [b, lphi, lso], dso, sum(abs(t) for t in dso_terms))
            for w in [5e-8, 1e-6]:
                add("wire1d", [b, lphi, w], wire1d(b, lphi, w))
                add("wire1d_d_ln_lphi", [b, lphi, w], d_ln(lambda L: wire1d(b, L, w), lphi))
                for lso in lsos:
                    terms = wire1d_so_terms(b, lphi, lso, w)
                    add("wire1d_so", [b, lphi, lso, w], sum(terms), sum(abs(t) for t in terms))
                    dphi_terms = [d_ln(lambda L, i=i: wire1d_so_terms(b, L, lso, w)[i], lphi) for i in range(2)]
                    dso = d_ln(lambda L: wire1d_so_terms(b, lphi, L, w)[0], lso)
                    add("wire1d_so_d_ln_lphi", [b, lphi, lso, w], sum(dphi_terms),
                        sum(abs(t) for t in dphi_terms))
                    add("wire1d_so_d_ln_lso", [b, lphi, lso, w], dso)
            for t in [1e-6, 2e-5]:
                add("kawabata3d", [b, lphi, t], kawabata3d(b, lphi, t))
                add("kawabata3d_d_ln_lphi", [b, lphi, t], d_ln(lambda L: kawabata3d(b, L, t), lphi))
    # exact zeros at B = 0
    add("hln2d", [0.0, 1.0, 1e-6], 0, 0)
    add("hln2d_so", [0.0, 1e-6, 1e-7], 0, 0)
    add("wire1d", [0.0, 1e-6, 1e-7], 0, 0)
    add("wire1d_so", [0.0, 1e-6, 1e-7, 1e-7], 0, 0)
    add("kawabata3d", [0.0, 1e-6, 1e-5], 0, 0)

    out = os.path.join(os.path.dirname(os.path.abspath(__file__)), "reference_values.csv")
    with open(out, "w", newline="") as f:
        f.write("# Generated by tests/analysis/models/make_reference_values.py (mpmath, >= 50 digits). Do not edit.\n")
        writer = csv.writer(f, lineterminator="\n")
        writer.writerow(["function", "a1", "a2", "a3", "a4", "value", "scale"])
        writer.writerows(rows)
    print(f"wrote {len(rows)} rows to {out}")


if __name__ == "__main__":
    main()
