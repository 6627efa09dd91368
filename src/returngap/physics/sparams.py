"""What a gap does to the signal over frequency: the insertion loss of the track across it.

A circuit of one crossing, built with scikit-rf: the track as two line sections either side of the
crossing (microstrip: scikit-rf's MLine, Hammerstad & Jensen with Kirschning & Jansen dispersion;
stripline: a TEM line of the offset-stripline impedance), and the gap between them as a series
element: two slotline stubs either side of the crossing point, shorted at a closed slot's ends, one
open where a notch reaches the plane's edge (Knorr, "Slot-line transitions", IEEE T-MTT 22(5),
1974). The stubs' impedance Zs is chosen so that the element's low-frequency limit is the added
inductance the finding reports (closed form or field solve): Zs = L v / l_eff, v the slot's phase
velocity (from the finding's plane permittivity), l_eff = l1 l2 / (l1 + l2). The slot's radiation
is a loss on the stubs set so that a half-wave slot fed at its middle has the input resistance of a
slot in a thin screen, η²/(4 · 73 Ω) ≈ 485 Ω (Babinet / Booker from the half-wave dipole's
radiation resistance; Balanis, Antenna Theory). Quasi-static lines, one slot mode, no coupling to
other structures: an estimate to guide a field solver or a measurement.
"""

import math
import warnings

import numpy as np
import scipy.constants  # noqa: F401  scikit-rf loads it at its first unit conversion, once per worker
import skrf
from skrf.media import DefinedGammaZ0, MLine

from returngap.physics import formulas

__all__ = [
    "SLOT_RADIATION_OHM",
    "DIP_DEPTH_DB",
    "frequencies",
    "bracket",
    "line_media",
    "gap_impedance",
    "series_network",
    "island_admittance",
    "shunt_network",
    "PATCH_Q",
    "crossing_networks",
    "first_dip_GHz",
    "loss_at_dB",
]

C_M_PER_S = 299_792_458.0
SLOT_RADIATION_OHM = formulas.ETA0_OHM**2 / (4 * 73.1)  # Babinet with the half-wave dipole
DIP_DEPTH_DB = 3.0  # a dip: at least half the power lost to the gap (our choice)
FR4_TAND = 0.02  # FR4's loss tangent near 1 GHz (from memory)
COPPER_RHO = 1.72e-8  # ohm m


def frequencies(knee_GHz, points=601):
    """10 MHz to the larger of 3x the knee frequency and 6 GHz."""
    return skrf.Frequency(0.01, max(6.0, 3.0 * knee_GHz), points, unit="GHz")


def bracket(freq, f_GHz):
    """The slice of freq's points either side of f_GHz (the two that interpolation there uses)."""
    k = int(np.clip(np.searchsorted(freq.f, f_GHz * 1e9), 1, len(freq.f) - 1))
    return slice(k - 1, k + 1)


def line_media(freq, width_mm, h_mm, er, t_mm=0.035, other_h_mm=None, z0_port=50.0):
    """The track's line: microstrip over one plane, or stripline between two; its ports at
    z0_port (the track's own impedance for a loss free of the ports' mismatch)."""
    if other_h_mm is None:
        with warnings.catch_warnings():  # thin copper against the skin depth: said by skrf
            warnings.simplefilter("ignore")
            return MLine(
                frequency=freq,
                z0_port=z0_port,
                w=width_mm * 1e-3,
                h=h_mm * 1e-3,
                t=t_mm * 1e-3,
                ep_r=er,
                tand=FR4_TAND,
                rho=COPPER_RHO,
                rough=0.0,
            )
    z0 = formulas.offset_stripline_z0(width_mm, h_mm, other_h_mm, er)
    beta = 2 * np.pi * freq.f * math.sqrt(er) / C_M_PER_S
    alpha_d = beta * FR4_TAND / 2  # dielectric loss of a TEM line
    return DefinedGammaZ0(frequency=freq, z0_port=z0_port, z0=z0, gamma=alpha_d + 1j * beta)


def gap_impedance(f_Hz, added_nH, l1_mm, l2_mm, slot_er, open_end=False):
    """Series impedance (ohm) of the gap at each frequency: the stubs in parallel, lossy by the
    slot's radiation, their low-frequency limit j ω added_nH."""
    f = np.asarray(f_Hz, float)
    total = l1_mm + l2_mm
    l_eff = l1_mm if open_end else l1_mm * l2_mm / total
    if added_nH <= 0 or l_eff <= 0:
        return np.zeros(len(f), dtype=complex)
    v = C_M_PER_S / math.sqrt(slot_er)
    zs = added_nH * 1e-9 * v / (l_eff * 1e-3)
    alpha = zs / (total * 1e-3 * SLOT_RADIATION_OHM)  # radiation as a loss per metre
    gamma = alpha + 1j * 2 * np.pi * f / v
    y = 1.0 / (zs * np.tanh(gamma * l1_mm * 1e-3))
    if open_end:
        y = y + np.tanh(gamma * l2_mm * 1e-3) / zs
    else:
        y = y + 1.0 / (zs * np.tanh(gamma * l2_mm * 1e-3))
    return 1.0 / y


PATCH_Q = 30.0  # a patch resonator's loaded Q on FR4, 20-70 (from memory)
EPS0_PF_PER_MM = 8.8541878128e-3


def island_admittance(f_Hz, f_res_GHz, area_mm2, h_mm, er, coupled_mm, gap_mm):
    """Shunt admittance (S) a floating copper island puts across the line beside it: the island
    as a patch resonator (its capacitance to the plane, parallel plate ε A / h; the inductance that
    resonates with it at the patch frequency; a resistance for PATCH_Q) reached through the
    coupling capacitance of `coupled_mm` of track edge at `gap_mm` from the island's edge
    (coplanar strips in air over the substrate, Gupta et al. 1996, conformal mapping)."""
    from returngap.physics.formulas import ellipk

    w = 2 * np.pi * np.asarray(f_Hz, float)
    c = EPS0_PF_PER_MM * er * area_mm2 / h_mm * 1e-12
    w0 = 2 * np.pi * f_res_GHz * 1e9
    l_tank = 1.0 / (w0 * w0 * c)
    r = PATCH_Q / (w0 * c)
    k = gap_mm / (gap_mm + 2.0)  # the track and island edges as strips of about 1 mm
    kp = math.sqrt(1 - k * k)
    cc = EPS0_PF_PER_MM * (er + 1) / 2 * ellipk(kp) / ellipk(k) * coupled_mm * 1e-12
    y_tank = 1 / r + 1j * w * c + 1 / (1j * w * l_tank)
    return 1.0 / (1 / (1j * w * cc) + 1 / y_tank)


def shunt_network(freq, y, z0=50.0):
    """A shunt admittance across two ports of z0."""
    yz = np.asarray(y, complex) * z0
    s = np.zeros((len(yz), 2, 2), dtype=complex)
    s[:, 0, 0] = s[:, 1, 1] = -yz / (2 + yz)
    s[:, 0, 1] = s[:, 1, 0] = 2 / (2 + yz)
    return skrf.Network(frequency=freq, s=s, z0=z0)


def series_network(freq, z, z0=50.0):
    """A series impedance between two ports of z0."""
    z = np.asarray(z, complex)
    s = np.zeros((len(z), 2, 2), dtype=complex)
    s[:, 0, 0] = s[:, 1, 1] = z / (z + 2 * z0)
    s[:, 0, 1] = s[:, 1, 0] = 2 * z0 / (z + 2 * z0)
    return skrf.Network(frequency=freq, s=s, z0=z0)


def crossing_networks(media, before_mm, after_mm, element):
    """(with the element, without it): the two line sections cascaded through the element (a
    gap's series network or an island's shunt one)."""
    a, b = media.line(before_mm, "mm"), media.line(after_mm, "mm")
    return a**element**b, a**b


def _s21_db(net):
    return 20 * np.log10(np.maximum(np.abs(net.s[:, 1, 0]), 1e-12))


def first_dip_GHz(element):
    """The lowest frequency where a gap's or an island's own element (a two-port network, its
    ports at the track's impedance) loses at least DIP_DEPTH_DB at a local maximum of its loss
    (its resonance); None when there is none in range (a lumped inductance has none). The
    element alone: the cascade's ripple from the line's mismatch to the ports is no dip of it."""
    loss = -20 * np.log10(np.maximum(np.abs(element.s[:, 1, 0]), 1e-12))
    f = element.frequency.f / 1e9
    peak = (loss[1:-1] >= loss[:-2]) & (loss[1:-1] >= loss[2:]) & (loss[1:-1] >= DIP_DEPTH_DB)
    k = np.nonzero(peak)[0]
    return float(f[k[0] + 1]) if len(k) else None


def loss_at_dB(net, f_GHz):
    """Insertion loss (dB, positive) at one frequency, interpolated on the curve."""
    return float(-np.interp(f_GHz, net.frequency.f / 1e9, _s21_db(net)))
