"""The circle-system compartment model: state and parameter layout, and the right-hand side (physics only).

This module is the hot loop's physics; the integrators are :mod:`estimator.numerics.dopri5` (one case) and
:mod:`estimator.numerics.rkc` (the batch). It has no package imports, so it can be loaded on its own with the
compiler switched off (the plain-Python speed reference of the benchmarks). It works in plain floats in fixed
internal units: amounts in mmol, time in min, flows in mmol/min, blood and tissue volumes in L, and every gas, blood
or tissue concentration as an *equivalent dry alveolar fraction* F (partial pressure divided by the dry alveolar
pressure, Pb - PH2O). The parameter vectors come from :mod:`estimator.simulation.case_setup` (once per phase), the
results are read back by :mod:`estimator.simulation.assemble`.

Model
-----
Six species (O2, CO2, N2, N2O, the volatile agent, argon) in two gas compartments of constant size, and, for the
four inert or anaesthetic species, six blood and tissue compartments:

* circle circuit (well mixed, ``n_c`` mmol): fresh gas not drawn straight into the inspiratory limb, expired gas
  that passed the absorber (all CO2 removed), deficit make-up gas; leaves as the part of the inspired gas not
  supplied directly by fresh gas, as leak and as unreturned sample gas;
* lungs (FRC, ``n_L`` mmol dry gas): inspired alveolar ventilation in, expired alveolar ventilation out (inspired
  minus net uptake: the concentration and second-gas effects follow), blood uptake;
* arterial and mixed-venous blood, and the vessel-rich, muscle, fat and vessel-poor groups, perfusion-limited (Eger
  1974; Mapleson 1963), with hepatic metabolism of the agent from the venous outflow of the vessel-rich group; fat
  in two compartments of high and low blood flow per kg (Levitt 2007), and fat next to the vessel-rich organs and to
  muscle that takes up agent by intertissue diffusion from them (Perl, Lesser and Steele 1960; Eger and Saidman
  2005);
* O2 is consumed and CO2 produced at the patient's metabolic rates (Brody scaling).

Circle layout: the exhaust (APL or spill) valve vents mixed expired gas *before* the absorber, so at high fresh-gas
flow much exhaled CO2 leaves unabsorbed. Fresh gas enters the inspiratory limb: the share of it that flows during
inspiration (``f_insp``) is inhaled directly, the rest fills the circuit. Where the circuit would need more gas than
the expired limb returns (fresh gas below net uptake plus leak plus unreturned sample flow) the bag empties: the
shortfall is recorded as a volume deficit and made good by make-up gas (fresh-gas composition, or room air for
ventilators with an air-entrainment valve and whenever no fresh gas flows at all), which the totals count
separately; the make-up gas enters the balance of every species, so the fractions sum to 1. A vaporizer with no
carrier gas delivers nothing.

Every species enters and leaves through explicit flows (running totals in the state), so an integrator that keeps
linear invariants (any Runge-Kutta method) closes the species mass balances to rounding error.

References
----------
.. [1] Eger EI II. Anesthetic Uptake and Action. Williams & Wilkins 1974.
.. [2] Mapleson WW. An electric analogue for uptake and exchange of inert gases and other agents.
   J Appl Physiol 1963;18:197-204.
.. [3] Levitt DG. Heterogeneity of human adipose blood flow. BMC Clin Pharmacol 2007;7:1.
.. [4] Perl W, Lesser GT, Steele JM. The kinetics of distribution of the fat-soluble inert gas
   cyclopropane in the body. Biophys J 1960;1:111-35 (journal, year and pages from memory).
.. [5] Eger EI II, Saidman LJ. Illustrations of inhaled anesthetic uptake, including intertissue
   diffusion to and from fat. Anesth Analg 2005;100:1020-33.
"""

from __future__ import annotations

import math

import numba
import numpy as np

# --- species -------------------------------------------------------------------------------------
O2, CO2, N2, N2O, AGENT, AR = 0, 1, 2, 3, 4, 5
NS = 6
SPECIES = ("oxygen", "carbon_dioxide", "nitrogen", "nitrous_oxide", "agent", "argon")
#: Species carried in blood and tissues, in body-state order.
BODY = (N2, N2O, AGENT, AR)
NB = 4
#: Tissue compartments (names and order: estimator.physics.physiology.COMPARTMENTS): vessel-rich, muscle, well- and
#: poorly perfused fat, vessel-poor (unperfused), and the fat next to the vessel-rich organs and next to muscle, which
#: takes up agent only by intertissue diffusion from that tissue.
NT = 7
#: Intertissue diffusion pairs (tissue indices): fat next to the vessel-rich organs (5) from the vessel-rich group
#: (0), intermuscular fat (6) from muscle (1). ``P_DIFF`` of the receiving fat holds the clearance; ``P_DONOR``
#: records the donor for reports and checks.
DIFFUSION_TO, DIFFUSION_FROM = (5, 6), (0, 1)

# --- state layout --------------------------------------------------------------------------------
Y_FC = 0  # circuit fractions [6]
Y_FA = 6  # alveolar fractions [6]
Y_BODY = 12  # per body species b: arterial, venous, then the NT tissues -> 12 + NBODYSTATE b + k
NBODYSTATE = 2 + NT
Y_FGIN = Y_BODY + NB * NBODYSTATE  # fresh gas delivered per species [mmol] (48)
Y_VENT = Y_FGIN + 6  # vented through the exhaust valve
Y_LEAK = Y_FGIN + 12  # lost by leak
Y_SAMPLE = Y_FGIN + 18  # lost as unreturned sample gas
Y_MAKEUP = Y_FGIN + 24  # deficit make-up gas
Y_CO2ABS = Y_FGIN + 30  # CO2 held by the absorbent
Y_METAB = Y_FGIN + 31  # agent metabolised
Y_O2CONS = Y_FGIN + 32  # O2 consumed
Y_MACMIN = Y_FGIN + 33  # integral of end-tidal total MAC [MAC x min]
Y_UPTAKE = Y_FGIN + 34  # net uptake from the lungs per species [6]
NY = Y_UPTAKE + 6

# --- parameter layout ----------------------------------------------------------------------------
P_NC, P_NL, P_VA, P_VDALV, P_VDANAT, P_Q, P_CA, P_VART, P_VVEN = range(9)
P_QT = 9  # [NT] tissue blood flows [L/min]
P_VT = P_QT + NT  # [NT] tissue volumes [L]
P_DIFF = P_VT + NT  # [NT] intertissue diffusion clearance into each tissue [L/min of donor tissue]
P_DONOR = P_DIFF + NT  # [NT] index of the lean tissue that feeds it by diffusion (-1: none)
P_QH, P_EH, P_VO2, P_VCO2, P_FINSP, P_LEAK, P_SAMPLE, P_MAKEUP_AIR = range(P_DONOR + NT, P_DONOR + NT + 8)
P_CARRIER = P_MAKEUP_AIR + 1  # [6] fresh-gas carrier flow per species [mmol/min]
P_MODE, P_UFIXED, P_UMAX, P_TARGET_FRAC, P_TARGET_MAC, P_MAC_AGENT, P_MAC_N2O = range(P_CARRIER + 6, P_CARRIER + 13)
P_TAU_L, P_TAU_C = P_MAC_N2O + 1, P_MAC_N2O + 2
P_LAMBDA = P_TAU_C + 1  # [4] blood/gas per body species
P_LAMBDA_T = P_LAMBDA + NB  # [4 x NT] tissue/blood, species-major
P_AIR = P_LAMBDA_T + NB * NT  # [6] room-air dry fractions (make-up gas)
NP = P_AIR + 6

# --- derived quantities (workspace) --------------------------------------------------------------
W_FI = 0  # inspired fractions [6]
W_FET = 6  # end-tidal fractions [6]
W_U, W_FGF, W_EX, W_MAKEUP = 12, 13, 14, 15
W_UPT = 16  # uptake rates [6]
W_MAC, W_TARGET, W_DIRECT, W_CO2ABS = 22, 23, 24, 25
W_FE = 26  # mixed-expired fractions [6]
W_ABS, W_SPILL, W_OUTC, W_METAB, W_VAOUT = 32, 33, 34, 35, 36
W_FFG, NW = 37, 43  # fresh-gas fractions [6] (the agent's is the dial), then the workspace size

MODE_DIAL, MODE_HOLD = 0.0, 1.0
#: O2 fraction scale of the hypoxic limiter of O2 uptake (keeps amounts non-negative when a circuit runs out of O2;
#: at any FA,O2 above 0.05 the limiter is 1 to 1e-4, above 40 scales exactly 1.0 in doubles: exp(-40) < 2**-54).
O2_LIMIT_SCALE = 0.005

_jit = numba.njit(cache=True, fastmath=False, nogil=True, error_model="numpy")  # no zero-division checks
_inline = numba.njit(cache=True, nogil=True, error_model="numpy", inline="always")  # no call: in rhs, 5 % faster


@_inline
def _lungs(y, p, w):
    """Fill the flows that do not depend on the dial (uptake, expired ventilation, metabolism); net uptake."""
    ca, q = p[P_CA], p[P_Q]
    for s in range(NS):
        w[W_UPT + s] = 0.0
    for b in range(NB):
        s = (N2, N2O, AGENT, AR)[b]
        pv = y[Y_BODY + NBODYSTATE * b + 1]
        w[W_UPT + s] = q * p[P_LAMBDA + b] * ca * (y[Y_FA + s] - pv)
    fo2 = y[Y_FA + O2]
    lim = 1.0 if fo2 > 40.0 * O2_LIMIT_SCALE else (1.0 - math.exp(-fo2 / O2_LIMIT_SCALE) if fo2 > 0.0 else 0.0)
    w[W_UPT + O2], w[W_UPT + CO2] = p[P_VO2] * lim, -p[P_VCO2]
    unet = 0.0
    for s in range(NS):
        unet += w[W_UPT + s]
    w[W_VAOUT] = p[P_VA] - unet
    w[W_METAB] = p[P_EH] * p[P_QH] * p[P_LAMBDA + 2] * ca * y[Y_BODY + NBODYSTATE * 2 + 2]
    return unet


@_jit
def _fresh_gas(u, carrier, p):
    """Fresh-gas flow, its part inhaled directly, that part's share of the inspired gas, and the inspired flow."""
    vi = p[P_VA] + (p[P_VDALV] + p[P_VDANAT])
    fgf = carrier / (1.0 - u) if carrier > 0.0 else 0.0
    direct = min(fgf * p[P_FINSP], vi)
    return fgf, direct, direct / vi, vi


@_jit
def _fresh_fraction(s, u, fgf, p):
    """Fraction of species ``s`` in the fresh gas (the agent at ``u``)."""
    return u if s == AGENT else (p[P_CARRIER + s] / fgf if fgf > 0.0 else 0.0)


@_jit
def _mixed(va_out, fa, v_dead, fi, total):
    """Fraction of alveolar gas mixed with dead-space (inspired) gas: mixed-expired or end-tidal."""
    return (va_out * fa + v_dead * fi) / total


@_jit
def _returned(needed, fe_co2, e_out):
    """Circuit volume balance: absorber inflow, spill, make-up and exhaust for the gas the circuit needs back."""
    absorber = needed / (1.0 - fe_co2)
    if absorber < 0.0:
        return 0.0, -needed, 0.0, e_out
    if absorber > e_out:
        return e_out, 0.0, needed - e_out * (1.0 - fe_co2), 0.0
    return absorber, 0.0, 0.0, e_out - absorber


@_jit
def _target(fet_n2o, p):
    """End-tidal agent fraction of the hold target (a MAC target counts the N2O's share)."""
    if p[P_TARGET_MAC] > 0.0:
        return max(0.0, (p[P_TARGET_MAC] - fet_n2o / p[P_MAC_N2O]) * p[P_MAC_AGENT])
    return p[P_TARGET_FRAC]


@_inline
def _flows_at(u, y, p, w, carrier, unet):
    """Fill ``w`` with the flows and fractions at a delivered agent fraction ``u`` (after :func:`_lungs`)."""
    va_out, vdalv = w[W_VAOUT], p[P_VDALV]
    vd = vdalv + p[P_VDANAT]
    fgf, direct, alpha, vi = _fresh_gas(u, carrier, p)
    w[W_U], w[W_FGF], w[W_DIRECT] = u, fgf, direct
    e_out = vi - unet
    for s in range(NS):
        w[W_FFG + s] = ffg = _fresh_fraction(s, u, fgf, p)
        fi = alpha * ffg + (1.0 - alpha) * y[Y_FC + s]
        w[W_FI + s] = fi
        w[W_FE + s] = _mixed(va_out, y[Y_FA + s], vd, fi, e_out)
        w[W_FET + s] = _mixed(va_out, y[Y_FA + s], vdalv, fi, va_out + vdalv)
    fe_co2 = w[W_FE + CO2]
    absorber, spill, makeup, ex = _returned(vi + p[P_LEAK] + p[P_SAMPLE] - fgf, fe_co2, e_out)
    w[W_ABS], w[W_SPILL], w[W_MAKEUP], w[W_EX], w[W_CO2ABS] = absorber, spill, makeup, ex + spill, absorber * fe_co2
    w[W_OUTC] = vi - direct + p[P_LEAK] + p[P_SAMPLE] + spill
    mac_a = p[P_MAC_AGENT]
    w[W_MAC] = (w[W_FET + AGENT] / mac_a if mac_a > 0.0 else 0.0) + w[W_FET + N2O] / p[P_MAC_N2O]
    w[W_TARGET] = _target(w[W_FET + N2O], p)


#: Convergence of the hold dial: a Newton step ``|du| <= HOLD_ATOL + HOLD_STEP u`` (the error after it is about its
#: square), else the residual <= HOLD_ATOL + HOLD_RTOL u, within HOLD_MAXIT trials (numerical choices, no source).
HOLD_STEP, HOLD_RTOL, HOLD_ATOL, HOLD_MAXIT = 1e-6, 1e-12, 1e-16, 60


@_jit
def _hold_dial(y, p, w, carrier, unet):
    """Delivered agent fraction that steers the end-tidal agent to the hold target (after :func:`_lungs`).

    A model-based tracking law: the lung balance gives the inspired fraction ``fi_star`` that moves the alveolar
    fraction toward the target with time constant ``tau_L``; the circuit balance gives the fresh-gas agent fraction
    ``law(u)`` that moves the inspired fraction there with time constant ``tau_C``. The flows depend on ``u`` itself
    (the agent adds to the fresh-gas flow), so the dial is the root of ``min(max(law(u), 0), umax) - u`` on [0, umax]
    (>= 0 at 0, <= 0 at umax). Solved by Newton steps in ``x = u / (1 - u)``, in which the fresh-gas flow and every
    inspired, expired and end-tidal fraction are linear, from the dial ``w`` last held (a neighbouring state's); where
    that root is not inside (0, umax), or another branch of the law holds there, by the Illinois method on [0, umax].
    """
    umax, va, vdalv, va_out, fc, fa = p[P_UMAX], p[P_VA], p[P_VDALV], w[W_VAOUT], y[Y_FC + AGENT], y[Y_FA + AGENT]
    vd, nc_t, k = vdalv + p[P_VDANAT], p[P_NC] / p[P_TAU_C], p[P_NL] / (p[P_TAU_L] * va)
    e_out, leaks, kf = va + vd - unet, p[P_LEAK] + p[P_SAMPLE], p[P_FINSP]
    inv_e, ka, kv = 1.0 / e_out, k / va_out, kf / (va + vd)
    # lung balance: fi_star = c0 + c1 target - c2 fi (the end-tidal reaches the target after tau_L)
    c0, c1, c2 = (va_out * fa + w[W_UPT + AGENT]) / va - k * fa, ka * (va_out + vdalv), ka * vdalv
    # linear in v = 1 + x: fresh-gas flow carrier v, direct share a v, fe_co2, fe_agent, target, fi_star
    a = kv * carrier
    e0 = (va_out * y[Y_FA + CO2] + vd * (kv * p[P_CARRIER + CO2] + y[Y_FC + CO2])) * inv_e
    e1, a0, a1 = -vd * a * y[Y_FC + CO2] * inv_e, (va_out * fa + vd * (fc - a)) * inv_e, vd * a * (1.0 - fc) * inv_e
    t0, t1 = p[P_TARGET_FRAC], 0.0
    if p[P_TARGET_MAC] > 0.0:
        fcn, inv_et, mac = y[Y_FC + N2O], 1.0 / (va_out + vdalv), p[P_MAC_AGENT] / p[P_MAC_N2O]
        fet0 = (va_out * y[Y_FA + N2O] + vdalv * (kv * p[P_CARRIER + N2O] + fcn)) * inv_et
        t0, t1 = p[P_TARGET_MAC] * p[P_MAC_AGENT] - mac * fet0, mac * vdalv * a * fcn * inv_et
    s0, s1 = c0 + c1 * t0 - c2 * (fc - a), c1 * t1 - c2 * a * (1.0 - fc)
    air_gain, n_back, cf = 1.0 - p[P_MAKEUP_AIR], va + vd + leaks, (1.0 - kf) * carrier
    x = w[W_U] / (1.0 - w[W_U]) if 0.0 < w[W_U] < umax else 0.0  # from the workspace's last dial (0 when fresh)
    for _ in range(HOLD_MAXIT):
        v = 1.0 + x
        inv_d, keep, needed = 1.0 / (1.0 - e0 - e1 * v), 1.0 - a * v, n_back - carrier * v  # 1 / (1 - fe_co2)
        absorber, spill, makeup = needed * inv_d, 0.0, 0.0
        d_abs, d_spill, d_makeup = (absorber * e1 - carrier) * inv_d, 0.0, 0.0  # d/dv
        if absorber < 0.0:
            absorber, d_abs, spill, d_spill = 0.0, 0.0, -needed, carrier
        elif absorber > e_out:
            absorber, d_abs, makeup, d_makeup = e_out, 0.0, needed - e_out * (1.0 - e0 - e1 * v), e_out * e1 - carrier
        rest = absorber * (a0 + a1 * v) - (n_back - kf * carrier * v + spill) * fc
        d_rest = d_abs * (a0 + a1 * v) + absorber * a1 - (d_spill - kf * carrier) * fc
        gk = (cf * v + air_gain * makeup) * keep + nc_t * a * v  # gain x keep
        d_gk = cf * (keep - a * v) + air_gain * (d_makeup * keep - a * makeup) + nc_t * a
        dk = nc_t * (s0 + s1 * v - fc * keep) - rest * keep  # demand x keep
        inv_v, d_dk = 1.0 / v, nc_t * (s1 + fc * a) - d_rest * keep + a * rest
        # Newton on u - law(u), law = dk / gk (keep cancels), in x (d/dx = d/dv), times gk^2
        den = inv_v * inv_v * gk * gk - d_dk * gk + dk * d_gk
        step = (x * inv_v * gk - dk) * gk / den if den != 0.0 else math.nan
        x, s = x - step, abs(step)
        if not s > (HOLD_ATOL * v + HOLD_STEP * x) * v:
            u = x / (1.0 + x)
            in_branch = a * v <= 0.999 and gk > 1e-12 * keep and (p[P_TARGET_MAC] <= 0.0 or t0 + t1 * v >= 0.0)
            if in_branch and 0.0 < u < umax:
                return u
            break
        if not -0.5 < x < 1e6:  # far from any dial setting: the bracketed method takes over
            break

    def residual(u):
        fgf, direct, alpha, vi = _fresh_gas(u, carrier, p)
        keep, fi = 1.0 - alpha, alpha * u + (1.0 - alpha) * fc
        fi_co2 = alpha * _fresh_fraction(CO2, u, fgf, p) + keep * y[Y_FC + CO2]
        fe_co2 = _mixed(va_out, y[Y_FA + CO2], vd, fi_co2, e_out)
        absorber, spill, makeup, _ = _returned(vi + leaks - fgf, fe_co2, e_out)
        fi_n2o = alpha * _fresh_fraction(N2O, u, fgf, p) + keep * y[Y_FC + N2O]
        fi_star = c0 + c1 * _target(_mixed(va_out, y[Y_FA + N2O], vdalv, fi_n2o, va_out + vdalv), p) - c2 * fi
        law = fi_star
        if alpha <= 0.999:
            rest = absorber * _mixed(va_out, fa, vd, fi, e_out) - (vi - direct + leaks + spill) * fc
            gain = (fgf - direct) + makeup * air_gain + nc_t * alpha / keep
            demand = nc_t * (fi_star / keep - fc) - rest
            # no gain: no fresh gas reaches the circuit, the dial saturates toward the target (the miss is reported)
            law = demand / gain if gain > 1e-12 else (umax if demand > 0.0 else 0.0)
        return min(max(law, 0.0), umax) - u

    lo, hi, r_lo, r_hi, side = 0.0, umax, residual(0.0), residual(umax), 0
    if r_lo <= 0.0 or r_hi >= 0.0:
        return 0.0 if r_lo <= 0.0 else umax
    for _ in range(HOLD_MAXIT):
        u = (lo * r_hi - hi * r_lo) / (r_hi - r_lo)
        r = residual(u)
        if abs(r) <= HOLD_ATOL + HOLD_RTOL * u:
            break
        if r > 0.0:
            lo, r_lo, r_hi, side = u, r, 0.5 * r_hi if side > 0 else r_hi, 1
        else:
            hi, r_hi, r_lo, side = u, r, 0.5 * r_lo if side < 0 else r_lo, -1
    return u


@_inline
def flows(y, p, w):
    """Derived flows and fractions of a state (fills ``w``; see the ``W_*`` layout)."""
    unet = _lungs(y, p, w)
    carrier = 0.0
    for s in range(NS):
        carrier += p[P_CARRIER + s]
    if carrier <= 0.0:
        u = 0.0  # a vaporizer with no carrier gas through it delivers nothing
    elif p[P_MODE] == MODE_HOLD:
        u = _hold_dial(y, p, w, carrier, unet)
    else:
        u = p[P_UFIXED]
    _flows_at(u, y, p, w, carrier, unet)


@_jit
def rhs(y, p, w, dy):
    """Time derivative of the state ``y`` into ``dy`` (``w`` is scratch for the flows)."""
    flows(y, p, w)
    fgf, direct, makeup, absorber, spill, out_c = w[W_FGF], w[W_DIRECT], w[W_MAKEUP], w[W_ABS], w[W_SPILL], w[W_OUTC]
    va, va_out, leak, sample = p[P_VA], w[W_VAOUT], p[P_LEAK], p[P_SAMPLE]
    inv_nc, inv_nl, q = 1.0 / p[P_NC], 1.0 / p[P_NL], p[P_Q]
    # make-up gas: fresh-gas composition, or room air with an air-entrainment valve or when no fresh
    # gas flows at all (the circuit then draws room air through its negative-pressure relief)
    room_air = p[P_MAKEUP_AIR] > 0.0 or fgf <= 0.0
    for s in range(NS):
        ffg = w[W_FFG + s]  # as _flows_at found it (one division fewer a species)
        fmk = p[P_AIR + s] if room_air else ffg
        fc = y[Y_FC + s]
        fe = w[W_FE + s]
        into = (fgf - direct) * ffg + absorber * fe + makeup * fmk - (w[W_CO2ABS] if s == CO2 else 0.0)
        dy[Y_FC + s] = (into - out_c * fc) * inv_nc
        dy[Y_FA + s] = (va * w[W_FI + s] - va_out * y[Y_FA + s] - w[W_UPT + s]) * inv_nl
        dy[Y_FGIN + s] = fgf * ffg
        dy[Y_VENT + s] = (w[W_EX] - spill) * fe + spill * fc
        dy[Y_LEAK + s] = leak * fc
        dy[Y_SAMPLE + s] = sample * fc
        dy[Y_MAKEUP + s] = makeup * fmk
        dy[Y_UPTAKE + s] = w[W_UPT + s]
    for b in range(NB):
        base = Y_BODY + NBODYSTATE * b
        pa, pv = y[base], y[base + 1]
        fa = y[Y_FA + (N2, N2O, AGENT, AR)[b]]
        dy[base] = q * (fa - pa) / p[P_VART]
        lam = P_LAMBDA_T + NT * b
        venous_in = 0.0
        for k in range(NT):
            pt = y[base + 2 + k]
            qt = p[P_QT + k]
            venous_in += qt * pt
            dy[base + 2 + k] = qt * (pa - pt)  # inflow [L blood x fraction / min], divided below
        if b == 2:
            venous_in -= p[P_EH] * p[P_QH] * y[base + 2]  # hepatic clearance from the vrg outflow
        # intertissue diffusion from a lean tissue to the fat next to it (Perl et al. 1960)
        for i in range(2):
            k, j = DIFFUSION_TO[i], DIFFUSION_FROM[i]
            flux = p[P_DIFF + k] * p[lam + j] * (y[base + 2 + j] - y[base + 2 + k])
            dy[base + 2 + k] += flux
            dy[base + 2 + j] -= flux
        for k in range(NT):
            cap = p[P_VT + k] * p[lam + k]
            dy[base + 2 + k] = dy[base + 2 + k] / cap if cap > 0.0 else 0.0
        dy[base + 1] = (venous_in - q * pv) / p[P_VVEN]
    dy[Y_CO2ABS], dy[Y_METAB], dy[Y_O2CONS], dy[Y_MACMIN] = w[W_CO2ABS], w[W_METAB], w[W_UPT + O2], w[W_MAC]


@_jit
def derived_series(ys, p):
    """Flows and fractions (``W_*`` layout) at every stored state, shape (m, NW)."""
    m = ys.shape[0]
    out = np.empty((m, NW))
    w = np.zeros(NW)
    for i in range(m):
        flows(ys[i], p, w)
        out[i] = w
    return out


def running_totals(d):
    """What the running totals grew by, for a state difference ``d = y_end - y_start``.

    ``d`` has shape (NY,) for one case or (n, NY) for many; amounts [mmol] (``makeup``: all
    species), ``mac_minutes`` [MAC x min]. Plain Python: the layout's reading for the totals
    (:func:`estimator.accounts.accounting.totals_from_deltas`).
    """
    t = d.T
    return {
        "agent_delivered": t[Y_FGIN + AGENT] + t[Y_MAKEUP + AGENT],
        "agent_uptake": t[Y_UPTAKE + AGENT],
        "agent_metabolised": t[Y_METAB],
        "nitrous_oxide_delivered": t[Y_FGIN + N2O] + t[Y_MAKEUP + N2O],
        "co2_absorbed": t[Y_CO2ABS],
        "makeup": t[Y_MAKEUP : Y_MAKEUP + NS].sum(axis=0),
        "mac_minutes": t[Y_MACMIN],
    }
