"""Rounding-aware printing: the coefficients exactly as the fixed-column file holds them.

A fixed-column record prints each coefficient with nine significant digits
(E15.8) and the temperatures with three decimals (F10.3, F8.3).  Rounding the
coefficients of a constrained fit independently would break what the fit
guaranteed — H°(298.15 K) = ΔfH°298, S°(298.15 K) = S°298, and Cp, H, S
continuous at Tmid.  :func:`printed_fit` rounds and then restores those
properties *as printed*:

1. temperatures are rounded to the printed decimals;
2. a1 … a5 of both ranges are rounded to nine significant digits;
3. in the range that holds 298.15 K, the integration constants are re-derived
   from the rounded a1 … a5 and rounded,

       a6 = T·(H/RT − h(T)),   a7 = S/R − s(T)   at T = 298.15 K,

   with h, s the polynomial parts of H/RT and S/R (the a6/T and a7 terms left
   out);
4. in the other range a1 is shifted so that Cp/R equals the first range's at
   Tmid, then a6, a7 are re-derived so that H/RT and S/R equal it there;
5. the rounding of a6, a7 and a1 alone leaves errors above the bars for many
   species (a6 ≈ −1000 prints with a step of 1e-5, i.e. 3e-8 in H/RT at
   298 K), so the last digits of a1 … a5 are nudged and steps 3–4 repeated:
   first moves aimed at the printed grid of a6 and a7 (:func:`_aimed`, Cp/R
   change bounded by :data:`DISTURBANCE`), then, as a last resort, sweeps of
   one coefficient and small moves of two or three (:func:`_nudged`), each
   family tried in order of the Cp/R change it causes over the range; the
   first candidate that meets every bar as printed is kept.  Measured: at
   most 8.6e-7 relative change of Cp for the bundled species, 7e-6 for the
   hardest NASA Glenn sets shipped with cantera — far below any fit error.

All conditions are measured the way solvers check them: relative to
max(|value|, 1) of the dimensionless quantity (Cp/R, H/RT, S/R).  The bars are
those of the writers issue: 1e-9 for H and S (at 298.15 K and at Tmid) and
1e-8 for Cp at Tmid; the code aims at :data:`MARGIN` of them.

Reference for the polynomial form: McBride, Gordon & Reno, NASA TM-4513 (1993).
"""

from __future__ import annotations

import dataclasses
import functools
import itertools
import math

import numpy as np

from pipeline.nasa7 import Nasa7Fit
from pipeline.thermo import T_REF

#: relative bars as printed (normalised by max(|value|, 1))
H_S_BAR = 1e-9
CP_BAR = 1e-8
#: fraction of the bars aimed at (leaves room for a reader's summation order)
MARGIN = 0.9
#: largest change of Cp/R over a range that a nudge may cause, relative to Cp/R
DISTURBANCE = 1e-6
SIGNIFICANT = 9  # E15.8: one digit before the point, eight after


def round_sig(x: float) -> float:
    """``x`` as an E15.8 field prints it, read back as a float.

    Negative zero becomes zero; magnitudes below 1e-99 (which would need a
    three-digit exponent) print as zero.

    Made without the text where that gives the same float: p = x·10^k with
    10^8 ≤ |p| < 10^9 (k ≤ 22, so 10^k is exact) is within 6e-8 of the exact
    product, so round(p) is the nine digits "%.8E" prints unless p lies that close
    to a half; and the quotient of that integer by 10^k, rounded once, is the
    float nearest the printed decimal, which is what reading it back gives.

    >>> round_sig(3.1415926535)
    3.14159265
    >>> round_sig(-1.0208999e-3 - 1e-14)
    -0.0010208999
    """
    x = float(x)
    ax = abs(x)
    if 1e-14 <= ax < 1e30:
        k = 8 - math.floor(math.log10(ax))
        p = x * _POW10[k] if k >= 0 else x / _POW10[-k]
        if 1e8 <= abs(p) < 1e9:
            r = math.remainder(p, 1.0)  # p − round(p), exact
            if abs(r) < 0.4999999:
                return (p - r) / _POW10[k] if k >= 0 else (p - r) * _POW10[-k]
    if ax < 1e-99:
        return 0.0
    if not ax < 1e100:  # also inf and nan
        if not math.isfinite(x):
            raise ValueError(f"cannot print {x!r} as a coefficient")
        raise ValueError(f"{x!r} does not fit an E15.8 field")
    return float(f"{x:.8E}") + 0.0  # SIGNIFICANT = 9 digits


#: 10^0 … 10^22, the powers of ten that are exact doubles
_POW10 = tuple(10.0**k for k in range(23))


def _round_all(xs) -> tuple:
    """``tuple(round_sig(x) for x in xs)``, with one formatting call when every |x| lies
    in [1e-99, 1e100) (the other cases, zeros among them, value by value)."""
    xs = tuple(map(float, xs))
    if xs and 1e-99 <= min(map(abs, xs)) and sum(map(abs, xs)) < 1e100:  # False for nan, inf
        return tuple(map(float, (("%.8E " * len(xs)) % xs).split()))
    return tuple(map(round_sig, xs))


def round_temperature(t: float) -> float:
    """A temperature [K] as F10.3/F8.3 prints it.

    >>> round_temperature(1234.56789)
    1234.568
    """
    return float(f"{float(t):.3f}")


def last_digit(x: float) -> float:
    """The value of one unit in the last printed digit of ``x`` (0 for zero).

    The exponent "%.8E" prints is that of 10^⌊log10|x|⌋ when x·10^k (as in
    :func:`round_sig`) lies in [10^8, 10^9 − 0.6], i.e. cannot carry into the next
    power of ten; else it is read from the text.

    >>> last_digit(3.5)
    1e-08
    >>> last_digit(-2.5e-3)
    1e-11
    """
    if x == 0.0:
        return 0.0
    ax = abs(x)
    if 1e-14 <= ax < 1e30:
        e = math.floor(math.log10(ax))
        p = ax * _POW10[8 - e] if e <= 8 else ax / _POW10[e - 8]
        if 1e8 <= p < 999999999.4:
            return 10.0 ** (e - (SIGNIFICANT - 1))
    exponent = int(f"{x:.{SIGNIFICANT - 1}E}".rpartition("E")[2])
    return 10.0 ** (exponent - (SIGNIFICANT - 1))


_BAR = {"cp": CP_BAR, "h": H_S_BAR, "s": H_S_BAR}


@functools.lru_cache(maxsize=64)
def _poly_list(T: float) -> dict:
    return {
        "cp": tuple(T**j for j in range(5)),
        "h": tuple(T**j / (j + 1) for j in range(5)),
        "s": (math.log(T),) + tuple(T**j / j for j in range(1, 5)),
    }


def _poly(T: float) -> dict:
    """Row vectors v with v·(a1 … a5) = the polynomial parts of Cp/R, H/RT, S/R at T."""
    return {q: np.array(vec) for q, vec in _poly_list(T).items()}


def _dot(u, w) -> float:
    """u·w over a1 … a5, summed left to right from 0.0 (the same float on every Python)."""
    return 0.0 + u[0] * w[0] + u[1] * w[1] + u[2] * w[2] + u[3] * w[3] + u[4] * w[4]


def _close(a5, T: float, targets: dict) -> tuple:
    """Printed a1 … a7 from printed a1 … a5: a1 re-fixed for Cp (if Cp is a
    target), a6 and a7 re-derived for H and S at T, all rounded."""
    return _state([float(x) for x in a5], "cp" in targets, _checks(T, targets))[0]


def _value(q: str, a, T: float) -> float:
    """Cp/R, H/RT or S/R of the seven coefficients ``a`` at T, in double precision
    (the same numbers as :mod:`pipeline.nasa7` up to summation order, ~1e-16)."""
    v = _dot(_poly_list(T)[q], a)
    return v + a[5] / T if q == "h" else v + a[6] if q == "s" else v


def _checks(T: float, targets: dict) -> tuple:
    """What :func:`_meets` and :func:`_state` need for ``targets`` at T, worked out once:
    the polynomial parts of Cp/R, H/RT, S/R at T (:func:`_poly_list`), T, and each
    target with its tolerance window, :data:`MARGIN` of its bar relative to
    max(|target|, 1) (Cp with a flag: a target only at Tmid).  A flat tuple of
    numbers, so that using it allocates nothing."""
    v = _poly_list(T)
    th, ts = targets["h"], targets["s"]
    with_cp = "cp" in targets
    tcp = targets["cp"] if with_cp else 0.0
    return (*v["cp"], *v["h"], *v["s"], T, th, MARGIN * _BAR["h"] * max(abs(th), 1.0),
            ts, MARGIN * _BAR["s"] * max(abs(ts), 1.0), with_cp, tcp, MARGIN * _BAR["cp"] * max(abs(tcp), 1.0))


def _meets(a, checks: tuple) -> bool:
    """Whether the seven coefficients ``a`` give every target within its window
    (:func:`_checks`; the sums are those of :func:`_value`, written out)."""
    c0, c1, c2, c3, c4, h0, h1, h2, h3, h4, s0, s1, s2, s3, s4, T, th, wh, ts, ws, with_cp, tcp, wcp = checks
    a0, a1, a2, a3, a4 = a[0], a[1], a[2], a[3], a[4]
    if with_cp and not abs(0.0 + c0 * a0 + c1 * a1 + c2 * a2 + c3 * a3 + c4 * a4 - tcp) <= wcp:
        return False
    if not abs(0.0 + h0 * a0 + h1 * a1 + h2 * a2 + h3 * a3 + h4 * a4 + a[5] / T - th) <= wh:
        return False
    return abs(0.0 + s0 * a0 + s1 * a1 + s2 * a2 + s3 * a3 + s4 * a4 + a[6] - ts) <= ws


def _state(a5, refix: bool, checks: tuple):
    """Printed a1 … a7 from printed a1 … a5 — a1 re-fixed for Cp if ``refix``, a6
    and a7 re-derived for H and S at T — the exact a6 and a7, and whether they meet
    every target of ``checks`` (:func:`_meets` of them: the same sums, compared alike)."""
    c0, c1, c2, c3, c4, h0, h1, h2, h3, h4, s0, s1, s2, s3, s4, T, th, wh, ts, ws, with_cp, tcp, wcp = checks
    a0, a1, a2, a3, a4 = a5
    if refix:
        a0 = round_sig(a0 + tcp - (0.0 + c0 * a0 + c1 * a1 + c2 * a2 + c3 * a3 + c4 * a4))
    dh = 0.0 + h0 * a0 + h1 * a1 + h2 * a2 + h3 * a3 + h4 * a4
    ds = 0.0 + s0 * a0 + s1 * a1 + s2 * a2 + s3 * a3 + s4 * a4
    x6 = (th - dh) * T
    x7 = ts - ds
    a6, a7 = round_sig(x6), round_sig(x7)
    ok = abs(dh + a6 / T - th) <= wh and abs(ds + a7 - ts) <= ws
    if ok and with_cp:
        ok = abs(0.0 + c0 * a0 + c1 * a1 + c2 * a2 + c3 * a3 + c4 * a4 - tcp) <= wcp
    return (a0, a1, a2, a3, a4, a6, a7), x6, x7, ok


def _round_sig_array(x: np.ndarray) -> np.ndarray:
    """Vectorised, approximate :func:`round_sig` (for screening candidates only)."""
    ax = np.abs(x)
    e = np.floor(np.log10(np.where(ax > 0, ax, 1.0)))
    scale = 10.0 ** (SIGNIFICANT - 1 - e)
    return np.where(ax > 0, np.round(x * scale) / scale, 0.0)


@functools.lru_cache(maxsize=None)
def _moves(n: int, reach: int) -> np.ndarray:
    """Integer last-digit moves of exactly ``n`` of the five coefficients a1 … a5,
    each by 1 … ``reach`` units either way."""
    units = [k for k in range(-reach, reach + 1) if k]
    rows = []
    for which in itertools.combinations(range(5), n):
        for ks in itertools.product(units, repeat=n):
            row = [0] * 5
            for j, k in zip(which, ks):
                row[j] = k
            rows.append(row)
    return np.array(rows, dtype=float)


def _single_moves(steps: np.ndarray, v: dict, cp_fixed: bool, cells: dict, windows: dict,
                  sweep: tuple[float, float]) -> np.ndarray:
    """Moves of one coefficient that sweep the last-digit cell of a6 (in H/RT)
    and of a7 (in S/R) between ``sweep[0]`` and ``sweep[1]`` times, in strides
    that cannot jump over the tolerance window.

    With ``cp_fixed`` a1 follows every move so that Cp/R at T is unchanged,
    so a move of a_j changes H/RT and S/R by the combination of both.
    """
    blocks = []
    for j in range(5):
        if steps[j] == 0.0:
            continue
        ks = []
        for q in cells:
            effect = v[q][j] - (v[q][0] * v["cp"][j] if cp_fixed else 0.0)
            effect = abs(effect) * steps[j]  # change of the quantity per unit of a_j
            if effect == 0.0:
                continue
            stride = max(1, int(0.5 * windows[q] / effect))
            lo, hi = (max(math.ceil(c * cells[q] / (stride * effect)), 25 * c) for c in sweep)
            ks.append(stride * np.arange(lo + 1, min(hi, 2000) + 1))
        k = np.unique(np.concatenate(ks)) if ks else np.zeros(0)
        block = np.zeros((2 * len(k), 5))
        block[: len(k), j] = k
        block[len(k):, j] = -k
        blocks.append(block)
    return np.concatenate(blocks) if blocks else np.zeros((0, 5))


#: sweeps (in cells of a6/a7) of single moves, then moves of two and three coefficients
_STAGES = (("single", (0, 1)), ("single", (1, 4)), ("single", (4, 16)), ("multi", (2, 12)), ("multi", (3, 5)))


def _nudged(base: list[float], T: float, targets: dict, span: tuple[float, float]) -> tuple | None:
    """The least-disturbing last-digit nudge of ``base`` that meets ``targets``."""
    steps = np.array([last_digit(x) for x in base])
    if "cp" in targets:
        steps[0] = 0.0  # a1 is re-fixed for Cp anyway
    tmax = max(abs(span[0]), abs(span[1]))
    reach = steps * np.array([tmax**j for j in range(5)])  # Cp/R change per unit on the span
    v = _poly(T)
    b = np.array(base)
    first = _close(base, T, targets)
    cells = {"h": last_digit(first[5]) / T, "s": last_digit(first[6])}
    windows = {q: MARGIN * _BAR[q] * max(abs(targets[q]), 1.0) for q in ("h", "s")}
    for kind, arg in _STAGES:
        if kind == "single":
            moves = _single_moves(steps, v, "cp" in targets, cells, windows, arg)
        else:
            moves = _moves(*arg)
            moves = moves[np.all((moves == 0) | (steps > 0), axis=1)]  # zeros stay zero
        if not len(moves):
            continue
        order = np.argsort(np.abs(moves) @ reach, kind="stable")
        A = b + moves[order] * steps
        if "cp" in targets:
            A[:, 0] = _round_sig_array(A[:, 0] + targets["cp"] - A @ v["cp"])
        a6 = _round_sig_array((targets["h"] - A @ v["h"]) * T)
        a7 = _round_sig_array(targets["s"] - A @ v["s"])
        good = np.ones(len(A), dtype=bool)
        for q, t in targets.items():
            value = A @ v[q] + (a6 / T if q == "h" else a7 if q == "s" else 0.0)
            good &= np.abs(value - t) <= 0.9 * MARGIN * _BAR[q] * max(abs(t), 1.0)
        for i in np.flatnonzero(good)[:8]:  # confirm with the exact printed numbers
            a = _close([round_sig(x) for x in A[i]], T, targets)
            if _meets(a, _checks(T, targets)):
                return a
    return None


def _aimed(base: list[float], T: float, targets: dict, span, start, checks: tuple) -> tuple | None:
    """Nudges aimed at the printed grid of a6 (and of a7), tried in pure Python.

    A move of k last-digit units of a_j shifts the exact a6 by k·e_j (linear in
    k; in the range that must join at Tmid, a1 follows so that Cp/R stays
    equal).  k = (g·m − a6)/e_j, rounded, lands a6 on the printed grid point
    g·m; a knob with e_j below the tolerance window hits it to within the
    window.  Rounding a1 after the move leaves a small miss, removed by a
    second move of a fine coefficient with a1 held.  Candidates are tried in
    order of grid distance and Cp/R change over ``span``; every one is checked
    exactly as printed, and one that fails the check gives way to the next.
    ``checks`` are :func:`_checks` of the targets; ``start`` is
    ``_state(base)`` (a1 re-fixed for Cp when Cp is a target).
    """
    cp_fixed = "cp" in targets
    v = _poly_list(T)
    steps = [0.0 if (cp_fixed and j == 0) else last_digit(x) for j, x in enumerate(base)]
    tmax = max(abs(span[0]), abs(span[1]))
    reach = [steps[j] * tmax**j for j in range(5)]
    limit = DISTURBANCE * max(abs(_dot(v["cp"], base)), 1.0)  # largest Cp/R change allowed
    knobs = [j for j in range(5) if steps[j]]
    if not knobs:
        return None
    a, x6, x7, _ = start
    g6, g7 = last_digit(a[5]) or 1.0, last_digit(a[6]) or 1.0
    # change of the exact a6 (in H/RT, times T) and a7 per unit of a_j, with a1 following
    # so that Cp/R stays (primary, at Tmid) or held (the second, fine move)
    vc, vh, vs = v["cp"], v["h"], v["s"]
    held = {"h": {j: -(vh[j] - 0.0) * steps[j] * T for j in knobs},
            "s": {j: -(vs[j] - 0.0) * steps[j] * 1.0 for j in knobs}}
    if cp_fixed:
        primary = {"h": [(j, -(vh[j] - vh[0] * vc[j]) * steps[j] * T) for j in knobs],
                   "s": [(j, -(vs[j] - vs[0] * vc[j]) * steps[j] * 1.0) for j in knobs]}
    else:
        primary = {q: list(held[q].items()) for q in ("h", "s")}
    fine = sorted(knobs, key=lambda j: abs(held["h"][j]) + abs(held["s"][j]))
    fine_effects = [(j2, iq, held[q][j2]) for j2 in fine for iq, q in enumerate(("h", "s")) if held[q][j2]]
    grid = (("h", x6, g6, round(x6 / g6)), ("s", x7, g7, round(x7 / g7)))
    tried = 0
    for offs in ((0,), (1, -1), (2, -2)):  # candidates by grid distance, then by Cp/R change
        group = []
        for off in offs:
            for q, x, g, m in grid:
                want = (m + off) * g - x
                for j, e in primary[q]:
                    if e:
                        k = round(want / e)
                        if k and abs(k) * reach[j] <= limit:
                            group.append((abs(k) * reach[j], j, k))
        group.sort()
        for _, j, k in group:
            if tried == 24:
                return None
            tried += 1
            trial = list(base)
            trial[j] = round_sig(base[j] + k * steps[j])
            a, x6t, x7t, ok = _state(trial, cp_fixed, checks)
            if ok:
                return a
            # a1 as re-fixed; correct the small miss (to the nearest grid point) with a1 held
            misses = (round(x6t / g6) * g6 - x6t, round(x7t / g7) * g7 - x7t)
            for j2, q, e2 in fine_effects:
                k2 = round(misses[q] / e2)
                if not k2 or abs(k2) * reach[j2] > limit:
                    continue
                trial2 = list(a[:5])
                trial2[j2] = round_sig(a[j2] + k2 * steps[j2])
                a2, _, _, ok2 = _state(trial2, False, checks)
                if ok2:
                    return a2
    return None


def _balanced(src, T: float, targets: dict, span, what: str, name: str) -> tuple:
    plain = _round_all(src)
    checks = _checks(T, targets)
    if _meets(plain, checks):  # plain rounding is enough (and printed input stays as it is)
        return plain
    base = list(plain[:5])
    start = _state(base, "cp" in targets, checks)
    if start[3]:  # a6, a7 (and a1 for Cp) re-derived from the rounded a1 … a5 (_close(base)) meet the targets
        return start[0]
    a = _aimed(base, T, targets, span, start, checks) or _nudged(base, T, targets, span)
    if a is None:
        raise ValueError(f"{name}: no printed coefficients meet {what} (nudges of up to three last digits tried)")
    return a


def printed_fit(fit: Nasa7Fit) -> Nasa7Fit:
    """The fit with the numbers a fixed-column record prints, re-balanced as printed.

    The targets are the fit's own values: H/RT and S/R at 298.15 K (which a
    constrained fit makes ΔfH°298/RT and S°298/R), and continuity of Cp/R,
    H/RT, S/R at the printed Tmid.  Every coefficient of the result is exactly
    the float its E15.8 field reads back.  See the module docstring for the
    method.  Printing is idempotent: ``printed_fit(printed_fit(f)) ==
    printed_fit(f)``, so records read back from a file print unchanged.
    Raises ``ValueError`` if no nudge meets the bars (not seen for a
    realistic fit).

    Examples
    --------
    >>> f = Nasa7Fit("AR", (("Ar", 1),), 200.0, 1000.0, 6000.0,
    ...              (2.5, 0, 0, 0, 0, -745.375, 4.379674166),
    ...              (2.5, 0, 0, 0, 0, -745.375, 4.379674166))
    >>> p = printed_fit(f)
    >>> p.low[6], max(p.continuity().values())
    (4.37967417, 0.0)
    """
    tlow, tmid, thigh = (round_temperature(t) for t in (fit.tlow, fit.tmid, fit.thigh))
    two_ranges = tlow < tmid < thigh
    ref_is_low = (not two_ranges) or T_REF <= tmid
    ref_src, other_src = (fit.low, fit.high) if ref_is_low else (fit.high, fit.low)
    targets = {"h": _value("h", ref_src, T_REF), "s": _value("s", ref_src, T_REF)}
    span = (tlow, tmid) if ref_is_low else (tmid, thigh)
    ref = _balanced(ref_src, T_REF, targets, span, "H and S at 298.15 K", fit.name)
    if two_ranges:
        targets = {q: _value(q, ref, tmid) for q in ("cp", "h", "s")}
        span = (tmid, thigh) if ref_is_low else (tlow, tmid)
        other = _balanced(other_src, tmid, targets, span, f"continuity at Tmid = {tmid} K", fit.name)
    else:
        other = ref
    low, high = (ref, other) if ref_is_low else (other, ref)
    if type(fit) is Nasa7Fit and _NASA7_FIELDS == tuple(fit.__dict__):  # dataclasses.replace, without __init__
        out = object.__new__(Nasa7Fit)
        out.__dict__.update(fit.__dict__)
        out.__dict__.update(tlow=tlow, tmid=tmid, thigh=thigh, low=low, high=high)
        return out
    return dataclasses.replace(fit, tlow=tlow, tmid=tmid, thigh=thigh, low=low, high=high)


#: the fields of a Nasa7Fit, in order (an instance whose attributes are exactly these is copied field by field)
_NASA7_FIELDS = tuple(f.name for f in dataclasses.fields(Nasa7Fit))
