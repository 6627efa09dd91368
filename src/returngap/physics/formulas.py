"""Published formulas, one function each. Units are in the names: mm, nH, GHz, ns, ohm.

Each docstring names its source; "derived" marks standard mathematics applied to a
published result. All of them are estimates for review, not field-solver results.
"""

import math

import numpy as np

__all__ = [
    "C_MM_PER_NS",
    "MU0_NH_PER_MM",
    "ETA0_OHM",
    "microstrip_fraction_within",
    "microstrip_k_for_fraction",
    "stripline_centred_fraction_within",
    "stripline_plane_share",
    "microstrip_fraction_between",
    "stripline_fraction_between",
    "stripline_halfwidth_for_fraction",
    "microstrip_z0_eeff",
    "ellipk_c",
    "ellipk",
    "stripline_z0",
    "offset_stripline_z0",
    "line_inductance_nH_per_mm",
    "hsdd_slot_inductance_nH",
    "cps_inductance_nH_per_mm",
    "cpw_inductance_nH_per_mm",
    "slot_stub_inductance_nH",
    "slot_crossing_inductance_nH",
    "babinet_slot_inductance_nH",
    "slot_resonance_GHz",
    "slotline_eeff",
    "slot_resonance_estimate",
    "knee_frequency_GHz",
    "rise_time_for_knee_ns",
    "series_inductance_reflection",
    "track_inductance_nH_per_mm",
    "one_plane_missing_inductance_nH",
    "wavelength_mm",
    "via_pair_inductance_nH",
    "microstrip_fraction_beyond_edge",
    "plane_edge_inductance_rise",
    "off_plane_inductance_nH_per_mm",
    "patch_resonance_GHz",
    "two_branch_shares",
    "copper_resistance_ohm",
    "wire_partial_inductance_nH",
]

C_MM_PER_NS = 299.792458  # speed of light
MU0_NH_PER_MM = 0.4 * math.pi  # 4*pi*1e-7 H/m = 0.4*pi nH/mm
ETA0_OHM = 376.730313


# --- return-current distribution -------------------------------------------------------


def microstrip_fraction_within(k):
    """Share of a microstrip's return current within +-k*h of the trace centre: (2/pi)*atan(k).
    Filament over an infinite plane; Johnson & Graham, High-Speed Digital Design (1993), sec.
    5.1."""
    return 2.0 / math.pi * math.atan(k)


def microstrip_k_for_fraction(fraction):
    """Inverse of microstrip_fraction_within: tan(pi*F/2)."""
    return math.tan(math.pi * fraction / 2.0)


def stripline_centred_fraction_within(k):
    """Centred stripline (h = b/2), both planes together, within +-k*h: (2/pi)*atan(sinh(pi*k/2)).
    Derived from the line charge between two grounded plates (conformal map)."""
    return 2.0 / math.pi * math.atan(math.sinh(math.pi * k / 2.0))


def stripline_plane_share(h_self_mm, h_other_mm):
    """Share of the return carried by one plane of a stripline: the nearer plane carries more,
    h_other / b. Derived from the two-plate line-charge solution."""
    return h_other_mm / (h_self_mm + h_other_mm)


def _prim_atan(u, h):
    # antiderivative of atan(u/h) du
    return u * np.arctan2(u, h) - 0.5 * h * np.log(h * h + u * u)


def _scalar_or_array(v):
    return float(v) if np.ndim(v) == 0 else v


def microstrip_fraction_between(x1_mm, x2_mm, width_mm, h_mm):
    """Share of a microstrip's return current at lateral offsets x1..x2 from the trace centre.
    Uniform current across the strip (Holloway & Kuester, IEEE T-MTT 43(5), 1995, first closed
    form): J(x) = (I/(pi*w)) * [atan((x+w/2)/h) - atan((x-w/2)/h)]; integrated in closed form.
    Reduces to the 1/(1+(x/h)^2) filament law as w -> 0. x1, x2: numbers or arrays."""
    x1, x2 = np.asarray(x1_mm, dtype=float), np.asarray(x2_mm, dtype=float)
    if width_mm < 1e-6 * h_mm:
        v = (np.arctan2(x2, h_mm) - np.arctan2(x1, h_mm)) / math.pi
    else:
        a = width_mm / 2.0
        v = (
            _prim_atan(x2 + a, h_mm)
            - _prim_atan(x1 + a, h_mm)
            - _prim_atan(x2 - a, h_mm)
            + _prim_atan(x1 - a, h_mm)
        ) / (math.pi * width_mm)
    return _scalar_or_array(np.where(x2 > x1, v, 0.0))


def stripline_fraction_between(x1_mm, x2_mm, h_self_mm, h_other_mm):
    """Share of a stripline's total return current on one plane at lateral offsets x1..x2.
    Filament between plates b = h1 + h2 apart: J1 = (I/2b) sin(a)/(cosh(pi x/b) - cos a),
    a = pi*h1/b; its integral is (1/pi)*atan(tanh(u/2)/tan(a/2)), u = pi*x/b (derived).
    x1, x2: numbers or arrays."""
    x1, x2 = np.asarray(x1_mm, dtype=float), np.asarray(x2_mm, dtype=float)
    b = h_self_mm + h_other_mm
    t = math.tan(math.pi * h_self_mm / b / 2.0)

    def prim(x):
        return np.arctan(np.tanh(math.pi * x / b / 2.0) / t) / math.pi

    return _scalar_or_array(np.where(x2 > x1, prim(x2) - prim(x1), 0.0))


def stripline_halfwidth_for_fraction(fraction, h_self_mm, h_other_mm):
    """Half-width around the trace holding `fraction` of this plane's own share (closed form of
    stripline_fraction_between)."""
    b = h_self_mm + h_other_mm
    a = math.pi * h_self_mm / b
    target = math.tan(fraction * (math.pi - a) / 2.0) * math.tan(a / 2.0)
    if target >= 1.0:
        return 50.0 * b
    return 2.0 * math.atanh(target) * b / math.pi


# --- transmission lines ------------------------------------------------------------------


def _hj_z01(u):
    f = 6.0 + (2.0 * math.pi - 6.0) * math.exp(-((30.666 / u) ** 0.7528))
    return ETA0_OHM / (2.0 * math.pi) * math.log(f / u + math.sqrt(1.0 + (2.0 / u) ** 2))


def _hj_eeff(u, er):
    a = (
        1.0
        + math.log((u**4 + (u / 52.0) ** 2) / (u**4 + 0.432)) / 49.0
        + math.log(1.0 + (u / 18.1) ** 3) / 18.7
    )
    b = 0.564 * ((er - 0.9) / (er + 3.0)) ** 0.053
    return (er + 1.0) / 2.0 + (er - 1.0) / 2.0 * (1.0 + 10.0 / u) ** (-a * b)


def microstrip_z0_eeff(width_mm, h_mm, er, t_mm=0.0):
    """Quasi-static microstrip impedance (ohm) and effective permittivity, with the thickness
    correction. Hammerstad & Jensen, "Accurate models for microstrip computer-aided design",
    IEEE MTT-S Digest 1980, pp. 407-409."""
    u = width_mm / h_mm
    if t_mm <= 0:
        e = _hj_eeff(u, er)
        return _hj_z01(u) / math.sqrt(e), e
    t = t_mm / h_mm
    coth2 = 1.0 / math.tanh(math.sqrt(6.517 * u)) ** 2
    du1 = t / math.pi * math.log(1.0 + 4.0 * math.e / (t * coth2))
    dur = 0.5 * (1.0 + 1.0 / math.cosh(math.sqrt(er - 1.0))) * du1
    u1, ur = u + du1, u + dur
    e_r = _hj_eeff(ur, er)
    z0 = _hj_z01(ur) / math.sqrt(e_r)
    eeff = e_r * (_hj_z01(u1) / _hj_z01(ur)) ** 2
    return z0, eeff


def _agm(a, b):
    for _ in range(80):
        a, b = (a + b) / 2.0, math.sqrt(a * b)
        if abs(a - b) <= 1e-15 * a:
            break
    return a


def ellipk_c(kc):
    """K(k) from the complementary modulus kc = sqrt(1 - k^2): pi / (2 * AGM(1, kc)). Given kc
    directly,
    it stays accurate where k is within rounding of 1."""
    return math.inf if kc <= 0 else math.pi / (2.0 * _agm(1.0, kc))


def ellipk(k):
    """Complete elliptic integral of the first kind K(k) (modulus k), by the
    arithmetic-geometric mean."""
    return ellipk_c(math.sqrt(max(0.0, 1.0 - k * k)))


def stripline_z0(width_mm, b_mm, er):
    """Centred zero-thickness stripline impedance, exact by conformal mapping:
    Z0 = (30*pi/sqrt(er)) * K(k)/K(k'), k = sech(pi*w/2b). Cohn, IRE Trans. MTT 2, 1954."""
    x = math.pi * width_mm / (2.0 * b_mm)
    sech = 1.0 / math.cosh(x) if x < 700 else 0.0
    # K(k) / K(k') with k = sech x, k' = tanh x; each from its complement (tanh x, sech x) for
    # accuracy
    if sech == 0.0:
        return (
            30.0 * math.pi / math.sqrt(er) * (math.pi / 2) / (x + math.log(2.0))
        )  # wide-strip limit
    return 30.0 * math.pi / math.sqrt(er) * ellipk_c(math.tanh(x)) / ellipk_c(sech)


def offset_stripline_z0(width_mm, h1_mm, h2_mm, er):
    """Stripline off centre (heights h1, h2 to its two planes): the parallel combination of two
    centred striplines of spacings 2*h1 and 2*h2, Z0 = 2 Za Zb / (Za + Zb) (Wadell, Transmission
    Line Design Handbook, 1991, offset stripline; from memory). Equal heights give Cohn's exact
    centred value; tests/test_physics.py checks it against a 2-D field solve of ours (within
    10 %), where the centred formula with b = h1 + h2 reads 13-40 % high."""
    za = stripline_z0(width_mm, 2.0 * h1_mm, er)
    zb = stripline_z0(width_mm, 2.0 * h2_mm, er)
    return 2.0 * za * zb / (za + zb)


def line_inductance_nH_per_mm(z0_ohm, eeff):
    """Loop inductance per length of a TEM line: L' = Z0*sqrt(eeff)/c (definition of line
    parameters)."""
    return z0_ohm * math.sqrt(eeff) / C_MM_PER_NS


# --- slots and splits ----------------------------------------------------------------------


def hsdd_slot_inductance_nH(slot_length_mm, trace_width_mm):
    """Handbook slot estimate L = 5 * D * ln(D/W) nH, D and W in inches (D = length the return
    must detour across, W = trace width). Johnson & Graham, High-Speed Digital Design (1993),
    sec. 5.3 (from memory: form as commonly quoted). Zero when D <= W."""
    if slot_length_mm <= trace_width_mm or trace_width_mm <= 0:
        return 0.0
    return 5.0 * (slot_length_mm / 25.4) * math.log(slot_length_mm / trace_width_mm)


def cps_inductance_nH_per_mm(gap_mm, strip_width_mm):
    """Per-length inductance of the slot's two edges as coplanar strips: mu0 * K(k)/K(k'),
    k = s/(s + 2*w_e). Standard coplanar-strip conformal-mapping result (Gupta et al.,
    Microstrip Lines and Slotlines, 1996; from memory)."""
    k = gap_mm / (gap_mm + 2.0 * strip_width_mm)
    kp = math.sqrt(1.0 - k * k)
    return MU0_NH_PER_MM * ellipk(k) / ellipk(kp)


def cpw_inductance_nH_per_mm(strip_mm, gap1_mm, gap2_mm=None):
    """Inductance per length of a strip with coplanar ground beside it, no plane under it: the
    coplanar waveguide in air, L' = (mu0/4) K(k')/K(k), k = w/(w + 2g) (Wen, IEEE T-MTT 17(12),
    1969, conformal mapping; unequal gaps taken at their mean). With ground on one side only
    (gap2 None) the one ground strip carries the whole return: twice the two-sided value, an upper
    estimate (derived: the two halves in parallel, their mutual coupling neglected)."""
    g = gap1_mm if gap2_mm is None else (gap1_mm + gap2_mm) / 2
    k = strip_mm / (strip_mm + 2.0 * g)
    kp = math.sqrt(1.0 - k * k)
    two_sided = MU0_NH_PER_MM / 4.0 * ellipk(kp) / ellipk(k)
    return two_sided if gap2_mm is not None else 2.0 * two_sided


def slot_stub_inductance_nH(l1_mm, l2_mm, gap_mm, l2_open=False, strip_width_mm=None):
    """Low-frequency series inductance of a slot crossed l1 and l2 from its ends, as two slotline
    stubs in parallel: L = L' * l1*l2/(l1+l2), both ends closed (Knorr, IEEE T-MTT 22(5), 1974,
    stub model; Lee et al., ISAP 2008). An end open at a plane edge leaves only the closed stub:
    L = L' * l1. L' from cps_inductance_nH_per_mm with w_e = half the slot length (derived)."""
    total = l1_mm + l2_mm
    if total <= 0 or gap_mm <= 0:
        return 0.0
    we = strip_width_mm if strip_width_mm else max(total / 2.0, gap_mm)
    lp = cps_inductance_nH_per_mm(gap_mm, we)
    if l2_open:
        return lp * l1_mm
    if l1_mm <= 0 or l2_mm <= 0:
        return 0.0
    return lp * l1_mm * l2_mm / total


# Calibration of the stub model against this project's field solve (physics/peec.py) over
# testdata/slot-calibration.csv: 120 slots, D 5-50 mm, s 0.2-2 mm, h 0.1-1.6 mm (w = 1.9 h),
# crossed at the middle and at a fifth of the length (benchmarks/calibrate_slot.py). Not a
# published source: a fit of ours, rms 11 % in log; every solve of the sweep lies within
# SLOT_FIT_RANGE of the fitted value.
SLOT_FIT = (0.249, 0.1435, 0.2158, 1.368)
SLOT_FIT_RANGE = (0.67, 1.33)
# a whole plane under the slotted one: 60 solves, D 5-50 mm, s 0.5 mm, h 0.1-0.5 mm, the plane
# 0.2-1.6 mm below (benchmarks/calibrate_slot.py); a fit of ours, not a published source
BELOW_FIT = (0.1426, 0.8752, 0.3361)
BELOW_FIT_RANGE = (0.84, 1.25)


def slot_crossing_inductance_nH(l1_mm, l2_mm, gap_mm, trace_mm, h_mm, l2_open=False, below_mm=None):
    """(estimate, low, high) of the series inductance a slot adds to a microstrip crossing it:
    the slot-stub model (slot_stub_inductance_nH) times a factor that carries what the stub model
    leaves out, the slot's width against the trace height and the return's footprint
    (w/2 + h) against the stub lengths: exp(a) (s/h)^b / (1 + exp(c) (f/l)^q), l = twice the
    stubs' l1*l2/(l1+l2) (or twice the closed stub of a notch). Fitted to our own field solves
    (SLOT_FIT); the range covers every solve of the sweep. A whole plane below_mm beyond the
    slotted one (away from the track) confines the slot's field: the estimate times
    1 / (1 + a (l/d)^q (1 + c h/d)), l = l1*l2/(l1+l2), d = below_mm, fitted to our solves with
    such a plane (BELOW_FIT, testdata/slot-calibration-below.csv), the range widened by that
    fit's spread (BELOW_FIT_RANGE)."""
    stub = slot_stub_inductance_nH(l1_mm, l2_mm, gap_mm, l2_open=l2_open)
    if stub <= 0 or h_mm <= 0:
        return stub, stub, stub
    l_eff = l1_mm if l2_open else l1_mm * l2_mm / (l1_mm + l2_mm)
    a, b, c, q = SLOT_FIT
    footprint = trace_mm / 2 + h_mm
    factor = math.exp(a) * (gap_mm / h_mm) ** b / (1 + math.exp(c) * (footprint / (2 * l_eff)) ** q)
    est = stub * factor
    lo, hi = SLOT_FIT_RANGE
    if below_mm:
        a, q, c = BELOW_FIT
        est /= 1 + a * (l_eff / below_mm) ** q * (1 + c * h_mm / below_mm)
        lo, hi = lo * BELOW_FIT_RANGE[0], hi * BELOW_FIT_RANGE[1]
    return est, lo * est, hi * est


def babinet_slot_inductance_nH(slot_length_mm, gap_mm):
    """Narrow centre-fed slot by Babinet's principle from the short dipole:
    L = mu0*pi*D / (8*(ln(2D/s) - 1)) (derived; Balanis, Antenna Theory, for the dipole)."""
    if slot_length_mm <= 0 or gap_mm <= 0:
        return 0.0
    d = math.log(2.0 * slot_length_mm / gap_mm) - 1.0
    return MU0_NH_PER_MM * math.pi * slot_length_mm / (8.0 * d) if d > 0 else 0.0


def slot_resonance_GHz(slot_length_mm, eeff, open_at_one_end=False):
    """First slot resonance: half-wave c/(2*L*sqrt(eeff)); quarter-wave when one end is open at
    a plane edge. Slot-antenna and slotline theory (Balanis, Antenna Theory; from memory)."""
    if slot_length_mm <= 0:
        return math.inf
    n = 4.0 if open_at_one_end else 2.0
    return C_MM_PER_NS / (n * slot_length_mm * math.sqrt(eeff))


# Extension of a slot's electrical length past each shorted end, in slot widths: set so that a
# 24 x 1 mm slot in a buried plane (er 4.3) resonates at 2.88 GHz, the moment-method strip-dipole
# solve of REFERENCE 12 (one figure: an assumption beyond it).
SLOT_END_EXTENSION = 0.55


def slotline_eeff(width_mm, h_mm, er, freq_GHz):
    """Effective permittivity of a slotline of width W on a substrate of thickness h, air both
    sides: lambda_s/lambda_0 = 0.9217 - 0.277 ln er + 0.0322 (W/h) sqrt(er/(W/h + 0.435))
    - 0.01 ln(h/lambda_0) (4.6 - 3.65/(er^2 sqrt(W/lambda_0) (9.06 - 100 W/lambda_0))),
    eeff = (lambda_0/lambda_s)^2 (Janaswamy & Schaubert, IEEE T-MTT 34(8), 1986, fitted for
    3.8 <= er <= 9.8; from memory, checked against Svacina 1999's figures in REFERENCE 12).
    Held between 1 and er; W/lambda_0 is held where the fit stays finite."""
    lam0 = wavelength_mm(max(freq_GHz, 1e-6), 1.0)
    u = width_mm / max(h_mm, 1e-3)
    wl = min(max(width_mm / lam0, 1e-4), 0.075)
    inner = 4.6 - 3.65 / (er * er * math.sqrt(wl) * (9.06 - 100.0 * wl))
    ratio = (
        0.9217
        - 0.277 * math.log(er)
        + 0.0322 * u * math.sqrt(er / (u + 0.435))
        - 0.01 * math.log(max(h_mm, 1e-3) / lam0) * inner
    )
    return min(max(1.0 / ratio**2, 1.0), er) if ratio > 0 else er


def slot_resonance_estimate(slot_length_mm, width_mm, er, substrate_mm=None, open_at_one_end=False):
    """(f_GHz, low_GHz, high_GHz, eeff) of a slot's first resonance. Buried plane (substrate_mm
    None): the homogeneous value at er, the slot lengthened at each shorted end by
    SLOT_END_EXTENSION widths; the range reaches the bare c/(2 L sqrt(er)). Outer plane: the
    slotline eeff (slotline_eeff) at the resonance itself, found by iteration; the range spans
    er (field all in the board, the lowest frequency) up to the higher of the slotline and the
    (er+1)/2 values on the bare length (no end effect). eeff is the permittivity that, on the
    bare slot length, gives f_GHz."""
    if slot_length_mm <= 0:
        return math.inf, math.inf, math.inf, er
    ends = 1 if open_at_one_end else 2
    long_mm = slot_length_mm + ends * SLOT_END_EXTENSION * max(width_mm, 0.0)
    at_er = slot_resonance_GHz(long_mm, er, open_at_one_end)
    if substrate_mm is None:
        f = at_er
        high = slot_resonance_GHz(slot_length_mm, er, open_at_one_end)
    else:
        e = (er + 1) / 2
        for _ in range(30):
            f = slot_resonance_GHz(long_mm, e, open_at_one_end)
            e_new = slotline_eeff(width_mm, substrate_mm, er, f)
            if abs(e_new - e) < 1e-6:
                break
            e = e_new
        f = slot_resonance_GHz(long_mm, e, open_at_one_end)
        high = slot_resonance_GHz(slot_length_mm, min(e, (er + 1) / 2), open_at_one_end)
    eeff = (slot_resonance_GHz(slot_length_mm, 1.0, open_at_one_end) / f) ** 2
    return f, at_er, high, eeff


# --- frequency, reflection ------------------------------------------------------------------


def knee_frequency_GHz(rise_time_ns):
    """F_knee = 0.5 / T_r (10-90 % rise time). Johnson & Graham, High-Speed Digital Design, sec.
    1.1."""
    return 0.5 / rise_time_ns


def rise_time_for_knee_ns(freq_GHz):
    """Inverse of knee_frequency_GHz."""
    return 0.5 / freq_GHz


def series_inductance_reflection(inductance_nH, z0_ohm, rise_time_ns):
    """Peak reflected fraction of a linear ramp (rise time T_r) at a series inductance between two
    matched lines: (tau/T_r) * (1 - exp(-T_r/tau)), tau = L/(2*Z0) (derived: the first-order
    response of the series L to the ramp, largest at its end; its small-L limit is the familiar
    L/(2*Z0*T_r), Bogatin, Signal and Power Integrity - Simplified, from memory). Below 1 by
    construction."""
    tau = inductance_nH / (2.0 * max(z0_ohm, 1e-3))
    if tau <= 0:
        return 0.0
    x = rise_time_ns / tau
    return float(-math.expm1(-x) / x)


def track_inductance_nH_per_mm(width_mm, h_mm, other_h_mm=None, t_mm=0.0):
    """L' of a track over one plane (microstrip, Hammerstad & Jensen 1980) or between two
    (stripline, offset_stripline_z0), taken in air: L' = Z0*sqrt(eeff)/c does not depend on the
    dielectric."""
    if other_h_mm is None:
        z, e = microstrip_z0_eeff(width_mm, h_mm, 1.0, t_mm)
        return line_inductance_nH_per_mm(z, e)
    return line_inductance_nH_per_mm(offset_stripline_z0(width_mm, h_mm, other_h_mm, 1.0), 1.0)


def one_plane_missing_inductance_nH(width_mm, h_cut_mm, h_kept_mm, t_mm, length_mm):
    """Series inductance added where one plane of a stripline is cut under the track and the other
    is whole: over that length the track is a microstrip over the whole plane (under a dielectric
    cover, which changes its capacitance, not its inductance), so the added inductance is
    (L'_microstrip(h_kept) - L'_stripline(h_cut + h_kept)) * length, each L' = Z0*sqrt(eeff)/c
    taken in air. Hammerstad & Jensen 1980 (microstrip), Cohn 1954 (centred stripline); derived."""
    if length_mm <= 0:
        return 0.0
    l_ms = track_inductance_nH_per_mm(width_mm, h_kept_mm, None, t_mm)
    l_sl = track_inductance_nH_per_mm(width_mm, h_cut_mm, h_kept_mm)
    return max(0.0, l_ms - l_sl) * length_mm


def wavelength_mm(freq_GHz, eeff):
    """Wavelength on the board: c / (f * sqrt(eeff))."""
    return C_MM_PER_NS / (freq_GHz * math.sqrt(eeff))


# --- vias, edges, islands ------------------------------------------------------------------


def via_pair_inductance_nH(length_mm, spacing_mm, radius_mm):
    """Loop inductance of a signal via and its return via: (mu0*h/pi) * acosh(s/(2r)), the two-wire
    line over the length the return travels between the planes (Paul, Inductance: Loop and
    Partial, 2010; Ramo-Whinnery-Van Duzer; from memory)."""
    if spacing_mm <= 2 * radius_mm:
        return 0.0
    return MU0_NH_PER_MM * length_mm / math.pi * math.acosh(spacing_mm / (2.0 * radius_mm))


def microstrip_fraction_beyond_edge(distance_mm, h_mm):
    """Share of a microstrip's return current that the infinite-plane law puts beyond a plane edge
    at this distance from the trace centre: 1/2 - atan(d/h)/pi (derived from the 1/(1+(x/h)^2) law;
    first-order only, the true half-plane current crowds at the edge)."""
    return 0.5 - math.atan2(distance_mm, h_mm) / math.pi


# L' rise of a microstrip near its plane's edge against the distance in heights: 2-D field solve of
# the reference sheet (section 12; an independent numerical solve, not a published source)
_EDGE_RISE_D_H = (1.0, 3.0, 5.0)
_EDGE_RISE = (0.062, 0.008, 0.0026)


def plane_edge_inductance_rise(distance_h):
    """Relative rise of a microstrip's L' with the plane's edge `distance_h` heights from the
    track (positive: the plane runs on beyond the track). Log-linear between the solved points,
    extrapolated from the first two below one height (to about 17 % with the edge under the
    track); zero beyond 8 heights."""
    d = float(distance_h)
    if d >= 8.0:
        return 0.0
    x, y = _EDGE_RISE_D_H, np.log(_EDGE_RISE)
    if d <= x[1]:
        slope = (y[1] - y[0]) / (x[1] - x[0])
        return float(np.exp(y[0] + slope * (max(d, 0.0) - x[0])))
    return float(np.exp(np.interp(d, x, y)))


def off_plane_inductance_nH_per_mm(h_mm, beyond_mm, l_line_nH_per_mm):
    """L' added where a track runs beyond its plane's edge by `beyond_mm`: the rise with the edge
    under the track, plus the return moving from under the track to the edge, as for a wire over
    a plane whose image recedes from h to sqrt(h^2 + e^2): (mu0/2pi) ln(sqrt(h^2 + e^2)/h)
    (derived from the image method; an estimate)."""
    e = max(0.0, beyond_mm)
    far = MU0_NH_PER_MM / (2 * math.pi) * math.log(math.hypot(h_mm, e) / h_mm)
    return plane_edge_inductance_rise(0.0) * l_line_nH_per_mm + far


def patch_resonance_GHz(length_mm, width_mm, h_mm, er, tied_at_one_end=False):
    """Resonance of a copper island over a plane, as a microstrip patch: eps_reff and the fringing
    extension dL after Hammerstad 1975 (Balanis, Antenna Theory, 3rd ed., sec. 14.2; from memory).
    Half that frequency when the island is tied to the plane at one end."""
    e = (er + 1) / 2 + (er - 1) / 2 * (1 + 12 * h_mm / width_mm) ** -0.5
    dl = (
        0.412
        * h_mm
        * (e + 0.3)
        * (width_mm / h_mm + 0.264)
        / ((e - 0.258) * (width_mm / h_mm + 0.8))
    )
    f = C_MM_PER_NS / (2 * (length_mm + 2 * dl) * math.sqrt(e))
    return f / 2 if tied_at_one_end else f


def two_branch_shares(r1_ohm, r2_ohm, l1_nH, l2_nH):
    """Current division between two parallel return branches: at DC by resistance (Ohm's law),
    at high frequency by inductance. Returns (DC share of branch 1, HF share of branch 1)."""
    return r2_ohm / (r1_ohm + r2_ohm), l2_nH / (l1_nH + l2_nH)


def copper_resistance_ohm(length_mm, width_mm, thickness_mm, resistivity_ohm_m=1.68e-8):
    """DC resistance of a copper strip: rho * l / (w * t) (copper 1.68e-8 ohm m, handbook value)."""
    return resistivity_ohm_m * (length_mm * 1e-3) / (width_mm * 1e-3 * thickness_mm * 1e-3)


def wire_partial_inductance_nH(length_mm, radius_mm):
    """Partial self-inductance of a straight conductor, high-frequency form (no internal term):
    (mu0/2pi) * [l*ln((l + sqrt(l^2 + r^2))/r) - sqrt(l^2 + r^2) + r] (Rosa 1908; Grover 1946)."""
    ln, r = length_mm, radius_mm
    if ln <= 0 or r <= 0:
        return 0.0
    q = math.sqrt(ln * ln + r * r)
    return MU0_NH_PER_MM / (2 * math.pi) * (ln * math.log((ln + q) / r) - q + r)
