"""The single-case integrator: Dormand-Prince 5(4) with a PI step-size controller, landing on output times.

Numerics only: the right-hand side is :func:`estimator.physics.circuit.rhs` (the physics), called as the
very compiled function the batch integrator (:mod:`estimator.numerics.rkc`) uses. The embedded
fourth-order solution gives the local error estimate; the step follows Hairer's PI controller and
is cut to land exactly on every output time. Runge-Kutta methods keep every linear invariant
exactly, so the species mass balances of the model hold to rounding error.

References
----------
.. [1] Dormand JR, Prince PJ. A family of embedded Runge-Kutta formulae. J Comput Appl Math
   1980;6:19-26.
.. [2] Hairer E, Norsett SP, Wanner G. Solving Ordinary Differential Equations I, 2nd ed. Springer
   1993, sec. II.4-5 (tableau, Table II.5.2; starting step) and sec. IV.2 (PI step-size control).

Examples
--------
>>> bool(np.allclose(_A.sum(axis=1), _C) and abs(_E.sum()) < 1e-15)  # a consistent tableau
True
"""

from __future__ import annotations

import math

import numba
import numpy as np

from ..physics.circuit import NW, NY, rhs

_jit = numba.njit(cache=True, fastmath=False, nogil=True, error_model="numpy")

#: Dormand-Prince 5(4) tableau (Dormand and Prince 1980; Hairer et al. 1993, Table II.5.2).
_C = np.array([0.0, 1 / 5, 3 / 10, 4 / 5, 8 / 9, 1.0, 1.0])
_A = np.array(
    [
        [0, 0, 0, 0, 0, 0],
        [1 / 5, 0, 0, 0, 0, 0],
        [3 / 40, 9 / 40, 0, 0, 0, 0],
        [44 / 45, -56 / 15, 32 / 9, 0, 0, 0],
        [19372 / 6561, -25360 / 2187, 64448 / 6561, -212 / 729, 0, 0],
        [9017 / 3168, -355 / 33, 46732 / 5247, 49 / 176, -5103 / 18656, 0],
        [35 / 384, 0, 500 / 1113, 125 / 192, -2187 / 6784, 11 / 84],
    ]
)
#: Fifth-order weights minus embedded fourth-order weights.
_E = np.array([71 / 57600, 0.0, -71 / 16695, 71 / 1920, -17253 / 339200, 22 / 525, -1 / 40])


@_jit
def integrate_phase(y0, p, t_out, rtol, atol, h0, max_steps):
    """Integrate one phase from ``t_out[0]`` to ``t_out[-1]``, landing exactly on every ``t_out``.

    Parameters
    ----------
    y0 : float64[NY]
        State at ``t_out[0]``.
    p : float64[NP]
        Parameters of the phase.
    t_out : float64[m]
        Increasing output times [min]; the first is the start of the phase.
    rtol, atol : float [-], float64[NY] [fraction or mmol, as the state]
        Relative tolerance and absolute-tolerance vector (in the units of the state).
    h0 : float
        First step to try [min] (the last accepted step of the previous phase, or 0 to choose).
    max_steps : int
        Safety limit on accepted plus rejected steps.

    Returns
    -------
    ys : float64[m, NY]
        States at ``t_out``.
    stats : int64[3]
        Accepted steps, rejected steps, right-hand-side evaluations (negative accepted = failure).
    h : float
        Last step size [min].

    References
    ----------
    Dormand JR, Prince PJ. J Comput Appl Math 1980;6:19-26; Hairer E, Norsett SP, Wanner G. Solving
    Ordinary Differential Equations I, 2nd ed. Springer 1993, sec. II.4-5 and IV.2.
    """
    m = t_out.shape[0]
    ys = np.empty((m, NY))
    ys[0] = y0
    stats = np.zeros(3, dtype=np.int64)
    w = np.zeros(NW)
    k = np.empty((7, NY))
    y = y0.copy()
    ytmp = np.empty(NY)
    e_i = np.empty(NY)  # error terms
    t = t_out[0]
    rhs(y, p, w, k[0])
    stats[2] += 1
    span = t_out[m - 1] - t_out[0]
    h = h0
    if h <= 0.0:
        # Hairer's starting-step heuristic, reduced to its first estimate.
        d0 = 0.0
        d1 = 0.0
        for i in range(NY):
            sc = atol[i] + rtol * abs(y[i])
            d0 += (y[i] / sc) ** 2
            d1 += (k[0, i] / sc) ** 2
        d0 = math.sqrt(d0 / NY)
        d1 = math.sqrt(d1 / NY)
        h = 0.01 * d0 / d1 if d0 > 1e-5 and d1 > 1e-5 else 1e-4
        h = min(h, 0.1)
    err_old = 1e-4
    h_prop = h
    j = 1
    steps = 0
    tiny = 1e-12 * max(1.0, span)
    while j < m:
        if steps >= max_steps:
            stats[0] = -stats[0] - 1
            return ys, stats, h_prop
        steps += 1
        t_next = t_out[j]
        h = h_prop
        last = False
        if t + h >= t_next - tiny:
            h = t_next - t
            last = True
        # Loops over the states innermost (vectorised), summing the stages in the same order as before.
        for s in range(1, 7):
            for i in range(NY):
                ytmp[i] = y[i]
            for r in range(s):
                a = h * _A[s, r]
                for i in range(NY):
                    ytmp[i] += a * k[r, i]
            rhs(ytmp, p, w, k[s])
        stats[2] += 6
        # The 7th stage is evaluated at the 5th-order solution (first same as last).
        for i in range(NY):
            e_i[i] = 0.0
        for r in range(7):
            for i in range(NY):
                e_i[i] += _E[r] * k[r, i]
        for i in range(NY):
            e = e_i[i] * h / (atol[i] + rtol * max(abs(y[i]), abs(ytmp[i])))
            e_i[i] = e * e
        err = 0.0
        for i in range(NY):
            err += e_i[i]
        err = math.sqrt(err / NY)
        if err <= 1.0:
            t = t_next if last else t + h
            for i in range(NY):
                y[i] = ytmp[i]
                k[0, i] = k[6, i]
            stats[0] += 1
            if last:
                ys[j] = y
                j += 1
            # PI step-size control (Hairer et al. 1993, sec. IV.2, alpha 0.7/5, beta 0.4/5)
            fac = 0.9 * err ** (-0.7 / 5) * err_old ** (0.4 / 5) if err > 0.0 else 5.0
            fac = min(5.0, max(0.2, fac))
            err_old = max(err, 1e-4)
            if last:
                h_prop = min(h_prop, h * fac) if fac < 1.0 else h_prop
            else:
                h_prop = h * fac
        else:
            stats[1] += 1
            h_prop = h * max(0.2, 0.9 * err ** (-1 / 5))
            if h_prop < 1e-12:
                stats[0] = -stats[0] - 1
                return ys, stats, h_prop
    return ys, stats, h_prop
