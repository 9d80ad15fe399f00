"""The circle-system compartment model: state and parameter layout, and the right-hand side (physics only).

This module is the hot loop's physics; the integrators are :mod:`estimator.numerics.dopri5` (one case) and
:mod:`estimator.numerics.rkc` (the batch). It has no package imports, so it can be loaded on its own with
the compiler switched off (the plain-Python speed reference of the benchmarks). It works in plain
floats in fixed internal units: amounts in mmol, time in min, flows in mmol/min, blood and tissue
volumes in L, and every gas, blood or tissue concentration as an *equivalent dry alveolar
fraction* F (partial pressure divided by the dry alveolar pressure, Pb - PH2O). The parameter
vectors come from :mod:`estimator.simulation.case_setup` (once per phase), the results are read back by
:mod:`estimator.simulation.assemble`.

Model
-----
Six species (O2, CO2, N2, N2O, the volatile agent, argon) in two gas compartments of constant size,
and, for the four inert or anaesthetic species, six blood and tissue compartments:

* circle circuit (well mixed, ``n_c`` mmol): fresh gas not drawn straight into the inspiratory limb,
  expired gas that passed the absorber (all CO2 removed), deficit make-up gas; leaves as the part of
  the inspired gas not supplied directly by fresh gas, as leak and as unreturned sample gas;
* lungs (FRC, ``n_L`` mmol dry gas): inspired alveolar ventilation in, expired alveolar ventilation
  out (inspired minus net uptake: the concentration and second-gas effects follow), blood uptake;
* arterial and mixed-venous blood, and the vessel-rich, muscle, fat and vessel-poor groups,
  perfusion-limited (Eger 1974; Mapleson 1963), with hepatic metabolism of the agent from the
  venous outflow of the vessel-rich group; fat in two compartments of high and low blood flow
  per kg (Levitt 2007), and fat next to the vessel-rich organs and to muscle that takes up agent
  by intertissue diffusion from them (Perl, Lesser and Steele 1960; Eger and Saidman 2005);
* O2 is consumed and CO2 produced at the patient's metabolic rates (Brody scaling).

Circle layout: the exhaust (APL or spill) valve vents mixed expired gas *before* the absorber, so at
high fresh-gas flow much exhaled CO2 leaves unabsorbed. Fresh gas enters the inspiratory limb: the
share of it that flows during inspiration (``f_insp``) is inhaled directly, the rest fills the
circuit. Where the circuit would need more gas than the expired limb returns (fresh gas below net
uptake plus leak plus unreturned sample flow) the bag empties: the shortfall is recorded as a
volume deficit and made good by make-up gas (fresh-gas composition, or room air for ventilators
with an air-entrainment valve and whenever no fresh gas flows at all), which the totals count
separately; the make-up gas enters the balance of every species, so the fractions sum to 1. A
vaporizer with no carrier gas delivers nothing.

Every species enters and leaves through explicit flows (running totals in the state), so an
integrator that keeps linear invariants (any Runge-Kutta method) closes the species mass balances to
rounding error.

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
#: Tissue compartments (names and order: estimator.physics.physiology.COMPARTMENTS): vessel-rich, muscle,
#: well- and poorly perfused fat, vessel-poor (unperfused), and the fat next to the vessel-rich
#: organs and next to muscle, which takes up agent only by intertissue diffusion from that tissue.
NT = 7
#: Intertissue diffusion pairs (tissue indices): fat next to the vessel-rich organs (5) from the
#: vessel-rich group (0), intermuscular fat (6) from muscle (1). ``P_DIFF`` of the receiving fat
#: holds the clearance; ``P_DONOR`` records the donor for reports and checks.
DIFFUSION_TO = (5, 6)
DIFFUSION_FROM = (0, 1)

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
NW = 37

MODE_DIAL, MODE_HOLD = 0.0, 1.0
#: O2 fraction scale of the hypoxic limiter of O2 uptake (keeps amounts non-negative when a
#: circuit runs out of O2; at any FA,O2 above 0.05 the limiter is exactly 1 to 1e-4).
O2_LIMIT_SCALE = 0.005

_jit = numba.njit(cache=True, fastmath=False, nogil=True)


@_jit
def _flows_at(u, y, p, w):
    """Fill ``w`` with the flows and fractions for a given delivered agent fraction ``u``."""
    ca = p[P_CA]
    q = p[P_Q]
    # lung uptake
    for s in range(NS):
        w[W_UPT + s] = 0.0
    for b in range(NB):
        s = (N2, N2O, AGENT, AR)[b]
        pv = y[Y_BODY + NBODYSTATE * b + 1]
        w[W_UPT + s] = q * p[P_LAMBDA + b] * ca * (y[Y_FA + s] - pv)
    fo2 = y[Y_FA + O2]
    lim = 1.0 - math.exp(-fo2 / O2_LIMIT_SCALE) if fo2 > 0.0 else 0.0
    w[W_UPT + O2] = p[P_VO2] * lim
    w[W_UPT + CO2] = -p[P_VCO2]
    unet = 0.0
    for s in range(NS):
        unet += w[W_UPT + s]
    va = p[P_VA]
    vdalv = p[P_VDALV]
    vd = vdalv + p[P_VDANAT]
    vi = va + vd
    va_out = va - unet
    w[W_VAOUT] = va_out
    # fresh gas
    carrier = 0.0
    for s in range(NS):
        carrier += p[P_CARRIER + s]
    fgf = carrier / (1.0 - u) if carrier > 0.0 else 0.0
    direct = min(fgf * p[P_FINSP], vi)
    alpha = direct / vi
    w[W_U] = u
    w[W_FGF] = fgf
    w[W_DIRECT] = direct
    for s in range(NS):
        ffg = u if s == AGENT else (p[P_CARRIER + s] / fgf if fgf > 0.0 else 0.0)
        w[W_FI + s] = alpha * ffg + (1.0 - alpha) * y[Y_FC + s]
    e_out = vi - unet
    for s in range(NS):
        fi = w[W_FI + s]
        fa = y[Y_FA + s]
        w[W_FE + s] = (va_out * fa + vd * fi) / e_out
        w[W_FET + s] = (va_out * fa + vdalv * fi) / (va_out + vdalv)
    # circuit volume balance: what the circuit must receive back through the absorber
    needed = vi + p[P_LEAK] + p[P_SAMPLE] - fgf
    fe_co2 = w[W_FE + CO2]
    absorber = needed / (1.0 - fe_co2)
    spill = 0.0
    makeup = 0.0
    if absorber < 0.0:
        absorber = 0.0
        spill = -needed
        ex = e_out
    elif absorber > e_out:
        absorber = e_out
        ex = 0.0
        makeup = needed - e_out * (1.0 - fe_co2)
    else:
        ex = e_out - absorber
    w[W_ABS] = absorber
    w[W_SPILL] = spill
    w[W_MAKEUP] = makeup
    w[W_EX] = ex + spill
    w[W_CO2ABS] = absorber * fe_co2
    w[W_OUTC] = vi - direct + p[P_LEAK] + p[P_SAMPLE] + spill
    mac_a = p[P_MAC_AGENT]
    mac_n = p[P_MAC_N2O]
    w[W_MAC] = (w[W_FET + AGENT] / mac_a if mac_a > 0.0 else 0.0) + w[W_FET + N2O] / mac_n
    if p[P_TARGET_MAC] > 0.0:
        w[W_TARGET] = max(0.0, (p[P_TARGET_MAC] - w[W_FET + N2O] / mac_n) * mac_a)
    else:
        w[W_TARGET] = p[P_TARGET_FRAC]
    w[W_METAB] = p[P_EH] * p[P_QH] * p[P_LAMBDA + 2] * ca * y[Y_BODY + NBODYSTATE * 2 + 2]


@_jit
def _hold_dial(y, p, w):
    """Delivered agent fraction that steers the end-tidal agent to the hold target.

    A model-based tracking law: the lung balance gives the inspired fraction that moves the
    alveolar fraction toward the target with time constant ``tau_L``; the circuit balance gives the
    fresh-gas agent fraction that moves the inspired fraction there with time constant ``tau_C``.
    Solved by fixed-point iteration on the fresh-gas flow (the agent adds to it), then capped at
    zero and the vaporizer maximum.
    """
    umax = p[P_UMAX]
    u = 0.0
    for _ in range(4):
        _flows_at(u, y, p, w)
        target = w[W_TARGET]
        va_out = w[W_VAOUT]
        vdalv = p[P_VDALV]
        fa = y[Y_FA + AGENT]
        fi = w[W_FI + AGENT]
        fa_star = ((va_out + vdalv) * target - vdalv * fi) / va_out
        fi_star = (p[P_NL] * (fa_star - fa) / p[P_TAU_L] + va_out * fa + w[W_UPT + AGENT]) / p[P_VA]
        vi = p[P_VA] + p[P_VDALV] + p[P_VDANAT]
        alpha = w[W_DIRECT] / vi
        if alpha > 0.999:
            unew = fi_star
        else:
            fc = y[Y_FC + AGENT]
            rest = w[W_ABS] * w[W_FE + AGENT] - w[W_OUTC] * fc
            nc_t = p[P_NC] / p[P_TAU_C]
            gain = (w[W_FGF] - w[W_DIRECT]) + w[W_MAKEUP] * (1.0 - p[P_MAKEUP_AIR]) + nc_t * alpha / (1.0 - alpha)
            demand = nc_t * (fi_star / (1.0 - alpha) - fc) - rest
            if gain > 1e-12:
                unew = demand / gain
            else:
                # no fresh gas reaches the circuit, so the dial cannot act: it saturates in the
                # direction the target asks for (and the unreached target is reported)
                unew = umax if demand > 0.0 else 0.0
        u = min(max(unew, 0.0), umax)
    return u


@_jit
def flows(y, p, w):
    """Derived flows and fractions of a state (fills ``w``; see the ``W_*`` layout)."""
    carrier = 0.0
    for s in range(NS):
        carrier += p[P_CARRIER + s]
    if carrier <= 0.0:
        u = 0.0  # a vaporizer with no carrier gas through it delivers nothing
    elif p[P_MODE] == MODE_HOLD:
        u = _hold_dial(y, p, w)
    else:
        u = p[P_UFIXED]
    _flows_at(u, y, p, w)


@_jit
def rhs(y, p, w, dy):
    """Time derivative of the state ``y`` into ``dy`` (``w`` is scratch for the flows)."""
    flows(y, p, w)
    fgf = w[W_FGF]
    direct = w[W_DIRECT]
    makeup = w[W_MAKEUP]
    absorber = w[W_ABS]
    spill = w[W_SPILL]
    out_c = w[W_OUTC]
    va = p[P_VA]
    va_out = w[W_VAOUT]
    leak = p[P_LEAK]
    sample = p[P_SAMPLE]
    u = w[W_U]
    inv_nc = 1.0 / p[P_NC]
    inv_nl = 1.0 / p[P_NL]
    # make-up gas: fresh-gas composition, or room air with an air-entrainment valve or when no fresh
    # gas flows at all (the circuit then draws room air through its negative-pressure relief)
    room_air = p[P_MAKEUP_AIR] > 0.0 or fgf <= 0.0
    for s in range(NS):
        ffg = u if s == AGENT else (p[P_CARRIER + s] / fgf if fgf > 0.0 else 0.0)
        fmk = p[P_AIR + s] if room_air else ffg
        fc = y[Y_FC + s]
        fe = w[W_FE + s]
        into = (fgf - direct) * ffg + absorber * fe + makeup * fmk
        if s == CO2:
            into -= w[W_CO2ABS]
        dy[Y_FC + s] = (into - out_c * fc) * inv_nc
        dy[Y_FA + s] = (va * w[W_FI + s] - va_out * y[Y_FA + s] - w[W_UPT + s]) * inv_nl
        dy[Y_FGIN + s] = fgf * ffg
        dy[Y_VENT + s] = (w[W_EX] - spill) * fe + spill * fc
        dy[Y_LEAK + s] = leak * fc
        dy[Y_SAMPLE + s] = sample * fc
        dy[Y_MAKEUP + s] = makeup * fmk
        dy[Y_UPTAKE + s] = w[W_UPT + s]
    q = p[P_Q]
    for b in range(NB):
        base = Y_BODY + NBODYSTATE * b
        pa = y[base]
        pv = y[base + 1]
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
            k = DIFFUSION_TO[i]
            j = DIFFUSION_FROM[i]
            flux = p[P_DIFF + k] * p[lam + j] * (y[base + 2 + j] - y[base + 2 + k])
            dy[base + 2 + k] += flux
            dy[base + 2 + j] -= flux
        for k in range(NT):
            cap = p[P_VT + k] * p[lam + k]
            dy[base + 2 + k] = dy[base + 2 + k] / cap if cap > 0.0 else 0.0
        dy[base + 1] = (venous_in - q * pv) / p[P_VVEN]
    dy[Y_CO2ABS] = w[W_CO2ABS]
    dy[Y_METAB] = w[W_METAB]
    dy[Y_O2CONS] = w[W_UPT + O2]
    dy[Y_MACMIN] = w[W_MAC]


@_jit
def derived_series(ys, p):
    """Flows and fractions (``W_*`` layout) at every stored state, shape (m, NW)."""
    m = ys.shape[0]
    out = np.empty((m, NW))
    w = np.empty(NW)
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
