"""Constrained two-range seven-coefficient fits of a ThermoTable, and their quality.

The fit (one species, ranges [Tlow, Tmid] and [Tmid, Thigh]):

* Cp/R is a quartic in T in each range;
* Cp/R and d(Cp/R)/dT are continuous at Tmid (optionally d²(Cp/R)/dT² too);
* the low range's a6, a7 give H°(298.15 K) = ΔfH°298 and S°(298.15 K) = S°298
  exactly; the high range's a6, a7 make H° and S° continuous at Tmid;
* the objective is the **maximum relative Cp error** over the grid (minimax),
  not a least-squares sum.

Parametrisation.  With x = T/1000 K (the scaled temperature every solve uses)
and u = (2x − x_low − x_high)/(x_high − x_low) ∈ [−1, 1],

    Cp/R (low)  = Σ_{j=0..4} c_j T_j(u)
    Cp/R (high) = Σ_{j=0..4} c_j T_j(u) + Σ_k d_k v^k,   v = (x − x_mid)/h,

with T_j the Chebyshev polynomials, h = (x_high − x_low)/2 and k = 2, 3, 4
(k = 3, 4 with the second-derivative option).  The difference of the two
quartics has a double (triple) root at Tmid, so the continuity conditions hold
for every parameter vector and the minimax problem has no constraints left:
8 (7) free parameters.  The Chebyshev/shifted basis keeps the design matrix
well conditioned (its condition number is reported); the monomial coefficients
in x are obtained exactly by polynomial composition and divided by 1000^k.

Minimax.  Relative error r_i = (B c)_i / y_i − 1 with y = Cp/R of the table.
Lawson's algorithm (iteratively reweighted least squares, weights
w_i ← w_i |r_i| / Σ w|r|) converges to the minimax solution.  At every step the
weighted normal equations make λ = W r / ‖W r‖₁ a feasible point of the dual
linear programme (Aᵀλ = 0, ‖λ‖₁ = 1), so

    L = Σ w_i r_i² / Σ w_i |r_i|  ≤  min_c max_i |r_i|  ≤  max_i |r_i|,

a *certified* lower bound on the minimax limit that costs nothing.  Iteration
stops when max|r| ≤ (1 + tol) L, so every fit carries a proof that its error
is within that factor of the mathematical limit.  The limit itself can also be
computed exactly as a linear programme (:func:`minimax_limit`, HiGHS).
Many species and many Tmid candidates are solved at once: the design matrix
does not depend on the species (only the row scaling 1/y does), so the normal
matrices of all species are one matrix product with the stacked outer products
of the design rows.

Tmid search (``tmid="auto"``), on an 80 K subset of the grid: every 100 K
from 800 K to 2000 K; then ±20 K and ±40 K around the best; then ±10 K around
the new best (ties go to the Tmid nearest 1000 K).  The chosen Tmid is a
multiple of 10 K in [800, 2000] K.  The final fit at that Tmid uses a 20 K
subset, is checked on the full grid and, where its certificate there is not
within 1 + 2·FINAL_TOL, continued on the full grid.  Every stage is
warm-started with the Lawson weights of the one before.  The candidates of
one species compete: from its second iteration on, a candidate stops as soon
as its certified lower bound exceeds the least error found so far for that
species (by more than the tie tolerance of the choice); in its first
iteration, whose bound carries the round-off of a solve from zero, only when
the bound exceeds that error by 0.1 %.  Its error can only end above that
error, so it could not be chosen: this pruning removes about a quarter of the
search's iterations, the first-iteration rule another sixth of the coarse
stage's, and changes no choice (checked against the unpruned search, and the
first-iteration rule against the search without it, on the 1,000 benchmark
species: identical Tmid and coefficients).  Cheaper searches that do change choices were measured on those
species against the converged 80 K-subset error of every 10 K Tmid and not
adopted: 3 instead of 4 coarse iterations moves Tmid for 31 % of them (errors
±15 % species by species, the same on average, and with pruning it saves
only ~3 of ~60 iterations per species); 4 instead of 6 refining iterations,
a 200 K coarse step or a 100 K search subset move Tmid for 25–67 % and make
the chosen Tmid's error worse (90th percentile 1.04–1.08 × the best Tmid's,
against 1.03).  The weight update uses the exponent 1.5 (w ← w |r|^1.5),
which converges about 1.5 times faster than Lawson's exponent 1 on these
problems (1.65 takes ~5 % fewer iterations, 2 does not converge); the stopping rule's
certificate holds for any weights.

References
----------
C. L. Lawson, *Contributions to the theory of linear least maximum
approximation*, PhD thesis, UCLA (1961).  J. R. Rice and K. H. Usow, "The
Lawson algorithm and extensions", Math. Comp. 22, 118–127 (1968).
E. W. Cheney, *Introduction to Approximation Theory* (McGraw-Hill, 1966),
ch. 2 (linear Chebyshev approximation and its dual).
B. J. McBride, S. Gordon and M. A. Reno, NASA TM-4513 (1993) (the polynomial form).
"""

from __future__ import annotations

import dataclasses
import functools
import math
from dataclasses import dataclass

import numpy as np
from numpy.polynomial import Chebyshev, Polynomial

from pipeline import nasa7
from pipeline.codata import C
from pipeline.nasa7 import Nasa7Fit
from pipeline.thermo import T_REF

#: automatic Tmid search: range [K], coarse step [K], finest step [K]
TMID_SEARCH = (800.0, 2000.0)
TMID_COARSE_STEP = 100.0
TMID_FINE_STEP = 10.0
#: spacing [K] of the grid subsets used while searching Tmid and for the final fit
#: (the final fit is checked, and if need be continued, on the full grid)
SEARCH_SPACING, FINAL_SPACING = 80.0, 20.0
#: Lawson stopping rule: max error ≤ (1 + tol) × certified lower bound, or the iteration cap
FINAL_TOL, FINAL_ITERATIONS = 0.05, 40
SEARCH_TOL, COARSE_ITERATIONS, FINE_ITERATIONS = 0.03, 4, 6
#: margin above the classical high-temperature Cp limit before warning (the fit's own error)
CLASSICAL_MARGIN = 0.01
#: a design-matrix condition number above this is reported as a warning
CONDITION_WARNING = 1e8
#: spacing [K] of the dense grid on which a suspicious fitted Cp is checked (sign, classical limit)
CHECK_SPACING = 0.5

_X = 1000.0  # the temperature scale [K] of every solve


# --------------------------------------------------------------------------
# Results
# --------------------------------------------------------------------------


@dataclass(frozen=True)
class PropertyError:
    """Largest errors of one dimensionless property over the fit grid.

    ``max_rel`` is |fit − table| / |table| for Cp/R and |fit − table| /
    max(|table|, 1) for H/RT, S/R, G/RT (those cross zero; the same
    normalisation solvers use for continuity); ``max_abs`` is |fit − table|
    in the property's own dimensionless units.  ``t_rel``/``t_abs`` [K] are
    where each occurs.
    """

    max_rel: float
    t_rel: float
    max_abs: float
    t_abs: float


@dataclass(frozen=True)
class FitQuality:
    """Fit metrics of one species (see :func:`fit_table`)."""

    tmid: float  # [K], the Tmid used
    tmid_auto: bool  # chosen by the search (True) or given (False)
    cp_r: PropertyError
    h_rt: PropertyError
    s_r: PropertyError
    g_rt: PropertyError
    minimax_bound: float  # certified lower bound on the minimax relative Cp error (Lawson dual)
    minimax_limit: float | None  # the exact limit (linear programme), when computed
    continuity_cp_r: float  # relative jumps at Tmid, Nasa7Fit.continuity()
    continuity_h_rt: float
    continuity_s_r: float
    condition: float  # condition number of the scaled, 1/Cp-weighted design matrix
    evaluation_condition: float  # max over the grid of Σ|a_k T^k| / |Cp/R|
    iterations: int  # Lawson iterations of the final fit
    points: int  # grid points fitted
    second_derivative: bool
    cp_warning: float
    warnings: tuple[str, ...] = ()

    @property
    def max_cp_error(self) -> float:
        """Max relative Cp error over the grid."""
        return self.cp_r.max_rel

    @property
    def limit_ratio(self) -> float:
        """Achieved max Cp error / minimax limit (the certified bound if the LP was not run)."""
        ref = self.minimax_limit if self.minimax_limit is not None else self.minimax_bound
        return self.cp_r.max_rel / ref if ref > 0 else (1.0 if self.cp_r.max_rel == 0 else math.inf)

    def as_dict(self) -> dict:
        """Plain floats, strings, bools and lists (for YAML/JSON writers), in field order
        and then ``limit_ratio``."""
        d = {}
        for name, value in zip(_field_names(FitQuality), _field_getter(FitQuality)(self)):  # not asdict
            kind = type(value)
            if kind is PropertyError:
                value = {k: (v if type(v) is float else _plain(v))
                         for k, v in zip(_field_names(PropertyError), _field_getter(PropertyError)(value))}
            elif kind not in _PLAIN and value is not None:
                value = _plain(value)
            d[name] = value
        d["warnings"] = [w if type(w) is str else _plain(w) for w in self.warnings]
        d["limit_ratio"] = float(self.limit_ratio)
        return d


@functools.lru_cache(maxsize=None)
def _field_names(cls) -> tuple:
    """The field names of dataclass ``cls``, in order."""
    return tuple(f.name for f in dataclasses.fields(cls))


@functools.lru_cache(maxsize=None)
def _field_getter(cls):
    """A getter of the field values of dataclass ``cls`` as a tuple, in order."""
    import operator

    return operator.attrgetter(*_field_names(cls))


def _plain(v):
    if type(v) in _PLAIN or v is None:
        return v
    if isinstance(v, dict):
        return {k: _plain(x) for k, x in v.items()}
    if isinstance(v, (list, tuple)):
        return [_plain(x) for x in v]
    if isinstance(v, (bool, np.bool_)):
        return bool(v)
    if isinstance(v, (int, np.integer)):
        return int(v)
    if isinstance(v, (float, np.floating)):
        return float(v)
    return v


_PLAIN = frozenset((float, int, bool, str))


# --------------------------------------------------------------------------
# The design (species-independent)
# --------------------------------------------------------------------------

_IU = np.triu_indices(5)
#: monomial coefficients (powers of u) → Chebyshev coefficients, row j = u^j
_MONO_TO_CHEB = np.zeros((5, 5))
for _j in range(5):
    _c = np.polynomial.chebyshev.poly2cheb(np.eye(5)[_j])
    _MONO_TO_CHEB[_j, : _c.size] = _c
_BINOM = np.array([[math.comb(k, j) for j in range(5)] for k in range(5)], dtype=float)


def _polymul(a, b):
    """Row-wise product of polynomials given by coefficient arrays (R, 5) (degree ≤ 4 in total)."""
    out = np.zeros_like(a)
    for i in range(5):
        out[:, i:] += a[:, i : i + 1] * b[:, : 5 - i]
    return out


class _Basis:
    """The pieces of the design that depend only on the grid and the range ends.

    ``C`` (n, 5): T_j(u_i); ``P`` (n, 15): the upper-triangle products
    T_j(u_i) T_k(u_i), so that Σ_i ω_i c_i c_iᵀ of every species is one
    matrix product; ``K`` (5, 5): Chebyshev coefficients in u → monomial
    coefficients in x = T/1000.
    """

    def __init__(self, T, tlow, thigh):
        self.T = np.asarray(T, dtype=float)
        self.tlow, self.thigh = float(tlow), float(thigh)
        self.xl, self.xh = tlow / _X, thigh / _X
        self.u = self._u(self.T)
        self.C = np.polynomial.chebyshev.chebvander(self.u, 4)
        self.P = self.C[:, _IU[0]] * self.C[:, _IU[1]]
        K = np.zeros((5, 5))
        for j in range(5):
            coef = Chebyshev.basis(j, domain=[self.xl, self.xh]).convert(kind=Polynomial).coef
            K[: coef.size, j] = coef
        self.K = K
        self._q = {}  # qmap of one Tmid (it depends on the range only: shared with the subsets)
        self._subsets = {}
        self._padded = None

    def _u(self, T):
        return (2 * np.asarray(T, dtype=float) / _X - self.xl - self.xh) / (self.xh - self.xl)

    def subset(self, idx) -> "_Basis":
        """The basis on the grid points ``idx`` (made once per index set)."""
        idx = np.asarray(idx)
        key = idx.tobytes()
        b = self._subsets.get(key)
        if b is None:
            b = object.__new__(_Basis)
            b.__dict__.update(self.__dict__)
            b.T, b.u, b.C, b.P = self.T[idx], self.u[idx], self.C[idx], self.P[idx]
            b._subsets, b._padded = {}, None
            self._subsets[key] = b
        return b

    def padded(self):
        """(npad, P, Cb, CT) for the Lawson passes: the grid padded to a multiple of 16 points
        with inert rows (zeros), ``P`` (npad, 16), ``Cb`` (npad, 8), ``CT`` (5, npad)."""
        if self._padded is None:
            n = self.T.size
            npad = -(-n // 16) * 16
            P = np.zeros((npad, 16))
            P[:n, :15] = self.P
            Cb = np.zeros((npad, 8))
            Cb[:n, :5] = self.C
            CT = np.ascontiguousarray(Cb[:, :5].T)
            for a in (P, Cb, CT):
                a.flags.writeable = False
            self._padded = (npad, P, Cb, CT)
        return self._padded

    def qmaps(self, values, second_derivative):
        """:meth:`qmap` of each of ``values`` (V,), computed once per value and option."""
        sd = bool(second_derivative)
        q = self._q
        keys = [(v, sd) for v in np.asarray(values, dtype=float).tolist()]
        missing = list(dict.fromkeys(k[0] for k in keys if k not in q))
        if missing:
            for v, m in zip(missing, self.qmap(missing, sd)):
                m.flags.writeable = False
                q[(v, sd)] = m
        return np.stack([q[k] for k in keys]) if keys else self.qmap(np.zeros(0), sd)

    def mask(self, tmid):
        """(R, n) 1.0 where the high range applies (T > Tmid), else 0.0."""
        return (self.T[None, :] > np.asarray(tmid)[:, None]).astype(float)

    def qmap(self, tmid, second_derivative):
        """(R, nq, 5): Chebyshev coefficients (in u) of the high-range corrections.

        q_j(u) = (u − u_mid)^m T_j(s), s = (2u − u_mid − 1)/(1 − u_mid) ∈ [−1, 1] on
        the high range, with m = 2, j = 0, 1, 2 (m = 3, j = 0, 1 with the
        second-derivative option): a double (triple) root at Tmid, and
        Chebyshev factors that keep the columns far from collinear.
        """
        um = self._u(np.asarray(tmid, dtype=float))
        m, nq = (3, 2) if second_derivative else (2, 3)
        one = np.zeros((um.size, 5))
        one[:, 0] = 1.0
        lin = np.zeros((um.size, 5))
        lin[:, 0], lin[:, 1] = -um, 1.0  # u − u_mid
        sv = np.zeros((um.size, 5))
        sv[:, 0], sv[:, 1] = -(um + 1) / (1 - um), 2 / (1 - um)  # s(u)
        root = one
        for _ in range(m):
            root = _polymul(root, lin)
        cheb = [one, sv]
        while len(cheb) < nq:
            cheb.append(2 * _polymul(sv, cheb[-1]) - cheb[-2])
        mono = np.stack([_polymul(root, cheb[j]) for j in range(nq)], axis=1)
        return np.einsum("rij,jk->rik", mono, _MONO_TO_CHEB)

    def design(self, tmid, second_derivative):
        """Design matrix B (n, p) of one Tmid: Cp/R on the grid = B θ."""
        q = self.qmap([tmid], second_derivative)[0]
        return np.hstack([self.C, self.mask([tmid])[0][:, None] * (self.C @ q.T)])


@functools.lru_cache(maxsize=8)
def _basis(grid: bytes, tlow: float, thigh: float) -> _Basis:
    """The :class:`_Basis` of a grid (float64 bytes) and range, built once per process."""
    return _Basis(np.frombuffer(grid, dtype=float), tlow, thigh)


def _mm(a, b):
    """a @ b for 2-D arrays with every output row computed the same way whatever the
    number of rows: a species' result must not depend on which other species share the
    batch (matrix-product libraries choose kernels, and so summation orders, by shape).

    Short inner dimensions are summed term by term; longer ones in row blocks of one
    fixed shape.
    """
    a = np.asarray(a, dtype=float)
    b = np.asarray(b, dtype=float)
    if b.shape[0] <= 8:
        out = a[:, :1] * b[:1]
        for k in range(1, b.shape[0]):
            out = out + a[:, k : k + 1] * b[k : k + 1]
        return out
    rows = a.shape[0]
    block = 16
    padded = np.zeros((-(-rows // block) * block, a.shape[1]))
    padded[:rows] = a
    bb = np.ascontiguousarray(b)
    out = np.concatenate([padded[i : i + block] @ bb for i in range(0, padded.shape[0], block)])
    return out[:rows]


#: for each entry (j, k) of a symmetric 5 × 5 matrix, its index among the upper-triangle entries
_SYM = np.zeros((5, 5), dtype=np.intp)
_SYM[_IU] = np.arange(15)
_SYM[_IU[1], _IU[0]] = np.arange(15)


def _normal(P, Cb, buf, mask, MqT, d, mm=None):
    """Weighted normal equations G δ = rhs, rows last: G (p, p, R), rhs (p, R).

    ``buf`` (2R, n) holds a_i = w_i / y_i² in its first R rows on entry (it is
    used as work space).  Minimising Σ_i w_i r_i², r_i = (B(θ + δ))_i / y_i − 1,
    for the correction δ to parameters θ whose residual is d = y − Bθ gives
    G = Σ_i a_i b_i b_iᵀ and rhs = Σ_i a_i d_i b_i, with b_i = [c_i, m_i Mq c_i];
    ``P`` holds the products c_i c_iᵀ (15 columns, maybe zero-padded), ``Cb``
    the c_i, ``MqT`` (nq, 5, R) the high-range maps of the rows.  Solving for
    the correction from the true residual is one step of iterative refinement
    in every Lawson iteration: the normal matrix's rounding then limits the
    size of the *change*, not of the solution (Björck, Numerical Methods for
    Least Squares Problems, SIAM 1996, §2.9).

    Rows last: every entry of the small matrices is one contiguous vector over
    the rows, so the 5 × 5 → p × p algebra (and the solve of :class:`_Pass`) is a few dozen
    element-wise vector operations instead of R tiny matrix products, and each
    row's arithmetic is the same whatever the other rows.
    """
    mm = mm or _mm
    R = buf.shape[0] // 2
    a, am = buf[:R], buf[R:]
    np.multiply(a, mask, out=am)
    FF = np.ascontiguousarray(mm(buf, P)[:, :15].T)  # (15, 2R): Σ a c cᵀ, Σ a m c cᵀ
    np.multiply(a, d, out=a)
    np.multiply(a, mask, out=am)
    gg = np.ascontiguousarray(mm(buf, Cb)[:, :5].T)  # (5, 2R): Σ a d c, Σ a d m c
    nq = MqT.shape[0]
    p = 5 + nq
    G = np.empty((p, p, R))
    G[:5, :5] = FF[_SYM, :R]
    Fm = FF[_SYM, R:]  # (5, 5, R)
    # Fm Mqᵀ (5, nq) and Mq Fm Mqᵀ (nq, nq), summed term by term
    FmMt = Fm[:, 0, None] * MqT[None, :, 0]
    for k in range(1, 5):
        FmMt += Fm[:, k, None] * MqT[None, :, k]
    G[:5, 5:] = FmMt
    G[5:, :5] = FmMt.transpose(1, 0, 2)
    hh = G[5:, 5:]
    np.multiply(MqT[:, 0, None], FmMt[0, None], out=hh)
    for k in range(1, 5):
        hh += MqT[:, k, None] * FmMt[k, None]
    rhs = np.empty((p, R))
    rhs[:5] = gg[:, :R]
    gm = gg[:, R:]
    hr = rhs[5:]
    np.multiply(MqT[:, 0], gm[0], out=hr)
    for k in range(1, 5):
        hr += MqT[:, k] * gm[k]
    return G, rhs


@dataclass
class _Lawson:
    alpha: np.ndarray  # (R, 5) Chebyshev coefficients of the low-range Cp/R
    beta: np.ndarray  # (R, 5) high-range minus low-range Chebyshev coefficients
    error: np.ndarray  # (R,) max relative Cp error of (alpha, beta)
    bound: np.ndarray  # (R,) certified lower bound on the minimax error
    weights: np.ndarray  # (R, n) final Lawson weights w (Σ w = 1)
    iterations: np.ndarray  # (R,)


#: exponent of the weight update w ← w |r|^k (Lawson: k = 1; 1.5 converges about
#: 1.5× faster here, and the stopping rule's certificate holds for any weights)
LAWSON_POWER = 1.5
#: rows per group of the Lawson iteration: about this many grid values, so the work stays in cache
BLOCK_ELEMENTS = 65536
#: rows per matrix product: every product is a stack of products of this one shape
TILE = 8


def _tiled(a, b, out=None):
    """a @ b for a (R, k) with R a multiple of TILE, as a stack of (TILE, k) @ (k, m) products.

    Matrix-product libraries choose kernels, and so summation orders, by shape: with one
    fixed shape per call a row's result does not depend on how many rows share the call.
    """
    R, k = a.shape
    if out is None:
        return np.matmul(a.reshape(R // TILE, TILE, k), b).reshape(R, b.shape[1])
    np.matmul(a.reshape(R // TILE, TILE, k), b, out=out.reshape(R // TILE, TILE, b.shape[1]))
    return out


#: the reductions of ndarray.sum / ndarray.max, without their Python wrappers
_add, _max = np.add.reduce, np.maximum.reduce
#: rows of the transposed products in :class:`_Pass`: the 15 entries Σ a c cᵀ (and one zero
#: column), then Σ a d c; for the normal matrix, its low block and the high-range parts
_GG = 16
_SYM_FLAT = _SYM.ravel()
_FM_ROWS = np.r_[_SYM_FLAT, _GG + np.arange(5)]


class _Pass:
    """Work space of the Lawson passes over ``slots`` rows: every array of one iteration
    preallocated, and the views the normal equations and the solve use made once, so that
    a pass is about a hundred array operations whatever the number of rows.

    :meth:`step` forms the normal equations as :func:`_normal` does (the same operations in
    the same order, so the same bits), adds the ridge and solves the symmetric positive
    definite systems, rows last: Cholesky factorisation G = L Lᵀ of the matrix bordered by
    the right-hand side (right-looking, one outer-product update per column, each a vector
    operation over the rows), which yields L⁻¹b as its last row, then back substitution.
    A pivot that rounding made non-positive is floored at 1e-300 (the ridge keeps it
    positive in exact arithmetic).  Reference: G. H. Golub and C. F. Van Loan, *Matrix
    Computations*, 4th ed. (2013), §4.2.
    """

    def __init__(self, slots, npad, nq, MqT):
        p = 5 + nq
        self.R, self.p, self.nq, self.MqT = slots, p, nq, MqT
        self.buf = np.empty((2 * slots, npad))  # [a; a m], then the fitted low and high parts
        self.buf3 = self.buf.reshape(2 * slots // TILE, TILE, npad)
        self.XY = np.empty((2 * slots, _GG + 8))  # Σ a P | Σ a d c, rows [unmasked; masked]
        self.XY3 = self.XY.reshape(2 * slots // TILE, TILE, _GG + 8)
        self.XT = np.empty((_GG + 8, 2 * slots))
        self.A = np.empty((p + 1, p, slots))  # the normal matrix bordered by the right-hand side
        self.diag = self.A[:p].reshape(p * p, slots)[:: p + 1]
        self.trace = np.empty(slots)
        self.FH = np.empty((6, nq, slots))  # Fm Mqᵀ (5, nq) over Mq gm (1, nq)
        self.T1 = np.empty((6, nq, 5, slots))
        self.T2 = np.empty((nq, 5, nq, slots))
        A = self.A
        self.chol = []
        for k in range(p):
            col = A[k + 1:, k]
            upd = (col[:, None], col[None, : p - k - 1], A[k + 1:, k + 1:],
                   np.empty((p - k, p - k - 1, slots))) if k + 1 < p else None
            self.chol.append((A[k, k], col, upd))
        self.x = np.empty((p, slots))
        self.xt = np.empty((p, slots))
        self.back = [(self.x[j], A[j, j], A[j, :j], self.x[:j], self.xt[:j]) for j in range(p - 1, -1, -1)]
        self.AB = np.empty((2 * slots, 5))  # alpha over beta
        self.AB3 = self.AB.reshape(2 * slots // TILE, TILE, 5)
        self.TB = np.empty((nq, 5, slots))
        self.BT = np.empty((5, slots))

    def step(self, P, Cb, CT, w, inv2, mask, dres, theta):
        """One Lawson solve: θ += δ from the weighted normal equations at weights ``w``
        (see :func:`_normal`); returns (fitted (2R, npad) low over high parts, alpha over beta)."""
        R, p, MqT, A = self.R, self.p, self.MqT, self.A
        buf = self.buf
        a, am = buf[:R], buf[R:]
        np.multiply(w, inv2, out=a)
        np.multiply(a, mask, out=am)
        np.matmul(self.buf3, P, out=self.XY3[:, :, :_GG])
        np.multiply(a, dres, out=a)
        np.multiply(a, mask, out=am)
        np.matmul(self.buf3, Cb, out=self.XY3[:, :, _GG:])
        XT = self.XT
        np.copyto(XT, self.XY.T)
        A[:5, :5] = XT[_SYM_FLAT, :R].reshape(5, 5, R)
        FH = self.FH
        np.multiply(XT[_FM_ROWS, R:].reshape(6, 1, 5, R), MqT[None], out=self.T1)
        _add(self.T1, axis=2, out=FH)
        A[:5, 5:] = FH[:5]
        A[5:p, :5] = FH[:5].transpose(1, 0, 2)
        np.multiply(MqT[:, :, None], FH[None, :5], out=self.T2)
        _add(self.T2, axis=1, out=A[5:p, 5:])
        A[p, :5] = XT[_GG : _GG + 5, :R]
        A[p, 5:] = FH[5]
        # the ridge of _lawson's iteration, at round-off level
        trace = self.trace
        _add(self.diag, axis=0, out=trace)
        trace *= 1e-15
        trace += 1e-300
        self.diag += trace
        # Cholesky of the bordered matrix, then back substitution
        for d, col, upd in self.chol:
            np.maximum(d, 1e-300, out=d)
            np.sqrt(d, out=d)
            np.divide(col, d, out=col)
            if upd is not None:
                c1, c2, blk, tmp = upd
                np.multiply(c1, c2, out=tmp)
                np.subtract(blk, tmp, out=blk)
        x = self.x
        np.copyto(x, A[p])
        for xj, d, row, head, tmp in self.back:
            np.divide(xj, d, out=xj)
            if tmp.shape[0]:
                np.multiply(row, xj, out=tmp)
                np.subtract(head, tmp, out=head)
        theta += x
        AB = self.AB
        np.copyto(AB[:R], theta[:5].T)
        np.multiply(theta[5:, None, :], MqT, out=self.TB)
        _add(self.TB, axis=0, out=self.BT)
        np.copyto(AB[R:], self.BT.T)
        np.matmul(self.AB3, CT, out=self.buf3)
        return buf, AB


def _lawson(basis, y, tmid, sd, tol, max_iter, v0=None, owner=None, incumbent=None):
    """Minimax relative fits of the rows of y (R, n), row r with its own Tmid ``tmid[r]``.

    The rows go through in groups of about BLOCK_ELEMENTS grid values; inside a
    group a row stops when its certified ratio error/bound is ≤ 1 + tol (or after
    ``max_iter`` iterations), and the rows still iterating are packed together
    whenever that frees a quarter of the slots; when fewer than an eighth of a
    group's rows are left they join a common tail, iterated after the last group
    (each slot counts its own iterations).  Every array operation is row-wise,
    on C-ordered arrays, with matrix products of one fixed shape (:func:`_tiled`),
    so a row's result does not depend on which rows share the batch: a species
    gets the same bits whether it is fitted alone or with a thousand others
    (checked in tests/test_fit.py).

    Competing rows (Tmid candidates of one species, ``owner`` (R,) indexing
    ``incumbent`` (S,), the least error already known for each species): a row
    also stops as soon as its certified lower bound exceeds the least error of
    its species (its rivals' so far, or the incumbent) by more than the tie
    tolerance of :func:`_pick`.  Its error can then only end above that error, so
    it cannot be picked: the pruning saves iterations without changing any
    choice (whichever rows share the call).  The bound is fully trusted from the
    second iteration on: the first solve starts from zero, so its fitted values
    carry the round-off of the normal equations (about 1e-9 for the bundled and
    benchmark species, whose design condition numbers are at most 2e6) — for an
    exact fit that residual is no dual certificate, and elsewhere it makes the
    first bound uncertain in about its sixth digit.  In the first iteration a row
    is therefore dropped only when its bound is above 1e-6 and exceeds the least
    error by 0.1 % (_FIRST_REL, _FIRST_FLOOR), far beyond that uncertainty.
    """
    # C order everywhere: a row sum over a strided axis is summed in another order
    y = np.ascontiguousarray(y, dtype=float)
    R, n = y.shape
    tmid = np.asarray(tmid, dtype=float)
    res = _Lawson(np.zeros((R, 5)), np.zeros((R, 5)), np.full(R, np.inf), np.zeros(R),
                  np.zeros((R, n)), np.zeros(R, dtype=int))
    if R == 0:
        return res
    # grid padded to a multiple of 16 with inert points (1/y = 0, weight 0); 16 and 8 columns
    npad, P, Cb, CT = basis.padded()
    values, which = np.unique(tmid, return_inverse=True)  # a few Tmid values, many rows
    Mq_v = basis.qmaps(values, sd)  # (V, nq, 5)
    nq = Mq_v.shape[1]
    mask_v = np.zeros((values.size, npad))
    mask_v[:, :n] = basis.mask(values)
    if owner is not None:
        owner = np.asarray(owner)
        known = np.array(incumbent, dtype=float)  # least achieved error per species so far
    group = max(TILE, (BLOCK_ELEMENTS // npad) // TILE * TILE)
    # a group whose rows still iterating fall below this many hands them to a common tail,
    # iterated after the last group: fewer passes of the loop on almost empty groups
    tail_rows = max(TILE, group // 8)
    # per slot: the row it works on (finished rows and padding copies are not alive), y, 1/y,
    # 1/y², the high-range mask, Mqᵀ (nq, 5, ·), weights, residual y − Bθ, θ (p, ·), least
    # error so far, its (alpha over beta), best bound, iterations
    STATE = ("row", "alive", "ys", "inv", "inv2", "mask", "MqT", "w", "dres", "theta",
             "best", "best_ab", "bnd", "it")

    def pick(st, keep, m):
        """The state of slots ``keep`` (the first m alive), padded to whole tiles with copies of keep[0]."""
        slots = -(-m // TILE) * TILE
        keep = np.r_[keep, np.full(slots - keep.size, keep[0])]
        old = st["row"].size
        out = {k: (np.ascontiguousarray(st[k][..., keep]) if k in ("MqT", "theta") else
                   np.concatenate([st[k][keep], st[k][old + keep]]) if k == "best_ab" else
                   np.ascontiguousarray(st[k][keep])) for k in STATE}
        out["alive"] = np.arange(slots) < m
        return out

    def start(rows):
        m = rows.size
        slots = -(-m // TILE) * TILE
        row = np.r_[rows, np.full(slots - m, rows[-1])]
        ys = np.ones((slots, npad))
        ys[:, :n] = y[row]
        inv = np.zeros((slots, npad))
        np.divide(1.0, ys[:, :n], out=inv[:, :n])
        w = np.zeros((slots, npad))  # Lawson weights, Σ w = 1
        if v0 is None:
            w[:, :n] = 1.0 / n
        else:
            w0 = np.ascontiguousarray(v0[row], dtype=float)
            w[:, :n] = w0 / w0.sum(axis=1, keepdims=True)
        return dict(row=row, alive=np.arange(slots) < m, ys=ys, inv=inv, inv2=inv * inv,
                    mask=mask_v[which[row]], MqT=np.ascontiguousarray(Mq_v[which[row]].transpose(1, 2, 0)),
                    w=w, dres=ys.copy(), theta=np.zeros((5 + nq, slots)), best=np.full(slots, np.inf),
                    best_ab=np.zeros((2 * slots, 5)), bnd=np.zeros(slots), it=np.zeros(slots, dtype=int))

    def iterate(st, defer):
        """Iterate the slots of ``st`` until all are finished (None) or, with ``defer``, until
        fewer than tail_rows are still alive (their state, unpadded, is returned)."""
        row, alive, ys, inv, inv2, mask, MqT, w, dres, theta, best, best_ab, bnd, it = (st[k] for k in STATE)
        slots = row.size
        work = _Pass(slots, npad, nq, MqT)
        low, high = work.buf[:slots], work.buf[slots:]
        best_ab3 = best_ab.reshape(2, slots, 5)
        own = owner[row] if owner is not None else None
        # iterations of the slots: the least and the largest (Python ints, one step per pass)
        it_lo, it_hi = int(it.min()), int(it.max())
        ftol = 1.0 + tol
        while True:
            # weighted normal equations, a ridge at round-off level (it keeps degenerate rows,
            # exact fits or zero weights, solvable), the solve, and the fitted values (in
            # work.buf: low-range part over high-range part)
            _, ab = work.step(P, Cb, CT, w, inv2, mask, dres, theta)
            np.subtract(ys, low, out=dres)
            np.multiply(high, mask, out=high)
            dres -= high
            ar, wa = high, low  # work space from here on
            np.multiply(dres, inv, out=ar)
            np.abs(ar, out=ar)  # |r_i|, the relative error
            err = _max(ar, axis=1)
            np.multiply(w, ar, out=wa)
            den = _add(wa, axis=1)
            np.multiply(wa, ar, out=w)  # w is not needed any more: work space
            bound = _add(w, axis=1) / np.where(den > 0, den, 1.0)
            it += 1
            it_lo += 1
            it_hi += 1
            better = err < best
            np.copyto(best, err, where=better)
            np.copyto(best_ab3, ab.reshape(2, slots, 5), where=better[None, :, None])
            np.maximum(bnd, bound, out=bnd)
            np.sqrt(ar, out=ar)
            np.multiply(wa, ar, out=w)  # w ← w |r|^1.5 / Σ w |r|^1.5
            w /= np.maximum(_add(w, axis=1, keepdims=True), 1e-300)
            # the stopping rule and the pruning trust the bound from the second iteration on;
            # in the first, a rival is dropped only far above the least error (_FIRST_REL)
            if it_hi < 2:  # every slot in its first iteration
                finished = (it >= max_iter) if it_hi >= max_iter else None
                if owner is not None:
                    least = known.copy()
                    np.minimum.at(least, own[alive], best[alive])
                    first = bound > least[own] * (1 + _FIRST_REL) + _TIE_ABS
                    first &= bound > _FIRST_FLOOR
                    finished = first if finished is None else finished | first
                if finished is None:
                    continue
                finished &= alive
            else:
                finished = best <= ftol * bnd
                finished |= best <= 1e-14
                if owner is not None:
                    least = known.copy()
                    np.minimum.at(least, own[alive], best[alive])
                    thr = least[own]
                    finished |= bound > thr * (1 + _TIE_REL) + _TIE_ABS
                if it_lo < 2:
                    finished &= it >= 2
                    if owner is not None:
                        first = bound > thr * (1 + _FIRST_REL) + _TIE_ABS
                        first &= bound > _FIRST_FLOOR
                        first &= it == 1
                        finished |= first
                if it_hi >= max_iter:
                    finished |= it >= max_iter
                finished &= alive
            rf = finished.nonzero()[0]
            if not rf.size:
                continue
            rr = row[rf]
            res.error[rr] = best[rf]
            res.alpha[rr] = best_ab[rf]
            res.beta[rr] = best_ab[slots + rf]
            res.bound[rr] = bnd[rf]
            res.iterations[rr] = it[rf]
            res.weights[rr] = w[rf, :n]
            if owner is not None:
                np.minimum.at(known, owner[rr], best[rf])
            alive &= ~finished
            live = alive.nonzero()[0]
            if not live.size:
                return None
            st = dict(zip(STATE, (row, alive, ys, inv, inv2, mask, MqT, w, dres, theta, best, best_ab, bnd, it)))
            if defer and live.size < tail_rows:
                return {k: (v[..., live] if k in ("MqT", "theta") else
                            np.concatenate([v[live], v[slots + live]]) if k == "best_ab" else v[live])
                        for k, v in st.items()}
            need = -(-live.size // TILE) * TILE
            if need <= slots - max(TILE, slots // 4):  # pack the rows still iterating into fewer tiles
                return iterate(pick(st, live, live.size), defer)

    tail = []
    for g0 in range(0, R, group):
        left = iterate(start(np.arange(g0, min(R, g0 + group))), defer=R > group)
        if left is not None:
            tail.append(left)
    if tail:
        m = sum(t["row"].size for t in tail)
        joined = {k: (np.concatenate([t[k] for t in tail], axis=-1) if k in ("MqT", "theta") else
                      np.concatenate([t[k] for t in tail])) for k in STATE if k != "best_ab"}
        # best_ab of each part is (alpha over beta): regroup as all alphas over all betas
        joined["best_ab"] = np.concatenate([t["best_ab"][: t["row"].size] for t in tail]
                                           + [t["best_ab"][t["row"].size:] for t in tail])
        iterate(pick(joined, np.arange(m), m), defer=False)
    # the bound is exact in exact arithmetic; at round-off level (exact fits) it may exceed the error
    res.bound = np.minimum(res.bound, res.error)
    return res


# --------------------------------------------------------------------------
# From parameters to coefficients and quality
# --------------------------------------------------------------------------


def _poly_int(a, T):
    """(Σ a_k T^{k+1}/(k+1), a_0 ln T + Σ_{k≥1} a_k T^k / k) for a (…, 5): H/R − a6 [K], S/R − a7."""
    h = T * (a[..., 0] + T * (a[..., 1] / 2 + T * (a[..., 2] / 3 + T * (a[..., 3] / 4 + T * a[..., 4] / 5))))
    s = a[..., 0] * np.log(T) + T * (a[..., 1] + T * (a[..., 2] / 2 + T * (a[..., 3] / 3 + T * a[..., 4] / 4)))
    return h, s


def _coefficients(basis, alpha, beta, tmid, dhf298, s298, flat=None):
    """Low and high seven-coefficient sets (R, 7) in kelvin units.

    ``flat`` (R,) holds, for a table whose Cp/R is one constant (a monatomic gas
    without low-lying levels), that constant, else NaN: such rows get it as a1
    and exact zeros for a2…a5 instead of the round-off the iteration leaves.
    """
    scale = _X ** np.arange(5)
    lo5 = _mm(alpha, basis.K.T) / scale
    hi5 = _mm(alpha + beta, basis.K.T) / scale
    if flat is not None:
        rows = ~np.isnan(flat)
        for five in (lo5, hi5):
            five[rows] = 0.0
            five[rows, 0] = flat[rows]
    # make Cp/R continuity exact in floating point (a correction at round-off level)
    hi5[:, 0] += nasa7.cp_r(lo5.T, tmid) - nasa7.cp_r(hi5.T, tmid)
    h0, s0 = _poly_int(lo5, T_REF)
    a6_lo = dhf298 / C.R - h0
    a7_lo = s298 / C.R - s0
    hl, sl = _poly_int(lo5, tmid)
    hh, sh = _poly_int(hi5, tmid)
    a6_hi = (hl + a6_lo) - hh
    a7_hi = (sl + a7_lo) - sh
    low = np.column_stack([lo5, a6_lo, a7_lo])
    high = np.column_stack([hi5, a6_hi, a7_hi])
    return low, high


def _property_error(fit, ref, T, relative_floor):
    """PropertyError per row of arrays (S, n) (``fit`` is overwritten)."""
    d = np.subtract(fit, ref, out=fit)
    np.abs(d, out=d)
    k = np.arange(d.shape[0])
    ia = d.argmax(axis=1)
    max_abs = d[k, ia].tolist()
    d /= np.maximum(np.abs(ref), 1.0) if relative_floor else np.abs(ref)
    ir = d.argmax(axis=1)
    return [_make(PropertyError, max_rel=a, t_rel=b, max_abs=c, t_abs=e)
            for a, b, c, e in zip(d[k, ir].tolist(), T[ir].tolist(), max_abs, T[ia].tolist())]


def _make(cls, **fields):
    """An instance of the frozen dataclass ``cls`` with these (already converted) fields.

    The same object as ``cls(**fields)`` — the fields not given take their defaults, and
    these classes have no ``__post_init__`` — without the field-by-field
    ``object.__setattr__`` of a frozen ``__init__``, which is most of the cost of
    building thousands of them.
    """
    obj = object.__new__(cls)
    d = obj.__dict__
    for name, value, factory in _defaults(cls):
        if name not in fields:
            d[name] = value if factory is None else factory()
    d.update(fields)
    return obj


@functools.lru_cache(maxsize=None)
def _defaults(cls):
    """(name, default, default factory) of the fields of dataclass ``cls`` that have one."""
    out = []
    for f in dataclasses.fields(cls):
        if f.default is not dataclasses.MISSING:
            out.append((f.name, f.default, None))
        elif f.default_factory is not dataclasses.MISSING:
            out.append((f.name, None, f.default_factory))
    return tuple(out)


def _piecewise(fn, low, high, tmid, T):
    """fn(coefficients, T) on the grid T (n,) with ``low`` (S, 7) up to tmid (S,) and ``high`` above.

    ``fn(a, t)`` takes a (7, S, 1) and t (m,) and returns (S, m) (the functions of
    :mod:`pipeline.nasa7`).  Each set is evaluated only on the columns where some row
    uses it (T ≤ max Tmid for the low set, T > min Tmid for the high set), and the
    rows choose element by element only between those two Tmid: every value is
    ``fn`` of its own coefficients at its own T, whatever the other rows.
    """
    S, n = low.shape[0], T.size
    i_hi = int(np.searchsorted(T, tmid.min(), side="right"))  # columns ≥ i_hi are high for some row
    i_lo = int(np.searchsorted(T, tmid.max(), side="right"))  # columns < i_lo are low for some row
    lo = fn(low.T[:, :, None], T[:i_lo])
    hi = fn(high.T[:, :, None], T[i_hi:])
    out = np.empty((S, n))
    out[:, :i_hi] = lo[:, :i_hi]
    out[:, i_lo:] = hi[:, i_lo - i_hi:]
    if i_lo > i_hi:
        use_low = T[i_hi:i_lo][None, :] <= tmid[:, None]
        out[:, i_hi:i_lo] = np.where(use_low, lo[:, i_hi:], hi[:, : i_lo - i_hi])
    return out


def _between_points(low, high, tmid, T, tlow, thigh):
    """(S,) bound on how far the fitted Cp/R can exceed its range of values on the grid T,
    anywhere in [tlow, thigh] [K].

    Between grid points a C¹ function with |f''| ≤ M2 departs from the chord by at most
    h² M2 / 8 (h the largest spacing), and beyond the ends by at most g M1 (g the gap to
    tlow or thigh, |f'| ≤ M1).  f'' is a quadratic on each range, so M2 is its largest
    absolute value at the range ends or its vertex; M1 is bounded term by term on
    [0, thigh].  Doubled, plus 1e-9 relative, for the rounding of the evaluations.
    """
    h = float(np.diff(T).max()) if T.size > 1 else 0.0
    g = max(float(T[0]) - tlow, thigh - float(T[-1]), 0.0)
    m1 = m2 = 0.0
    for a, t0, t1 in ((low, np.full(tmid.size, tlow), tmid), (high, tmid, np.full(tmid.size, thigh))):
        c2, c3, c4 = 2 * a[:, 2], 6 * a[:, 3], 12 * a[:, 4]  # f'' = c2 + c3 T + c4 T²
        vertex = np.clip(-c3 / np.where(c4 != 0, 2 * c4, np.inf), t0, t1)
        for t in (t0, t1, vertex):
            m2 = np.maximum(m2, np.abs(c2 + t * (c3 + t * c4)))
        b = np.abs(a[:, :5])
        m1 = np.maximum(m1, b[:, 1] + thigh * (2 * b[:, 2] + thigh * (3 * b[:, 3] + thigh * 4 * b[:, 4])))
    scale = np.maximum(np.abs(low[:, 0]), np.abs(high[:, 0]))
    return 2 * (h * h / 8 * m2 + g * m1) + 1e-9 * scale


def _abs_terms(a, T):
    """Σ_k |a_k| T^k over the five Cp/R coefficients (the evaluation condition's numerator)."""
    T = np.asarray(T, dtype=float)
    return np.abs(a[0]) + T * (np.abs(a[1]) + T * (np.abs(a[2]) + T * (np.abs(a[3]) + T * np.abs(a[4]))))


# --------------------------------------------------------------------------
# Tmid candidates
# --------------------------------------------------------------------------


def tmid_candidates(tlow: float, thigh: float, T=None) -> np.ndarray:
    """Coarse Tmid candidates [K]: every 100 K in [800, 2000] K strictly inside (tlow, thigh).

    A candidate needs three grid points of ``T`` (if given) on each side.
    If none is left, the 10 K multiple nearest the middle of the range is used.

    >>> tmid_candidates(200.0, 6000.0).tolist()[:3]
    [800.0, 900.0, 1000.0]
    >>> tmid_candidates(300.0, 1000.0).tolist()
    [800.0, 900.0]
    """
    lo, hi = TMID_SEARCH
    c = np.arange(lo, hi + 0.5 * TMID_COARSE_STEP, TMID_COARSE_STEP)
    c = _admissible(c, tlow, thigh, T)
    if c.size == 0:
        c = np.array([round((tlow + thigh) / 2 / TMID_FINE_STEP) * TMID_FINE_STEP])
    return c.astype(float)


def _admissible(c, tlow, thigh, T=None):
    c = np.asarray(c, dtype=float)
    return c[_admissible_mask(c, tlow, thigh, T)]


def _admissible_mask(c, tlow, thigh, T=None):
    """True for the Tmid candidates ``c`` strictly inside (tlow, thigh) with three grid points of T each side."""
    c = np.asarray(c, dtype=float)
    ok = (c > tlow) & (c < thigh)
    if T is not None and c.size:
        T = np.asarray(T)
        below = np.searchsorted(T, c, side="left")
        above = T.size - np.searchsorted(T, c, side="right")
        ok &= (below >= 3) & (above >= 3)
    return ok


#: errors within this relative and absolute tolerance of the least one tie (see _pick)
_TIE_REL, _TIE_ABS = 1e-6, 1e-9
#: pruning on the bound of a row's first iteration (see _lawson): only where it exceeds the
#: least error by this relative margin and is itself above this floor
_FIRST_REL, _FIRST_FLOOR = 1e-3, 1e-6
#: Tmid preferred among candidates whose errors tie (e.g. atoms whose Cp is exactly 5/2 R)
TMID_PREFERRED = 1000.0


def _pick(cands, error, owner, nspecies):
    """Index into the rows of the least error per owner; ties → the Tmid nearest 1000 K."""
    best = np.full(nspecies, np.inf)
    np.minimum.at(best, owner, error)
    tie = error <= best[owner] * (1 + _TIE_REL) + _TIE_ABS
    key = np.where(tie, np.abs(cands - TMID_PREFERRED), np.inf)
    order = np.lexsort((key, owner))
    first = np.r_[True, owner[order][1:] != owner[order][:-1]]
    out = np.empty(nspecies, dtype=int)
    out[owner[order][first]] = order[first]
    return out


def _stride(T, spacing):
    """Indices of a subset of the grid T with about ``spacing`` [K] between points (ends kept)."""
    if T.size < 3:
        return np.arange(T.size)
    step = float(np.median(np.diff(T)))
    k = max(1, int(round(spacing / step)))
    return np.unique(np.r_[np.arange(0, T.size, k), T.size - 1])


# --------------------------------------------------------------------------
# Public API
# --------------------------------------------------------------------------


def _grid(table, tlow, thigh):
    T = np.asarray(table.T, dtype=float)
    if T.size == 0 or T.min() > tlow * (1 + 1e-9) or T.max() < thigh * (1 - 1e-9):
        span = f"{T.min():g}–{T.max():g} K" if T.size else "nothing"
        raise ValueError(f"{table.name}: the table spans {span}, the fit needs {tlow:g}–{thigh:g} K")
    return (T >= tlow * (1 - 1e-12)) & (T <= thigh * (1 + 1e-12))


_DEFAULTS = dict(tlow=200.0, tmid="auto", thigh=6000.0, cp_warning=0.005, second_derivative=False,
                 formula=(), charge=0, cp_r_ceiling=None, with_limit=False)


def fit_tables(tables, options) -> list[Nasa7Fit]:
    """Fit many ThermoTables at once (the batched path the build uses).

    ``options[i]`` is a dict of :func:`fit_table`'s keyword arguments for
    ``tables[i]`` (missing keys take fit_table's defaults).  Species that
    share a grid, a range and the derivative option are solved together as
    stacked numpy problems, Tmid candidates included: a 100 K search on an
    80 K subset of the grid, then ±40, ±20 and ±10 K around the best, then
    the final fit on a 20 K subset and the full grid, each warm-started from
    the last (see the module docstring).
    """
    tables = list(tables)
    if len(options) != len(tables):
        raise ValueError(f"{len(tables)} tables but {len(options)} option sets")
    opts = []
    for o in options:
        unknown = set(o) - set(_DEFAULTS)
        if unknown:
            raise TypeError(f"unknown fit options: {sorted(unknown)}")
        opts.append({**_DEFAULTS, **o})
    groups: dict[tuple, list[int]] = {}
    keeps = []
    grids: dict[tuple, tuple] = {}  # tables of one build share their grid object: check it once
    for i, (t, o) in enumerate(zip(tables, opts)):
        tlow, thigh = float(o["tlow"]), float(o["thigh"])
        if not tlow < thigh:
            raise ValueError(f"{t.name}: Tlow {tlow:g} K is not below Thigh {thigh:g} K")
        known = grids.get((id(t.T), tlow, thigh))
        if known is None or known[0] is not t.T:
            keep = _grid(t, tlow, thigh)
            where = keep.nonzero()[0]
            if where.size and where[-1] - where[0] + 1 == where.size:  # one run of points: a slice
                keep = slice(int(where[0]), int(where[-1]) + 1)
            known = grids[(id(t.T), tlow, thigh)] = (t.T, keep, np.asarray(t.T, dtype=float)[keep].tobytes())
        keeps.append(known[1])
        groups.setdefault((known[2], tlow, thigh, bool(o["second_derivative"])), []).append(i)
    out: list = [None] * len(tables)
    for (tb, tlow, thigh, sd), rows in groups.items():
        T = np.frombuffer(tb, dtype=float)
        y = np.stack([np.asarray(tables[i].cp, dtype=float)[keeps[i]] for i in rows]) / C.R
        ok = np.isfinite(y).all(axis=1) & (y.min(axis=1) > 0)
        bad = [tables[i].name for i, good in zip(rows, ok.tolist()) if not good]
        if bad:
            raise ValueError(f"{', '.join(bad)}: the table's Cp is not positive and finite everywhere")
        fits = _fit_group(_basis(tb, tlow, thigh), y, [tables[i] for i in rows], [opts[i] for i in rows],
                          [keeps[i] for i in rows], sd)
        for i, f in zip(rows, fits):
            out[i] = f
    return out


def _fit_group(basis, y, tables, opts, keeps, sd):
    """Tmid search and final fits of species sharing grid, range and options.

    Stage 1: every 100 K (coarse); stage 2: ±20 and ±40 K around the best,
    then ±10 K around the new best — all on an 80 K subset of the grid, each
    stage warm-started with the weights of the best row so far; stage 3: the
    chosen Tmid on a 20 K subset, then checked on the full grid and, where the
    certificate is not within 1 + 2 FINAL_TOL, continued on the full grid.
    """
    T, tlow, thigh = basis.T, basis.tlow, basis.thigh
    S = y.shape[0]
    auto = np.array([o["tmid"] == "auto" for o in opts])
    fixed = np.zeros(S)
    for k, o in enumerate(opts):
        if not auto[k]:
            fixed[k] = float(o["tmid"])
            if not tlow < fixed[k] < thigh:
                raise ValueError(f"{tables[k].name}: Tmid {fixed[k]:g} K is not inside ({tlow:g}, {thigh:g}) K")
    isub = _stride(T, SEARCH_SPACING)
    bsub = basis.subset(isub)
    ysub = y[:, isub]
    state = _SearchState(S, isub.size)
    sa = np.flatnonzero(auto)
    if sa.size:
        coarse = tmid_candidates(tlow, thigh, bsub.T)
        owner = np.repeat(sa, coarse.size)
        state.run(bsub, ysub, owner, np.tile(coarse, sa.size), sd, COARSE_ITERATIONS, warm=False)
        for offsets in ((-40.0, -20.0, 20.0, 40.0), (-10.0, 10.0)):
            cand = (state.tmid[sa][:, None] + np.array(offsets)[None, :]).ravel()
            owner = np.repeat(sa, len(offsets))
            ok = (_admissible_mask(cand, tlow, thigh, bsub.T)
                  & (cand >= TMID_SEARCH[0]) & (cand <= TMID_SEARCH[1]))
            if ok.any():
                state.run(bsub, ysub, owner[ok], cand[ok], sd, FINE_ITERATIONS, warm=True)
    sf = np.flatnonzero(~auto)
    if sf.size:  # a warm-up for the fixed Tmid on the subset
        state.run(bsub, ysub, sf, fixed[sf], sd, FINE_ITERATIONS, warm=False)
    tmid = state.tmid.copy()
    # stage 3: the chosen Tmid on a 20 K subset, warm-started from the search weights
    ifin = _stride(T, FINAL_SPACING)
    bfin = basis.subset(ifin)
    r3 = _lawson(bfin, y[:, ifin], tmid, sd, FINAL_TOL, FINAL_ITERATIONS,
                 v0=_spread(state.weights, bsub.T, bfin.T))
    # the subset's dual bound is a lower bound of the full grid's limit too; where the
    # full-grid error is not within 1 + 2 tol of it, continue on the full grid
    S = y.shape[0]
    ab = np.zeros((2 * (-(-S // TILE) * TILE), 5))  # alpha over beta, rows padded to whole tiles
    ab[:S], ab[ab.shape[0] // 2 : ab.shape[0] // 2 + S] = r3.alpha, r3.beta
    fitted = _tiled(ab, np.ascontiguousarray(basis.C.T))
    high = fitted[ab.shape[0] // 2 : ab.shape[0] // 2 + S]
    high *= basis.mask(tmid)
    high += fitted[:S]
    high /= y
    high -= 1.0
    r3.error = np.abs(high, out=high).max(axis=1)
    redo = np.flatnonzero(r3.error > (1.0 + 2.0 * FINAL_TOL) * r3.bound)
    if redo.size:
        r4 = _lawson(basis, y[redo], tmid[redo], sd, FINAL_TOL, FINAL_ITERATIONS,
                     v0=_spread(r3.weights[redo], bfin.T, T))
        take = r4.error < r3.error[redo]
        for f in ("alpha", "beta", "error"):
            getattr(r3, f)[redo[take]] = getattr(r4, f)[take]
        r3.bound[redo] = np.maximum(r3.bound[redo], r4.bound)
        r3.iterations[redo] += r4.iterations
    return _results(basis, y, tables, opts, keeps, sd, tmid, auto, r3)


def _spread(weights, T_from, T_to):
    """Lawson weights (R, n_from) on grid T_from carried to grid T_to (nearest point, small floor)."""
    near = np.clip(np.searchsorted(T_from, T_to), 0, T_from.size - 1)
    left = np.clip(near - 1, 0, None)
    near = np.where(np.abs(T_from[left] - T_to) < np.abs(T_from[near] - T_to), left, near)
    weights = np.ascontiguousarray(weights)
    return np.ascontiguousarray(weights[:, near]) + 1e-3 * weights.mean(axis=1, keepdims=True)


class _SearchState:
    """Per species: the best Tmid so far, its error and Lawson weights on the search subset."""

    def __init__(self, S, n):
        self.error = np.full(S, np.inf)
        self.tmid = np.zeros(S)
        self.weights = np.zeros((S, n))

    def run(self, basis, y, owner, cand, sd, iterations, warm):
        r = _lawson(basis, y[owner], cand, sd, SEARCH_TOL, iterations,
                    v0=self.weights[owner] if warm else None,
                    owner=owner, incumbent=self.error)
        S = self.error.size
        known = np.flatnonzero(np.isfinite(self.error))
        all_owner = np.concatenate([known, owner])
        all_cand = np.concatenate([self.tmid[known], cand])
        all_err = np.concatenate([self.error[known], r.error])
        all_w = np.concatenate([self.weights[known], r.weights])
        pick = _pick(all_cand, all_err, all_owner, S)
        sel = np.unique(all_owner)
        self.error[sel] = all_err[pick[sel]]
        self.tmid[sel] = all_cand[pick[sel]]
        self.weights[sel] = all_w[pick[sel]]


#: species per block of :func:`_results`: its arrays on the full grid stay small (in the caches)
RESULT_BLOCK = 64


def _results(basis, y, tables, opts, keeps, sd, tmid, auto, res):
    """Nasa7Fit objects with their FitQuality, in blocks of RESULT_BLOCK species (every
    value is computed row by row, so the blocks do not change it)."""
    S = y.shape[0]
    if S <= RESULT_BLOCK:
        return _results_block(basis, y, tables, opts, keeps, sd, tmid, auto, res)
    fits = []
    for b0 in range(0, S, RESULT_BLOCK):
        b = slice(b0, min(S, b0 + RESULT_BLOCK))
        part = _Lawson(res.alpha[b], res.beta[b], res.error[b], res.bound[b], res.weights[b], res.iterations[b])
        fits.extend(_results_block(basis, y[b], tables[b], opts[b], keeps[b], sd, tmid[b], auto[b], part))
    return fits


def _results_block(basis, y, tables, opts, keeps, sd, tmid, auto, res):
    """Nasa7Fit objects with their FitQuality (see :func:`_results`)."""
    T = basis.T
    S = y.shape[0]
    dhf = np.array([t.dhf298 for t in tables])
    s298 = np.array([t.s298 for t in tables])
    flat = np.where(np.ptp(y, axis=1) <= 1e-13 * np.abs(y[:, 0]), y[:, 0], np.nan)
    low, high = _coefficients(basis, res.alpha, res.beta, tmid, dhf, s298, flat)
    cp_f, h_f, s_f = (_piecewise(fn, low, high, tmid, T) for fn in (nasa7.cp_r, nasa7.h_rt, nasa7.s_r))
    h_t = np.stack([np.asarray(t.h, dtype=float)[k] for t, k in zip(tables, keeps)]) / (C.R * T)
    s_t = np.stack([np.asarray(t.s, dtype=float)[k] for t, k in zip(tables, keeps)]) / C.R
    g_f = h_f - s_f
    errs = {
        "g_rt": _property_error(g_f, h_t - s_t, T, True),
        "h_rt": _property_error(h_f, h_t, T, True),
        "s_r": _property_error(s_f, s_t, T, True),
    }
    # conditioning: the 1/Cp-scaled design matrix (unit weights), and evaluation of the monomials
    MqT = np.ascontiguousarray(basis.qmaps(tmid, sd).transpose(1, 2, 0))
    buf = np.empty((2 * S, T.size))
    np.divide(1.0, y * y, out=buf[:S])  # a = w/y², w = 1
    G0, _ = _normal(basis.P, basis.C, buf, basis.mask(tmid), MqT, y)
    ev = np.linalg.eigvalsh(G0.transpose(2, 0, 1))
    cond = np.sqrt(ev[:, -1] / np.maximum(ev[:, 0], 1e-300 * ev[:, -1]))
    terms = _piecewise(_abs_terms, low, high, tmid, T)
    ev_cond = (terms / np.maximum(np.abs(cp_f), 1e-300)).max(axis=1).tolist()
    cp_min, cp_max = cp_f.min(axis=1).tolist(), cp_f.max(axis=1).tolist()
    slack = _between_points(low, high, tmid, T, basis.tlow, basis.thigh).tolist()
    errs["cp_r"] = _property_error(cp_f, y, T, False)  # overwrites cp_f
    # the jumps of Nasa7Fit.continuity(), for all species at once
    jumps = {}
    for key in ("cp_r", "h_rt", "s_r"):
        fn = getattr(nasa7, key)
        lo, hi = fn(low.T, tmid), fn(high.T, tmid)
        jumps[key] = (np.abs(hi - lo) / np.maximum(np.abs(lo), 1.0)).tolist()
    tmid_l, bound_l, iter_l, cond_l = tmid.tolist(), res.bound.tolist(), res.iterations.tolist(), cond.tolist()
    cp_e, h_e, s_e, g_e = errs["cp_r"], errs["h_rt"], errs["s_r"], errs["g_rt"]
    jc, jh, js = jumps["cp_r"], jumps["h_rt"], jumps["s_r"]
    tlow, thigh, points = basis.tlow, basis.thigh, int(T.size)
    fits = []
    for k, (lo_k, hi_k) in enumerate(zip(low.tolist(), high.tolist())):
        o = opts[k]
        fit = _make(
            Nasa7Fit, name=tables[k].name, formula=tuple(o["formula"]), tlow=tlow, tmid=tmid_l[k],
            thigh=thigh, low=tuple(lo_k), high=tuple(hi_k), charge=int(o["charge"]),
        )
        limit = _lp_limit(basis.design(tmid[k], sd), y[k]) if o["with_limit"] else None
        cp_warning = float(o["cp_warning"])
        warnings = _warnings(fit, cp_e[k], cp_warning, (cp_min[k], cp_max[k]), o["cp_r_ceiling"], cond_l[k],
                             slack=slack[k])
        q = _make(
            FitQuality, tmid=tmid_l[k], tmid_auto=bool(auto[k]),
            cp_r=cp_e[k], h_rt=h_e[k], s_r=s_e[k], g_rt=g_e[k],
            minimax_bound=bound_l[k], minimax_limit=limit,
            continuity_cp_r=jc[k], continuity_h_rt=jh[k], continuity_s_r=js[k],
            condition=cond_l[k], evaluation_condition=ev_cond[k],
            iterations=iter_l[k], points=points, second_derivative=sd,
            cp_warning=cp_warning, warnings=tuple(warnings),
        )
        object.__setattr__(fit, "quality", q)  # frozen dataclass: set once, before anyone sees it
        fits.append(fit)
    return fits


def _warnings(fit, cp_err: PropertyError, threshold, cp_range, ceiling, cond, slack=None):
    """Quality warnings of one fit (strings).

    ``cp_range`` is (min, max) of the fitted Cp/R on the fit grid.  Where
    those come near a limit (Cp/R < 5/2, the translational minimum of any gas,
    or above the ceiling) the fitted polynomial is checked every 0.5 K —
    unless ``slack``, a bound on how far the fitted Cp/R can go beyond
    ``cp_range`` between and beyond the grid points (:func:`_between_points`),
    shows that the check cannot find a value ≤ 0 or above the ceiling's margin.
    """
    out = []
    if cp_err.max_rel > threshold:
        out.append(f"poor fit: max Cp error {100 * cp_err.max_rel:.2f} % at {cp_err.t_rel:g} K "
                   f"exceeds {100 * threshold:.2f} %")
    lo_cp, hi_cp = cp_range
    if ceiling is not None and type(ceiling) is not float:  # e.g. a ClassicalCeiling: its value if needed
        lower = getattr(ceiling, "lower", None)
        ceiling = None if lower is not None and hi_cp <= lower and lo_cp >= 2.5 else float(ceiling)
    near = lo_cp < 2.5 or (ceiling is not None and hi_cp > ceiling)
    if near and slack is not None:
        near = lo_cp - slack <= 0 or (ceiling is not None and hi_cp + slack > ceiling * (1 + CLASSICAL_MARGIN))
    if not near:
        return out + ([f"ill-conditioned fit: design condition number {cond:.3g}"]
                      if cond > CONDITION_WARNING else [])
    Tc = np.linspace(fit.tlow, fit.thigh, int(math.ceil((fit.thigh - fit.tlow) / CHECK_SPACING)) + 1)
    cp_c = fit.cp_r(Tc)
    if cp_c.min() <= 0:
        i = int(cp_c.argmin())
        out.append(f"fitted Cp is not positive: Cp/R = {cp_c[i]:.4g} at {Tc[i]:g} K")
    if ceiling is not None and cp_c.max() > ceiling * (1 + CLASSICAL_MARGIN):
        i = int(cp_c.argmax())
        out.append(f"fitted Cp/R = {cp_c[i]:.4f} at {Tc[i]:g} K exceeds the classical "
                   f"high-temperature limit {ceiling:.4f} by more than {100 * CLASSICAL_MARGIN:g} %")
    if cond > CONDITION_WARNING:
        out.append(f"ill-conditioned fit: design condition number {cond:.3g}")
    return out


def fit_table(table, *, tlow: float = 200.0, tmid: float | str = "auto", thigh: float = 6000.0,
              cp_warning: float = 0.005, second_derivative: bool = False, formula=(), charge: int = 0,
              cp_r_ceiling: float | None = None, with_limit: bool = False) -> Nasa7Fit:
    """Fit one ThermoTable with the two-range seven-coefficient form (see module docstring).

    Parameters
    ----------
    table : ThermoTable
        Cp, H, S of the species on a grid covering [tlow, thigh] [K].
    tlow, thigh : float
        Range ends [K]; only grid points inside are fitted.
    tmid : float or "auto"
        The range break [K], or "auto" for the search of the module docstring.
    cp_warning : float
        Max relative Cp error above which the fit is flagged (default 0.5 %).
    second_derivative : bool
        Also make d²(Cp/R)/dT² continuous at Tmid.
    formula, charge
        Copied into the :class:`Nasa7Fit`.
    cp_r_ceiling : float or ClassicalCeiling, optional
        Classical high-temperature limit of Cp/R (:func:`classical_cp_r`);
        the fit is flagged if its Cp/R exceeds it by more than 1 %.  A
        :class:`ClassicalCeiling` is evaluated only if the fit needs its value.
    with_limit : bool
        Also solve the linear programme for the exact minimax limit
        (:func:`minimax_limit`) and store it in the quality.

    Returns
    -------
    Nasa7Fit with ``quality`` a :class:`FitQuality`.

    Examples
    --------
    Argon's Cp is 5/2 R, a quartic: the fit reproduces it and S°298.

    >>> import pipeline.species as sp, pipeline.thermo as th
    >>> ar = sp.Species(name="Ar", formula=(("Ar", 1),), shape="atom", symmetry=1,
    ...                 mass=39.948 * C.atomic_mass, sources=("x",), formation_enthalpy=0.0)
    >>> f = fit_table(th.thermo_table(ar), formula=ar.formula)
    >>> round(f.low[0], 10), round(f.quality.max_cp_error, 12)
    (2.5, 0.0)
    >>> round(float(f.s(298.15)), 3)
    154.846
    """
    return fit_tables([table], [dict(tlow=tlow, tmid=tmid, thigh=thigh, cp_warning=cp_warning,
                                     second_derivative=second_derivative, formula=formula,
                                     charge=charge, cp_r_ceiling=cp_r_ceiling,
                                     with_limit=with_limit)])[0]


def _lp_limit(B, y) -> float:
    from scipy.optimize import linprog

    # the limit does not depend on the basis of the column space: an orthonormal one
    # (QR of the scaled design) keeps the programme well conditioned for HiGHS
    A = np.linalg.qr(B / y[:, None])[0] * math.sqrt(B.shape[0])
    n, p = A.shape
    ones = np.ones((n, 1))
    A_ub = np.block([[A, -ones], [-A, -ones]])
    b_ub = np.concatenate([np.ones(n), -np.ones(n)])
    cost = np.zeros(p + 1)
    cost[-1] = 1.0
    res = linprog(cost, A_ub=A_ub, b_ub=b_ub, bounds=[(None, None)] * p + [(0, None)], method="highs")
    if res.status != 0:
        raise RuntimeError(f"minimax linear programme failed: {res.message}")
    return float(res.fun)


def minimax_limit(table, tlow: float = 200.0, tmid: float = 1000.0, thigh: float = 6000.0, *,
                  second_derivative: bool = False) -> float:
    """The least achievable max relative Cp error for these ranges (a linear programme).

    min_θ max_i |(B θ)_i / y_i − 1| over the grid points of ``table`` in
    [tlow, thigh], with the continuity conditions of the module docstring
    built into B; solved as min t subject to −t ≤ (Bθ)_i/y_i − 1 ≤ t with
    HiGHS (scipy.optimize.linprog).  Reference: Cheney (1966), ch. 2.

    >>> import pipeline.species as sp, pipeline.thermo as th
    >>> ar = sp.Species(name="Ar", formula=(("Ar", 1),), shape="atom", symmetry=1,
    ...                 mass=39.948 * C.atomic_mass, sources=("x",), formation_enthalpy=0.0)
    >>> minimax_limit(th.thermo_table(ar)) < 1e-12
    True
    """
    keep = _grid(table, tlow, thigh)
    T = np.asarray(table.T, dtype=float)[keep]
    y = np.asarray(table.cp, dtype=float)[keep] / C.R
    return _lp_limit(_Basis(T, tlow, thigh).design(tmid, second_derivative), y)


def classical_cp_r(species, tlow: float = 200.0, thigh: float = 6000.0) -> float:
    """Classical high-temperature limit of Cp°/R for a species, over [tlow, thigh] [K].

    Cp/R → 5/2 (translation with pV = RT) + 0 / 1 / 3/2 (atom / linear /
    nonlinear rigid rotation) + 1 per harmonic vibration (equipartition), to
    which the largest electronic contribution Cp_el/R on [tlow, thigh] is
    added (a Schottky term, not a classical one).  A hindered torsion counts
    as the larger of 1 and its own largest Cv/R on the range; a species with
    a ``diatomic`` level sum (anharmonic, centrifugal stretching: it may
    exceed the harmonic limit) counts as the larger of 1 (rotation) + 1
    (vibration) and the level sum's own largest Cp/R.  Equipartition:
    D. A. McQuarrie, *Statistical Mechanics* (1976), ch. 8.

    >>> import pipeline.species as sp
    >>> h2o = sp.Species(name="H2O", formula=(("H", 2), ("O", 1)), shape="nonlinear", symmetry=2,
    ...                  mass=18.015 * C.atomic_mass, sources=("x",), formation_enthalpy=0.0,
    ...                  rotational_constants=(2788.0, 1452.0, 928.0),
    ...                  frequencies=(365705.0, 159475.0, 375593.0))
    >>> classical_cp_r(h2o)
    7.0
    """
    from pipeline.statmech import electronic, harmonic_frequencies
    from pipeline.statmech.electronic import ground_entropy

    T = _classical_grid(float(tlow), float(thigh))
    value = 2.5
    if species.diatomic is not None:
        from pipeline.statmech.diatomic import diatomic_terms

        value += max(2.0, float(diatomic_terms(species, T).cp_r.max()))
    else:
        value += {"atom": 0.0, "linear": 1.0, "nonlinear": 1.5}[species.shape]
        if species.shape != "atom":
            value += float(len(harmonic_frequencies(species)))
    if species.torsions:
        from pipeline.statmech.torsion import torsion_terms

        for tor in species.torsions:
            value += max(1.0, float(torsion_terms(tor, T).cp_r.max()))
    if ground_entropy(species.electronic) is None:  # levels above the ground: a Schottky term
        value += float(electronic(species.electronic, T).cp_r.max())
    return value


class ClassicalCeiling:
    """:func:`classical_cp_r` of a species, computed when first asked for (``float(c)``).

    ``lower`` [Cp/R] is a lower bound that costs nothing: each torsion counted as 1, a
    ``diatomic`` level sum as 2 and excited electronic levels as 0 (the least each
    contributes to :func:`classical_cp_r`), slightly reduced against rounding.  The
    fit's warnings need the value only where the fitted Cp/R exceeds ``lower`` (or
    drops below 5/2), so the level sums, torsions and Schottky terms are mostly not
    evaluated.

    >>> import pipeline.species as sp
    >>> h2o = sp.Species(name="H2O", formula=(("H", 2), ("O", 1)), shape="nonlinear", symmetry=2,
    ...                  mass=18.015 * C.atomic_mass, sources=("x",), formation_enthalpy=0.0,
    ...                  rotational_constants=(2788.0, 1452.0, 928.0),
    ...                  frequencies=(365705.0, 159475.0, 375593.0))
    >>> c = ClassicalCeiling(h2o, 200.0, 6000.0)
    >>> c.lower <= float(c) == classical_cp_r(h2o)
    True
    """

    __slots__ = ("species", "tlow", "thigh", "lower", "_value")

    def __init__(self, species, tlow: float = 200.0, thigh: float = 6000.0):
        self.species, self.tlow, self.thigh, self._value = species, tlow, thigh, None
        if species.diatomic is not None:
            base = 2.5 + 2.0
        else:
            base = 2.5 + {"atom": 0.0, "linear": 1.0, "nonlinear": 1.5}[species.shape]
            if species.shape != "atom":
                from pipeline.statmech import harmonic_frequencies

                base += float(len(harmonic_frequencies(species)))
        self.lower = (base + float(len(species.torsions or ()))) * (1.0 - 1e-12)

    def __float__(self) -> float:
        if self._value is None:
            self._value = classical_cp_r(self.species, self.tlow, self.thigh)
        return self._value

    def __repr__(self) -> str:
        return f"ClassicalCeiling({self.species.name!r}, {self.tlow!r}, {self.thigh!r})"


@functools.lru_cache(maxsize=8)
def _classical_grid(tlow: float, thigh: float) -> np.ndarray:
    """The 60 temperatures [K] on which :func:`classical_cp_r` looks for the largest contributions
    (they are broad: 60 points find them)."""
    T = np.linspace(tlow, thigh, 60)
    T.flags.writeable = False
    return T


@functools.lru_cache(maxsize=1)
def _no_overrides():
    from pipeline.species import FitOptions

    return FitOptions()


def fit_options(species, settings) -> dict:
    """fit_table keyword arguments for one species under build ``settings``.

    Applies the species file's ``fit:`` overrides (Settings.for_species) and
    adds formula, charge and the classical Cp ceiling (a :class:`ClassicalCeiling`,
    evaluated only where a fit comes near it; ``float()`` gives its value).
    """
    # Settings.for_species applies the species' fit: block; without one it would only copy
    s = settings if species.fit == _no_overrides() else settings.for_species(species)
    return dict(tlow=float(s.tmin), tmid=s.tmid if s.tmid == "auto" else float(s.tmid),
                thigh=float(s.tmax), cp_warning=float(s.cp_warning), formula=species.formula,
                charge=species.charge, cp_r_ceiling=ClassicalCeiling(species, float(s.tmin), float(s.tmax)))


# --------------------------------------------------------------------------
# Benchmark
# --------------------------------------------------------------------------


def synthetic_species(n: int, seed: int = 0) -> list:
    """``n`` random but plausible rigid-rotor harmonic-oscillator species (benchmarks, tests).

    2–10 atoms of C, H, N, O; linear (diatomics, some triatomics) or
    nonlinear; rotational constants log-uniform in 0.05–20 cm⁻¹ (A ≥ B ≥ C);
    3N−5 or 3N−6 wavenumbers log-uniform in 150–3800 cm⁻¹; a ground level of
    degeneracy 1–3 and, for a third of them, one excited level at
    100–20000 cm⁻¹; ΔfH°298 uniform in ±500 kJ/mol.  The numbers are
    invented (synthetic load, not data).
    """
    from pipeline.elements import formula_mass
    from pipeline.species import Species

    rng = np.random.default_rng(seed)
    out = []
    for i in range(n):
        atoms = int(rng.integers(2, 11))
        counts = rng.multinomial(atoms, [0.3, 0.4, 0.1, 0.2])
        formula = tuple((el, int(c)) for el, c in zip(("C", "H", "N", "O"), counts) if c)
        linear = atoms == 2 or (atoms == 3 and rng.random() < 0.3)
        nmodes = 3 * atoms - (5 if linear else 6)
        rot = np.sort(np.exp(rng.uniform(np.log(0.05), np.log(20.0), 1 if linear else 3)))[::-1]
        freqs = np.exp(rng.uniform(np.log(150.0), np.log(3800.0), nmodes))
        levels = [(int(rng.integers(1, 4)), 0.0)]
        if rng.random() < 1 / 3:
            levels.append((int(rng.integers(1, 5)), float(rng.uniform(100.0, 20000.0)) * 100))
        out.append(Species(
            name=f"X{i}", formula=formula, shape="linear" if linear else "nonlinear",
            symmetry=int(rng.integers(1, 4)), mass=formula_mass(dict(formula)) * C.atomic_mass,
            sources=("synthetic",), formation_enthalpy=float(rng.uniform(-5e5, 5e5)),
            rotational_constants=tuple(float(b) * 100 for b in rot),
            frequencies=tuple(float(f) * 100 for f in freqs), electronic=tuple(levels),
        ))
    return out


def benchmark_fit(n: int = 1000, seed: int = 0, repeat: int = 3) -> dict:
    """Time the fitting stage of a build on ``n`` synthetic species: :func:`fit_options`
    under default settings, then :func:`fit_tables` (Tmid search included).

    The tables are computed first and not timed.  Returns the best wall time
    of ``repeat`` runs [s] and the least CPU time [s], species per second, and
    the worst certified error/limit ratio.  Run with one BLAS thread for a
    one-core number: ``OPENBLAS_NUM_THREADS=1 python -c "import pipeline.fit as f;
    print(f.benchmark_fit())"``.
    """
    import time

    from pipeline.settings import Settings
    from pipeline.thermo import thermo_table

    species = synthetic_species(n, seed)
    tables = [thermo_table(sp) for sp in species]
    settings = Settings()
    best = cpu = math.inf
    fits = []
    for _ in range(repeat):
        t0, c0 = time.perf_counter(), time.process_time()
        fits = fit_tables(tables, [fit_options(sp, settings) for sp in species])
        best = min(best, time.perf_counter() - t0)
        cpu = min(cpu, time.process_time() - c0)
    return dict(species=n, seconds=best, cpu_seconds=cpu, species_per_second=n / best,
                worst_ratio=max(f.quality.limit_ratio for f in fits))
