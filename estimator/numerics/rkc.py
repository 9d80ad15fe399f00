"""The stabilised explicit integrator of the batch engine: RKC2, parallel over cases.

The circle-system model is stiff-ish but its eigenvalues lie close to the negative real axis
(perfusion-limited compartments in series, fastest time constants about 0.2-0.3 min), so the
Dormand-Prince method of the single-case engine is stability-limited (about 600 steps for a 4-hour
case at its tolerance). The second-order Runge-Kutta-Chebyshev method RKC2 stretches the real
stability interval to about ``0.65 s**2`` with ``s`` stages of a Chebyshev recursion, so the step
is chosen by accuracy and the stage count by the spectral radius, estimated by a nonlinear power
iteration on the core states at the start of each phase and every ``RHO_EVERY`` accepted
steps. Step-size control, stage count, damping (2/13), starting step and error estimate follow the
authors' code RKC. Being a Runge-Kutta method it keeps every linear invariant, so the species
balances close to rounding error. The right-hand side is :func:`estimator.physics.circuit.rhs`, the very
compiled function of the single-case engine.

References
----------
.. [1] Sommeijer BP, Shampine LF, Verwer JG. RKC: an explicit solver for parabolic PDEs.
   J Comput Appl Math 1998;88:315-26.
.. [2] Verwer JG. Explicit Runge-Kutta methods for parabolic partial differential equations.
   Appl Numer Math 1996;22:359-79.

Examples
--------
>>> from estimator.physics import circuit as c
>>> MAX_STAGES >= 2 and NCORE == c.Y_FGIN
True
"""

from __future__ import annotations

import math

import numba
import numpy as np
from numba.core import cgutils
from numba.extending import intrinsic

from ..limits import INSPIRED_OXYGEN_SETTLE
from ..physics import circuit as c

#: States the right-hand side reads (circuit, lungs, blood, tissues); the rest are running totals.
NCORE = c.Y_FGIN
#: Spectral radius: safety factor on the power-iteration estimate, re-estimation interval
#: (accepted steps) and iteration limit; largest stage count.
RHO_SAFETY = 1.2
RHO_EVERY = 25
RHO_ITERATIONS = 20
MAX_STAGES = 200
#: Rows of a case's scratch array: 0-6 stage vectors, 7 the case's running extras, 8 the eigenvector estimate
#: (carried from phase to phase), 9 a spare derivative, 10 the flows workspace (``NW`` entries).
WORK_ROWS = 11

#: Divisions compile without Python's zero-divisor check (numpy's error model: IEEE results, the same for every
#: non-zero divisor), which lets the compiler vectorise the loops.
_jit = numba.njit(cache=True, nogil=True, error_model="numpy")


@intrinsic
def _unowned(typingctx, arr):
    """A view of ``arr`` that carries no reference count, so passing it on costs no atomic count updates.

    Valid only while ``arr`` lives: numba frees an array after its last use, so the caller must use ``arr``
    itself after the last use of the view (or ``arr`` must be an argument of the caller's caller).
    """

    def codegen(context, builder, sig, args):
        ary = context.make_array(sig.args[0])(context, builder, value=args[0])
        ary.meminfo = cgutils.get_null_value(ary.meminfo.type)
        ary.parent = cgutils.get_null_value(ary.parent.type)
        return ary._getvalue()

    return arr(arr), codegen


@_jit
def _norm(v, n):
    s = 0.0
    for i in range(n):
        s += v[i] * v[i]
    return math.sqrt(s)


@_jit
def _sum4(v, n):
    """Sum of ``v[:n]`` in four interleaved partial sums (independent additions)."""
    s0 = s1 = s2 = s3 = 0.0
    m = n - n % 4
    for i in range(0, m, 4):
        s0 += v[i]
        s1 += v[i + 1]
        s2 += v[i + 2]
        s3 += v[i + 3]
    for i in range(m, n):
        s0 += v[i]
    return (s0 + s1) + (s2 + s3)


@_jit
def spectral_radius(y, p, f0, w, v, z, fz):
    """Estimate of the spectral radius of the Jacobian at ``y`` (nonlinear power method).

    Works on the core states only (the running totals have zero eigenvalues); ``z`` carries the
    eigenvector estimate from call to call, so later calls converge in a few iterations.

    Parameters
    ----------
    y : float64[NY]
        State (units of :mod:`estimator.physics.circuit`).
    p : float64[NP]
        Parameters of the phase.
    f0 : float64[NY]
        Right-hand side at ``y`` [state unit/min].
    w, v, fz : float64[NW], float64[NY], float64[NY]
        Scratch.
    z : float64[NY]
        In and out: eigenvector estimate (zero on the first call).

    Returns
    -------
    rho : float [1/min]
        The estimate times :data:`RHO_SAFETY`.
    evaluations : int
        Right-hand-side evaluations used.

    References
    ----------
    Sommeijer BP et al. J Comput Appl Math 1998;88:315-26; Verwer JG. Appl Numer Math 1996;22:359-79.
    """
    ynrm = _norm(y, NCORE)
    znrm = _norm(z, NCORE)
    least = 2 if znrm > 0.0 else 3  # iterations before the convergence test: fewer from a carried eigenvector
    if znrm == 0.0:
        for i in range(NCORE):
            z[i] = 1.0 + 0.1 * i / NCORE
        znrm = _norm(z, NCORE)
    dy = 1e-6 * max(ynrm, 1e-3)
    for i in range(c.NY):
        v[i] = y[i]
    rho = 0.0
    it = 0
    while it < RHO_ITERATIONS:
        it += 1
        for i in range(NCORE):
            v[i] = y[i] + z[i] * (dy / znrm)
        c.rhs(v, p, w, fz)
        for i in range(NCORE):
            z[i] = fz[i] - f0[i]
        znrm = _norm(z, NCORE)
        rold = rho
        rho = znrm / dy
        if znrm == 0.0 or (it >= least and abs(rho - rold) < 0.01 * rho):
            break
    return RHO_SAFETY * rho, it


@_jit
def chebyshev_table():
    """``w0`` and ``w1`` of the RKC2 recursion for every stage count ``m`` (rows; Sommeijer et al. 1998, eq. 2.8).

    They depend on ``m`` only, so the batch computes them once instead of at every step.

    Returns
    -------
    float64[MAX_STAGES + 1, 2] [-]
        ``w0`` and ``w1`` by stage count (rows 0 and 1 unused).

    References
    ----------
    Sommeijer BP et al. J Comput Appl Math 1998;88:315-26; Verwer JG. Appl Numer Math 1996;22:359-79.

    Examples
    --------
    >>> t = chebyshev_table.py_func()  # the Python function: no compilation in a doctest
    >>> round(float(t[2, 0]), 6), t.shape == (MAX_STAGES + 1, 2)
    (1.038462, True)
    """
    out = np.zeros((MAX_STAGES + 1, 2))
    for m in range(2, MAX_STAGES + 1):
        w0 = 1.0 + 2.0 / (13.0 * m * m)
        t1 = w0 * w0 - 1.0
        t2 = math.sqrt(t1)
        arg = m * math.log(w0 + t2)
        out[m, 0] = w0
        out[m, 1] = math.sinh(arg) * t1 / (math.cosh(arg) * m * t2 - w0 * math.sinh(arg))
    return out


@_jit
def rkc_phase(y, p, span, rtol, atol, h, work, stats, cheb):
    """Integrate one phase of ``span`` minutes in place on ``y`` with RKC2.

    Also tracks in ``work[7, 0]`` the lowest inspired O2 at step ends after the first minute
    (``work[7, 1]`` is the case time).

    Parameters
    ----------
    y : float64[NY]
        In and out: the state.
    p : float64[NP]
        Parameters of the phase.
    span : float [min]
    rtol, atol : float [-], float64[NY] [fraction or mmol, as the state]
    h : float [min]
        First step to try (0 to choose).
    work : float64[WORK_ROWS, NY]
        Scratch (see :func:`integrate_cases`).
    stats : int64[5]
        In and out: accepted, rejected, evaluations, phases, failures.
    cheb : float64[MAX_STAGES + 1, 2]
        :func:`chebyshev_table`.

    Returns
    -------
    float
        Last accepted step [min].

    References
    ----------
    Sommeijer BP et al. J Comput Appl Math 1998;88:315-26; Verwer JG. Appl Numer Math 1996;22:359-79.
    """
    n = c.NY
    yn, fn, yjm1, yjm2, ynew, fnew, v = work[0], work[1], work[2], work[3], work[4], work[5], work[6]
    z, fz, w = work[8], work[9], work[10, : c.NW]
    w[:] = 0.0  # the flows workspace starts each phase afresh (the hold dial's first guess is 0)
    c.rhs(y, p, w, fn)
    rho, k = spectral_radius(y, p, fn, w, v, z, fz)
    stats[2] += 1 + k
    stats[3] += 1
    t = 0.0
    if h <= 0.0:
        # Starting step of RKC: bounded by the spectral radius, then by a second-derivative
        # estimate from one Euler step (Sommeijer et al. 1998, sec. 4).
        h = min(span, 1.0 / max(rho, 1e-6))
        for i in range(n):
            v[i] = y[i] + h * fn[i]
        c.rhs(v, p, w, fz)
        stats[2] += 1
        est = 0.0
        for i in range(n):
            est += ((fz[i] - fn[i]) / h / (atol[i] + rtol * abs(y[i]))) ** 2
        est = h * math.sqrt(est / n)
        if 0.1 * h < span * math.sqrt(est):
            h = max(0.1 * h / math.sqrt(est), 1e-9)
    h = min(h, span)
    e3old = 0.0
    hold = h
    since = 0
    first = True
    while t < span:
        last = t + h >= span * (1.0 - 1e-12)
        if last:
            h = span - t
        m = 1 + int(math.sqrt(1.54 * h * rho + 1.0))
        if m > MAX_STAGES:
            m = MAX_STAGES
            h = (m * m - 1) / (1.54 * rho)
            last = False
        for i in range(n):
            yn[i] = y[i]
        # Chebyshev recursion of RKC (Sommeijer et al. 1998, eqs. 2.5-2.9), damping eps = 2/13.
        w0, w1 = cheb[m, 0], cheb[m, 1]
        bjm1 = 1.0 / (4.0 * w0 * w0)
        bjm2 = bjm1
        mus = w1 * bjm1
        for i in range(n):
            yjm2[i] = yn[i]
            yjm1[i] = yn[i] + h * mus * fn[i]
        zjm1, zjm2, dzjm1, dzjm2, d2zjm1, d2zjm2 = w0, 1.0, 1.0, 0.0, 0.0, 0.0
        for _ in range(2, m + 1):
            zj = 2.0 * w0 * zjm1 - zjm2
            dzj = 2.0 * w0 * dzjm1 - dzjm2 + 2.0 * zjm1
            d2zj = 2.0 * w0 * d2zjm1 - d2zjm2 + 4.0 * dzjm1
            bj = d2zj / (dzj * dzj)
            ajm1 = 1.0 - zjm1 * bjm1
            mu = 2.0 * w0 * bj / bjm1
            nu = -bj / bjm2
            mus = mu * w1 / w0
            c.rhs(yjm1, p, w, fnew)
            for i in range(n):
                ynew[i] = mu * yjm1[i] + nu * yjm2[i] + (1.0 - mu - nu) * yn[i] + h * mus * (fnew[i] - ajm1 * fn[i])
            yjm2, yjm1, ynew = yjm1, ynew, yjm2  # the three stage buffers rotate instead of being copied
            bjm2, bjm1 = bjm1, bj
            zjm2, zjm1 = zjm1, zj
            dzjm2, dzjm1 = dzjm1, dzj
            d2zjm2, d2zjm1 = d2zjm1, d2zj
        ynew, yjm1 = yjm1, ynew  # the last stage is the new solution
        c.rhs(ynew, p, w, fnew)  # also leaves the flows of the new state in w
        stats[2] += m
        for i in range(n):  # the scaled error terms, then their sum: two loops the compiler vectorises
            a, b = abs(ynew[i]), abs(yn[i])
            est = (0.8 * (yn[i] - ynew[i]) + 0.4 * h * (fn[i] + fnew[i])) / (atol[i] + rtol * (a if a > b else b))
            v[i] = est * est
        err = math.sqrt(_sum4(v, n) / n)
        if err > 1.0 or not math.isfinite(err):
            stats[1] += 1
            h = 0.8 * h / err ** (1.0 / 3.0) if math.isfinite(err) else 0.1 * h
            if h < 1e-9:
                stats[4] += 1
                return h
            continue
        stats[0] += 1
        t = span if last else t + h
        work[7, 1] += h
        for i in range(n):
            y[i] = ynew[i]
        fn, fnew = fnew, fn  # the new derivative becomes the step's start (a swap of buffers, not a copy)
        if work[7, 1] >= INSPIRED_OXYGEN_SETTLE and w[c.W_FI + c.O2] < work[7, 0]:
            work[7, 0] = w[c.W_FI + c.O2]
        fac = 10.0
        e3 = err ** (1.0 / 3.0)  # one power a step: it is also the next step's errold ** (1/3)
        if first:
            if 0.8 < fac * e3:
                fac = 0.8 / e3
        else:
            a = 0.8 * h * e3old
            b = hold * (e3 * e3)
            if a < fac * b:
                fac = a / b
        first = False
        hold = h
        e3old = e3
        h = max(0.1, fac) * h
        since += 1
        # re-estimated every RHO_EVERY steps even while two stages suffice: skipping those estimates left a stale,
        # low estimate that held 300-kg day-long cases at short two-stage steps (ten times the evaluations; measured)
        if since >= RHO_EVERY and t < span:
            rho, k = spectral_radius(y, p, fn, w, v, z, fz)
            stats[2] += k
            since = 0
    # flows at the end, for the end-tidal MAC against the hold target
    c.flows(y, p, w)
    work[7, 2] = w[c.W_MAC] / p[c.P_TARGET_MAC] if p[c.P_TARGET_MAC] > 0.0 else math.nan
    return hold


@numba.njit(cache=True, parallel=True, nogil=True, error_model="numpy")
def integrate_cases(y0, params, durations, rtol, atol, y_end, makeup, extra, stats):
    """Integrate every case (row) through its phases, in parallel over cases.

    Parameters
    ----------
    y0 : float64[n, NY]
        Initial states.
    params : float64[n, k, NP]
        Parameters of each case's ``k`` phases.
    durations : float64[n, k]
        Phase durations [min]; phases of 0 min are skipped.
    rtol : float [-]
    atol : float64[NY] [fraction or mmol, as the state]
    y_end : float64[n, NY]
        Out: final states.
    makeup : float64[n, k]
        Out: deficit make-up gas of each phase, agent excluded [mmol].
    extra : float64[n, 2]
        Out: lowest inspired O2 at step ends after 1 min; end-tidal MAC over the hold target at the
        end of the last phase (NaN without a MAC target).
    stats : int64[n, 5]
        Out: accepted and rejected steps, evaluations, phases, failures.

    Returns
    -------
    None
        The results are written into ``y_end``, ``makeup``, ``extra`` and ``stats``.

    References
    ----------
    Sommeijer BP et al. J Comput Appl Math 1998;88:315-26; Verwer JG. Appl Numer Math 1996;22:359-79.
    """
    n = y0.shape[0]
    nph = durations.shape[1]
    # The arrays handed to the right-hand side are views without reference counts (the owners outlive them): the
    # atomic increments and decrements of the counts at every call were the hottest instructions of a profile,
    # and on two cores the threads shared the count of ``params``.
    cheb = chebyshev_table()
    for i in numba.prange(n):
        work = np.zeros((WORK_ROWS, c.NY))
        work[7, 0] = 1.0
        y = y0[i].copy()
        st = np.zeros(5, dtype=np.int64)
        h = 0.0
        yu, wu = _unowned(y), _unowned(work)  # y and work are read after the phases: they outlive the views
        for k in range(nph):
            dur = durations[i, k]
            if dur <= 0.0:
                continue
            m0 = 0.0
            for s in range(c.NS):
                if s != c.AGENT:
                    m0 -= y[c.Y_MAKEUP + s]
            h = rkc_phase(yu, _unowned(params[i, k]), dur, rtol, atol, h, wu, st, cheb)
            for s in range(c.NS):
                if s != c.AGENT:
                    m0 += y[c.Y_MAKEUP + s]
            makeup[i, k] = m0
        y_end[i] = y
        extra[i, 0] = work[7, 0]
        extra[i, 1] = work[7, 2]
        stats[i] = st
