"""Harmonic-oscillator vibrations."""

from __future__ import annotations

import numpy as np

from pipeline.statmech.terms import Terms


def harmonic(theta_v, T) -> Terms:
    """Sum of independent harmonic oscillators, energies from the zero-point level.

    With x = θ_v/T:  q = 1/(1 − e^{−x}),  (H−H0)/RT = x/(eˣ − 1),
    Cv/R = x² eˣ/(eˣ − 1)²,  S/R = x/(eˣ − 1) − ln(1 − e^{−x}).

    Parameters
    ----------
    theta_v : array (n,)
        Vibrational temperatures θ_v = h c ν̃ / k [K] (scale factor applied).
    T : array (m,)
        Temperatures [K].

    Returns
    -------
    :class:`Terms` summed over the modes.

    Examples
    --------
    >>> t = harmonic([1000.0], [1000.0])
    >>> round(float(t.cp_r[0]), 6)   # e/(e−1)²
    0.920674

    Reference: McQuarrie, *Statistical Mechanics* (1976), eqs. 6-20 to 6-23.
    """
    T = np.atleast_1d(np.asarray(T, dtype=float))
    theta_v = np.asarray(theta_v, dtype=float)
    if theta_v.size == 0:
        return Terms.zero(T)
    s, h, cv = harmonic_groups(theta_v, [0], T)
    return Terms(s[0], h[0], cv[0])


def harmonic_groups(theta_v, starts, T):
    """The sums of :func:`harmonic` for consecutive groups of modes (one group a species).

    ``theta_v`` (M,) [K] holds the groups one after the other, group g starting
    at ``starts[g]`` (increasing; every group non-empty).  Returns S/R,
    (H−H0)/RT, Cv/R as (G, m) arrays.  Each group is summed mode by mode in
    its own order (((θ₀ + θ₁) + θ₂) + …, at every temperature), so a group's
    sums depend neither on the other groups nor on the rest of the grid.

    Groups of the same size are evaluated together, a block of them at a
    time: mode k of each group of the block is row k of a (modes, groups,
    temperatures) array, and the sums run over its first axis.

    >>> s, h, cv = harmonic_groups([1000.0, 1000.0, 2000.0], [0, 2], [1000.0])
    >>> round(float(cv[0, 0]), 6), round(float(cv[1, 0]), 6)   # 2·e/(e−1)², 4e²/(e²−1)²
    (1.841348, 0.724062)
    """
    T = np.atleast_1d(np.asarray(T, dtype=float))
    theta_v = np.asarray(theta_v, dtype=float)
    starts = np.asarray(starts, dtype=np.intp)
    G, m = starts.size, T.size
    if m == 1:  # (modes, 1, 1) would be summed pairwise, not mode by mode: use two equal columns
        return tuple(a[:, :1].copy() for a in harmonic_groups(theta_v, starts, np.r_[T, T]))
    out = tuple(np.empty((G, m)) for _ in range(3))
    if not G:
        return out
    size = np.diff(np.r_[starts, theta_v.size])
    order = np.argsort(size, kind="stable")
    # x capped at 700 where eˣ would overflow (terms below e^-690 ≈ 1e-300); the cap only
    # matters when some θ/T reaches it (division rounds monotonically, so max θ / min T bounds all)
    cap = not (T.min() > 0.0 and theta_v.max() / T.min() < 700.0)
    # values per block, so the work stays in cache (and no more than all of them)
    room = max(min(CHUNK, theta_v.size * m), int(size.max()) * m)
    x_, e_, h_, w_ = (np.empty(room) for _ in range(4))
    sizes = size[order].tolist()
    edges = [0] + [i for i in range(1, G) if sizes[i] != sizes[i - 1]] + [G]
    for c0, c1 in zip(edges[:-1], edges[1:]):  # the groups of one size, in their own order
        n = sizes[c0]
        per = max(1, room // (n * m))
        for b0 in range(c0, c1, per):
            g = order[b0 : min(c1, b0 + per)]
            shape = (n, g.size, m)
            x, e, h, w = (a[: n * g.size * m].reshape(shape) for a in (x_, e_, h_, w_))
            np.divide(theta_v[starts[g][None, :] + np.arange(n)[:, None]][:, :, None], T, out=x)
            if cap:
                np.minimum(x, 700.0, out=x)
            # with e = eˣ − 1 (accurate for small x): (H−H0)/RT = x/e, Cv/R = (x/e)² (1 + e),
            # S/R = x/e + x − ln e
            np.expm1(x, out=e)
            np.divide(x, e, out=h)
            np.log(e, out=w)
            np.subtract(x, w, out=x)
            np.add(h, x, out=x)  # S/R
            np.multiply(h, h, out=w)
            np.add(e, 1.0, out=e)
            np.multiply(w, e, out=w)  # Cv/R
            lo, hi = int(g[0]), int(g[-1]) + 1  # g increases (a stable sort)
            rows = slice(lo, hi) if hi - lo == g.size else g
            for o, a in zip(out, (x, h, w)):
                if isinstance(rows, slice):
                    np.add.reduce(a, axis=0, out=o[rows])
                else:
                    o[rows] = np.add.reduce(a, axis=0)
    return out


#: element count of the blocks :func:`harmonic_groups` works on
CHUNK = 32768
