"""Characteristic impedance and delay per length of common cross-sections, from geometry.

Quasi-static (TEM or quasi-TEM), lossless closed forms; no dispersion, no
conductor or dielectric loss, no surface roughness, no solder mask.  Every
function takes SI lengths [m] and a relative permittivity [-] and returns SI
values.  Each formula names its source; outside the range a formula was fitted
or proven for, a :class:`budget.errors.GeometryRangeWarning` is issued and the
value is still returned.

These are estimates: a board's real impedance depends on the fabricator's
stack-up, etched trace shape and material data.  Confirm with the board maker's
impedance coupons or a TDR measurement.

Public entry point: :func:`line` (``budget.geometry.line(kind, **dims)``).

Kinds and keys (a contract, docs/cli.md, `line`):

==========================  ======================  =====================================
kind                        keys                    formula
==========================  ======================  =====================================
microstrip                  w, h, t, er             Hammerstad & Jensen 1980
stripline                   w, b, t, er             Cohn 1954 (t = 0) x Wheeler 1978 (t)
coax                        d, D, er                exact TEM
two_wire                    d, s, er                exact TEM (acosh form)
edge_coupled_microstrip     w, s, h, t, er          Kirschning & Jansen 1984
edge_coupled_stripline      w, s, b, t, er          Cohn 1955 (t = 0) x thickness factors
==========================  ======================  =====================================

For the coupled kinds ``z0`` is the odd-mode impedance of one line
(``z0 == z_odd``), ``z_diff = 2 z_odd`` is the differential impedance,
``z_even`` the even-mode impedance of one line (the common-mode impedance of
the pair is ``z_even / 2``); ``delay`` and ``er_eff`` are the odd (differential)
mode's, the ones a differential design in this project uses.

References
----------
.. [HJ80] E. Hammerstad, O. Jensen, "Accurate models for microstrip
   computer-aided design", IEEE MTT-S Int. Microwave Symp. Digest, 1980,
   pp. 407-409.
.. [Cohn54] S. B. Cohn, "Characteristic impedance of the shielded-strip
   transmission line", IRE Trans. MTT-2, July 1954, pp. 52-57.
.. [Cohn55] S. B. Cohn, "Shielded coupled-strip transmission line", IRE Trans.
   MTT-3, Oct. 1955, pp. 29-38.
.. [Wh78] H. A. Wheeler, "Transmission-line properties of a strip line between
   parallel planes", IEEE Trans. MTT-26(11), 1978, pp. 866-876.
.. [KJ84] M. Kirschning, R. H. Jansen, "Accurate wide-range design equations
   for the frequency-dependent characteristic of parallel coupled microstrip
   lines", IEEE Trans. MTT-32(1), 1984, pp. 83-90.
.. [Pozar] D. M. Pozar, *Microwave Engineering*, 4th ed., Wiley 2012,
   section 2.2 and Table 2.1 (coax, two-wire), section 3.7 (stripline).

The formula constants were written from the published equations as the
project recalls them ("from memory" where no public copy was read); the
tests compare them with published worked examples, with scikit-rf's media,
with exact limits (coupled -> single line, Landen's identity) and with an
independent finite-difference field solution (tests/fd_laplace.py; the
coupled-microstrip ratios agree within about 1 %).
"""
from __future__ import annotations

import math
import warnings
from contextvars import ContextVar
from dataclasses import dataclass, field
from typing import Mapping

import numpy as np

from .errors import ArgumentError, DesignError, GeometryRangeWarning

# Physical constants, written out so that importing the package does not import scipy (about
# 0.15 s of every process's start-up); tests/test_geometry.py compares them with scipy.constants.
C_LIGHT = 299792458.0           # speed of light in vacuum [m/s] (exact, SI 2019)
mu_0 = 1.25663706127e-06        # vacuum magnetic permeability [N/A^2] (CODATA 2022, from memory; as scipy.constants)
epsilon_0 = 8.8541878188e-12    # vacuum electric permittivity [F/m] (CODATA 2022, from memory; as scipy.constants)
ETA0 = math.sqrt(mu_0 / epsilon_0)  # impedance of free space [ohm], 376.730...


def ellipkm1(p):
    """scipy.special.ellipkm1 (K(m = 1 - p)), imported on first use: scipy.special costs start-up time."""
    from scipy.special import ellipkm1 as k
    return k(p)

#: kind -> its keys, in the order the contract lists them
KINDS: Mapping[str, tuple[str, ...]] = {
    "microstrip": ("w", "h", "t", "er"),
    "stripline": ("w", "b", "t", "er"),
    "coax": ("d", "D", "er"),
    "two_wire": ("d", "s", "er"),
    "edge_coupled_microstrip": ("w", "s", "h", "t", "er"),
    "edge_coupled_stripline": ("w", "s", "b", "t", "er"),
}
COUPLED_KINDS = ("edge_coupled_microstrip", "edge_coupled_stripline")
_MAY_BE_ZERO = {"t"}  # strip thickness 0 = the zero-thickness formula


@dataclass(frozen=True)
class CrossSection:
    """Result of :func:`line`: a line cross-section's quasi-static properties.

    z0 [ohm]: characteristic impedance (coupled kinds: odd-mode impedance of one line);
    delay [s/m]: delay per length = sqrt(er_eff)/c; er_eff [-]: effective permittivity;
    coupled kinds also: z_odd, z_even, z_diff = 2 z_odd [ohm], er_eff_even [-],
    delay_even [s/m] (None for single lines).  ``dims`` holds the inputs in SI.
    """
    kind: str
    dims: Mapping[str, float]
    z0: float
    delay: float
    er_eff: float
    z_odd: float | None = None
    z_even: float | None = None
    z_diff: float | None = None
    er_eff_even: float | None = None
    delay_even: float | None = None
    formula: str = field(default="", compare=False)

    def to_json(self) -> dict:
        """A JSON-ready dict: the attributes, SI units (None -> null for single lines)."""
        out = {"kind": self.kind, "dims": dict(self.dims), "z0": self.z0, "delay": self.delay,
               "er_eff": self.er_eff}
        if self.kind in COUPLED_KINDS:
            out.update(z_odd=self.z_odd, z_even=self.z_even, z_diff=self.z_diff,
                       er_eff_even=self.er_eff_even, delay_even=self.delay_even)
        out["formula"] = self.formula
        return out


def delay_from_er_eff(er_eff):
    """Delay per length [s/m] of a TEM/quasi-TEM wave, sqrt(er_eff)/c (docs/references.md B2); floats or arrays."""
    return np.sqrt(er_eff) / C_LIGHT


# Where range notes go: None = warnings.warn (GeometryRangeWarning); a list = appended to it as text
# (design files: the notes are shown in the check report instead of being raised).  A ContextVar,
# so threads evaluating designs at once keep their own notes.
_NOTES: ContextVar[list | None] = ContextVar("geometry_range_notes", default=None)


def _warn(formula: str, what: str, value, lo: float | None, hi: float | None, where=True) -> None:
    """Note (or warn) when ``value`` (a float or an array over variants; only where ``where``) leaves lo..hi."""
    value = np.asarray(value, dtype=float)
    bad = np.zeros(value.shape, dtype=bool)
    if lo is not None:
        bad |= value < lo
    if hi is not None:
        bad |= value > hi
    bad &= np.asarray(where, dtype=bool)
    if not np.any(bad):
        return
    out = value[bad] if value.ndim else value.reshape(1)
    # the value furthest outside the range, in ratio
    far = out[np.argmax(np.abs(np.log(np.abs(out) / (lo if lo is not None and np.any(out < lo) else hi))))] \
        if np.all(out > 0) else out[0]
    rng = f"{'' if lo is None else f'{lo:g} <= '}{what}{'' if hi is None else f' <= {hi:g}'}"
    some = f" (in {int(bad.sum())} of {bad.size} variants)" if value.ndim and bad.size > 1 else ""
    msg = (f"{formula}: {what} = {float(far):.4g}{some} is outside {rng}, the range its accuracy is "
           f"stated for; treat the result as a rough estimate")
    notes = _NOTES.get()
    if notes is None:
        warnings.warn(msg, GeometryRangeWarning, stacklevel=5)
    elif msg not in notes:
        notes.append(msg)


# ---------------------------------------------------------------------------
# coax and two-wire line: exact TEM solutions in a homogeneous dielectric
#
# Every formula below takes floats or numpy arrays over variants (elementwise, no Python loop), so
# a design's toleranced or swept geometry is evaluated for a whole batch at once.

def coax_z0(d, D, er):
    """Coaxial line Z0 [ohm] = eta0/(2 pi sqrt(er)) ln(D/d); exact for TEM (Pozar 2012 Table 2.1; docs/references.md B3).

    d [m] inner conductor diameter, D [m] inside diameter of the shield, er [-].
    """
    return ETA0 / (2.0 * np.pi * np.sqrt(er)) * np.log(D / d)


def two_wire_z0(d, s, er):
    """Two-wire line Z0 [ohm] = eta0/(pi sqrt(er)) acosh(s/d); exact for round wires (Pozar 2012 Table 2.1; B4).

    d [m] wire diameter, s [m] centre spacing (> d), er [-] permittivity of a
    homogeneous surrounding.  A twisted pair is modelled as this line with
    er = the pair's effective permittivity (insulation and air mixed; between 1
    and the insulation's er, to be taken from the cable maker's velocity
    factor vf: er = 1/vf**2); the twist itself is ignored.
    """
    return ETA0 / (np.pi * np.sqrt(er)) * np.arccosh(s / d)


# ---------------------------------------------------------------------------
# microstrip: Hammerstad & Jensen 1980

def _hj_z01(u):
    """Air-filled microstrip Z0 [ohm] at width/height u [-] ([HJ80] eq. for Z01; docs/references.md B6)."""
    f = 6.0 + (2.0 * np.pi - 6.0) * np.exp(-((30.666 / u) ** 0.7528))
    return ETA0 / (2.0 * np.pi) * np.log(f / u + np.sqrt(1.0 + (2.0 / u) ** 2))


def _hj_er_eff(u, er):
    """Zero-thickness microstrip effective permittivity [-] ([HJ80]; docs/references.md B6)."""
    a = (1.0 + np.log((u ** 4 + (u / 52.0) ** 2) / (u ** 4 + 0.432)) / 49.0
         + np.log(1.0 + (u / 18.1) ** 3) / 18.7)
    b = 0.564 * ((er - 0.9) / (er + 3.0)) ** 0.053
    return (er + 1.0) / 2.0 + (er - 1.0) / 2.0 * (1.0 + 10.0 / u) ** (-a * b)


def _hj_widths(u, t_h, er):
    """Thickness-corrected widths (u1 in air, ur in the dielectric) [-] ([HJ80] thickness correction).

    du1 = (t/pi) ln(1 + 4e / (t coth^2 sqrt(6.517 u))), t normalised to h;
    dur = du1 (1 + sech sqrt(er - 1)) / 2.  t = 0: no correction.
    """
    thick = t_h > 0.0
    ts = np.where(thick, t_h, 1.0)
    # ln(1 + A/t) written as ln(t + A) - ln(t): no overflow for very thin strips
    du1 = np.where(thick, ts / np.pi * (np.log(ts + 4.0 * np.e * np.tanh(np.sqrt(6.517 * u)) ** 2) - np.log(ts)),
                   0.0)
    dur = 0.5 * (1.0 + 1.0 / np.cosh(np.sqrt(er - 1.0))) * du1
    return u + du1, u + dur


def microstrip(w, h, t, er):
    """Surface microstrip (z0 [ohm], er_eff [-]) by Hammerstad & Jensen 1980 with their thickness correction.

    w [m] strip width, h [m] dielectric height, t [m] strip thickness (0 allowed),
    er [-] substrate permittivity.  No solder mask, no dispersion.

    Z0 = Z01(ur)/sqrt(er_eff(ur)), er_eff = er_eff(ur) (Z01(u1)/Z01(ur))^2 ([HJ80]).
    Stated accuracy (authors, docs/references.md B6, from memory): Z01 within 0.03 % for
    u <= 1000, er_eff within 0.2 % for er <= 128 and 0.01 <= u <= 100.  Warns
    outside 0.01 <= w/h <= 100, er <= 128, and where the thin-strip thickness
    correction is stretched (t > w or t > h; the project's limit).
    """
    u, t_h = w / h, t / h
    name = "microstrip (Hammerstad & Jensen 1980)"
    _warn(name, "w/h", u, 0.01, 100.0)
    _warn(name, "er", er, None, 128.0)
    _warn(name, "t/w", t / w, None, 1.0)
    _warn(name, "t/h", t_h, None, 1.0)
    u1, ur = _hj_widths(u, t_h, er)
    e_r = _hj_er_eff(ur, er)
    z01_r, z01_1 = _hj_z01(ur), _hj_z01(u1)
    return z01_r / np.sqrt(e_r), e_r * (z01_1 / z01_r) ** 2


# ---------------------------------------------------------------------------
# stripline: Cohn 1954 exact zero-thickness, Wheeler 1978 thickness factor

def _sech2(x):
    """sech^2 x [-], 0 beyond x = 350 (where cosh overflows)."""
    small = x < 350.0
    return np.where(small, 1.0 / np.cosh(np.where(small, x, 0.0)) ** 2, 0.0)


def _k_ratio_sech_tanh(x):
    """K(sech x)/K(tanh x) with complete elliptic integrals of the first kind, accurate for any x > 0.

    scipy.special.ellipkm1(p) = K(m = 1 - p); with k = sech x, m = sech^2 x and
    1 - m = tanh^2 x, so neither integral loses digits near m = 1.
    """
    return ellipkm1(np.tanh(x) ** 2) / ellipkm1(_sech2(x))


def stripline_cohn_z0(w, b, er):
    """Exact zero-thickness centred stripline Z0 [ohm] (Cohn 1954; Pozar 2012 section 3.7; docs/references.md B9).

    Z0 = eta0/(4 sqrt(er)) K(k)/K(k'), k = sech(pi w/(2b)), k' = tanh(pi w/(2b)).
    w [m] strip width, b [m] ground-to-ground spacing, er [-].
    """
    return ETA0 / (4.0 * np.sqrt(er)) * _k_ratio_sech_tanh(np.pi * w / (2.0 * b))


def stripline_wheeler_z0(w, b, t, er):
    """Centred stripline Z0 [ohm] with strip thickness, Wheeler 1978 ([Wh78], from memory).

    w [m], b [m] ground-to-ground spacing, t [m] thickness (< b), er [-].
    x = t/b; m = 2/(1 + (2/3) x/(1 - x));
    dW/(b-t) = x/(pi (1-x)) [1 - 0.5 ln((x/(2-x))^2 + (0.0796 x/(w/b + 1.1 x))^m)];
    W' = w + dW, r = (b - t)/W';
    Z0 = 30/sqrt(er) ln(1 + (4/pi) r [(8/pi) r + sqrt(((8/pi) r)^2 + 6.27)]).
    Wheeler states about 0.5 % accuracy for W'/(b-t) < 10.
    """
    x = t / b
    thick = x > 0.0
    xs = np.where(thick, x, 0.5)
    m = 2.0 / (1.0 + (2.0 / 3.0) * xs / (1.0 - xs))
    # ln(p^2 + q^m) as a log-sum-exp, so that very thin strips do not underflow to ln(0)
    lx = np.log(xs)
    log_sum = np.logaddexp(2.0 * (lx - np.log(2.0 - xs)), m * (np.log(0.0796) + lx - np.log(w / b + 1.1 * xs)))
    dw = np.where(thick, (b - t) * xs / (np.pi * (1.0 - xs)) * (1.0 - 0.5 * log_sum), 0.0)
    r = (b - t) / (w + dw)
    p = 8.0 / np.pi * r
    return 30.0 / np.sqrt(er) * np.log(1.0 + 4.0 / np.pi * r * (p + np.sqrt(p * p + 6.27)))


def stripline(w, b, t, er):
    """Centred (symmetric) stripline Z0 [ohm]: Cohn's exact t = 0 value times Wheeler's thickness factor.

    Z0(w, b, t) = Z0_Cohn(w, b) * Z0_Wheeler(w, b, t) / Z0_Wheeler(w, b, 0).
    At t = 0 this is Cohn's exact result; the thickness factor is taken from
    Wheeler 1978 (about 0.5 % accurate, W'/(b-t) < 10), so the absolute value
    keeps the exact zero-thickness limit.  er_eff = er (homogeneous dielectric).
    Warns for t/b > 0.25 or W'/(b - t) > 10 (Wheeler's range, from memory).
    """
    z = stripline_cohn_z0(w, b, er)
    thick = t > 0.0
    name = "stripline thickness factor (Wheeler 1978)"
    _warn(name, "t/b", t / b, None, 0.25, where=thick)
    _warn(name, "w/(b-t)", w / (b - t), None, 10.0, where=thick)
    factor = stripline_wheeler_z0(w, b, t, er) / stripline_wheeler_z0(w, b, 0.0, er)
    return z * np.where(thick, factor, 1.0)


# ---------------------------------------------------------------------------
# edge-coupled stripline: Cohn 1955

def _k_ratio(k2, kp2):
    """K(k')/K(k) from m = k^2 and m' = k'^2 = 1 - k^2 given separately (no cancellation) [-]."""
    return ellipkm1(k2) / ellipkm1(kp2)


def coupled_stripline_cohn(w, s, b, er):
    """Exact zero-thickness edge-coupled stripline (z_even, z_odd) [ohm] (Cohn 1955, [Cohn55]; Pozar 2012 section 7.6).

    Z0e = eta0/(4 sqrt(er)) K(ke')/K(ke), ke = tanh(pi w/(2b)) tanh(pi (w+s)/(2b));
    Z0o = eta0/(4 sqrt(er)) K(ko')/K(ko), ko = tanh(pi w/(2b)) coth(pi (w+s)/(2b)).
    w [m] strip width, s [m] gap, b [m] ground-to-ground spacing, er [-].
    """
    a, c = np.pi * w / (2.0 * b), np.pi * (w + s) / (2.0 * b)
    ta, tc = np.tanh(a), np.tanh(c)
    sa, sc = _sech2(a), _sech2(c)
    ke2, kep2 = (ta * tc) ** 2, sa + sc - sa * sc  # 1 - ta^2 tc^2 without cancellation
    ko2 = (ta / tc) ** 2
    # 1 - ko^2 = (tc - ta)(tc + ta)/tc^2 and tc - ta = sinh(c - a)/(cosh a cosh c)
    near = c < 350.0
    diff = np.where(near, np.sinh(np.where(near, c - a, 0.0)) * np.sqrt(sa * sc), 1.0 - ta)
    kop2 = diff * (tc + ta) / tc ** 2
    scale = ETA0 / (4.0 * np.sqrt(er))
    return scale * _k_ratio(ke2, kep2), scale * _k_ratio(ko2, kop2)


def _cohn55_thick(w, s, b, t):
    """Cohn's thick-strip parallel-plate + fringing form, times sqrt(er) [ohm]; s=None: isolated strip.

    Z = 30 pi (b - t) / (w + (b Cf/(2 pi)) A), Cf = 2 ln((2b-t)/(b-t)) - (t/b) ln(t(2b-t)/(b-t)^2),
    A = 2 for an isolated strip, 1 + ln(1 + tanh q)/ln 2 (even), 1 + ln(1 + coth q)/ln 2 (odd),
    q = pi s/(2b) ([Cohn55], wide-strip approximation, from memory).  Used only as a ratio.
    Returns (z_even, z_odd) for a gap, z for s=None.
    """
    r = t / b
    thick = r > 0.0
    rs = np.where(thick, r, 0.5)
    cf = 2.0 * np.log((2.0 - r) / (1.0 - r)) - np.where(thick, rs * np.log(rs * (2.0 - rs) / (1.0 - rs) ** 2), 0.0)
    fringe = b * cf / (2.0 * np.pi)
    if s is None:
        return 30.0 * np.pi * (b - t) / (w + fringe * 2.0)
    q = np.pi * s / (2.0 * b)
    a_e = 1.0 + np.log(1.0 + np.tanh(q)) / np.log(2.0)
    a_o = 1.0 + np.log(1.0 + 1.0 / np.tanh(q)) / np.log(2.0)
    return (30.0 * np.pi * (b - t) / (w + fringe * a_e), 30.0 * np.pi * (b - t) / (w + fringe * a_o))


def edge_coupled_stripline(w, s, b, t, er):
    """Edge-coupled centred stripline (z_even, z_odd) [ohm] of one line.

    t = 0: Cohn 1955's exact conformal-mapping result (:func:`coupled_stripline_cohn`).
    t > 0: each mode's value is multiplied by the single strip's Wheeler 1978
    thickness factor (as in :func:`stripline`) and by Cohn 1955's thick-strip
    ratio of that mode to an isolated strip, Zmode(t)/Zmode(0) / (Z1(t)/Z1(0)),
    which carries the extra odd-mode lowering by the facing strip edges.  So at
    large s both modes tend to :func:`stripline` exactly, for any t.
    Cohn's thick-strip form is a wide-strip approximation: warns if t > 0 and
    w/b < 0.35 or t/b > 0.1 (from memory).  er_eff = er.
    """
    ze, zo = coupled_stripline_cohn(w, s, b, er)
    thick = t > 0.0
    name = "edge-coupled stripline thickness factor (Cohn 1955)"
    _warn(name, "w/b", w / b, 0.35, None, where=thick)
    _warn(name, "t/b", t / b, None, 0.1, where=thick)
    wh = stripline_wheeler_z0(w, b, t, er) / stripline_wheeler_z0(w, b, 0.0, er)
    single = _cohn55_thick(w, None, b, t) / _cohn55_thick(w, None, b, 0.0)
    (ze_t, zo_t), (ze_0, zo_0) = _cohn55_thick(w, s, b, t), _cohn55_thick(w, s, b, 0.0)
    ze = ze * np.where(thick, wh * (ze_t / ze_0) / single, 1.0)
    zo = zo * np.where(thick, wh * (zo_t / zo_0) / single, 1.0)
    return ze, zo


# ---------------------------------------------------------------------------
# edge-coupled microstrip: Kirschning & Jansen 1984 (static part)

def coupled_microstrip_kj(u, g, er):
    """Zero-thickness edge-coupled microstrip (z_even, z_odd [ohm], er_eff_even, er_eff_odd [-]).

    Static equations of Kirschning & Jansen 1984 ([KJ84], from memory), built on
    the Hammerstad & Jensen single line at the same u: u = w/h, g = s/h [-], er [-].
    Authors' stated accuracy (from memory): about 1 % for 0.1 <= u <= 10,
    0.1 <= g <= 10, 1 <= er <= 18.
    """
    e0 = _hj_er_eff(u, er)
    z0 = _hj_z01(u) / np.sqrt(e0)
    # even-mode effective permittivity
    v = u * (20.0 + g * g) / (10.0 + g * g) + g * np.exp(-g)
    e_even = _hj_er_eff(v, er)
    # odd-mode effective permittivity
    a_o = 0.7287 * (e0 - (er + 1.0) / 2.0) * (1.0 - np.exp(-0.179 * u))
    b_o = 0.747 * er / (0.15 + er)
    c_o = b_o - (b_o - 0.207) * np.exp(-0.414 * u)
    d_o = 0.593 + 0.694 * np.exp(-0.562 * u)
    e_odd = ((er + 1.0) / 2.0 + a_o - e0) * np.exp(-c_o * g ** d_o) + e0
    # impedances
    q1 = 0.8695 * u ** 0.194
    q2 = 1.0 + 0.7519 * g + 0.189 * g ** 2.31
    q3 = 0.1975 + (16.6 + (8.4 / g) ** 6) ** -0.387 + np.log(g ** 10 / (1.0 + (g / 3.4) ** 10)) / 241.0
    q4 = 2.0 * q1 / q2 / (np.exp(-g) * u ** q3 + (2.0 - np.exp(-g)) * u ** -q3)
    q5 = 1.794 + 1.14 * np.log(1.0 + 0.638 / (g + 0.517 * g ** 2.43))
    q6 = 0.2305 + np.log(g ** 10 / (1.0 + (g / 5.8) ** 10)) / 281.3 + np.log(1.0 + 0.598 * g ** 1.154) / 5.1
    q7 = (10.0 + 190.0 * g * g) / (1.0 + 82.3 * g ** 3)
    q8 = np.exp(-6.5 - 0.95 * np.log(g) - (g / 0.15) ** 5)
    q9 = np.log(q7) * (q8 + 1.0 / 16.5)
    q10 = q4 - q5 / q2 * np.exp(q6 * np.log(u) / u ** q9)
    k = z0 / ETA0 * np.sqrt(e0)
    z_even = z0 * np.sqrt(e0 / e_even) / (1.0 - k * q4)
    z_odd = z0 * np.sqrt(e0 / e_odd) / (1.0 - k * q10)
    return z_even, z_odd, e_even, e_odd


def edge_coupled_microstrip(w, s, h, t, er):
    """Edge-coupled surface microstrip (z_even, z_odd [ohm], er_eff_even, er_eff_odd [-]) of one line.

    Kirschning & Jansen 1984 static equations (:func:`coupled_microstrip_kj`);
    strip thickness enters as for the single line (Hammerstad & Jensen 1980):
    the equations are evaluated at the dielectric-corrected width ur, and both
    modes' effective permittivities take the single line's thickness factor
    (Z01(u1)/Z01(ur))^2, so that far apart both modes tend to :func:`microstrip`.
    That ignores the side-wall capacitance between thick facing edges, which
    lowers z_odd a little more: for t comparable to s treat z_odd as an upper
    estimate.  Warns outside 0.1 <= w/h <= 10, 0.1 <= s/h <= 10, er <= 18, and
    t > w or t > h.
    """
    name = "edge-coupled microstrip (Kirschning & Jansen 1984)"
    u, g = w / h, s / h
    _warn(name, "w/h", u, 0.1, 10.0)
    _warn(name, "s/h", g, 0.1, 10.0)
    _warn(name, "er", er, None, 18.0)
    _warn(name, "t/w", t / w, None, 1.0)
    _warn(name, "t/h", t / h, None, 1.0)
    u1, ur = _hj_widths(u, t / h, er)
    z_even, z_odd, e_even, e_odd = coupled_microstrip_kj(ur, g, er)
    thick = (_hj_z01(u1) / _hj_z01(ur)) ** 2
    return z_even, z_odd, e_even * thick, e_odd * thick


# ---------------------------------------------------------------------------
# the public entry point

_FORMULAS = {
    "microstrip": "Hammerstad & Jensen 1980, with thickness correction",
    "stripline": "Cohn 1954 exact (t = 0) x Wheeler 1978 thickness factor",
    "coax": "exact TEM: eta0/(2 pi sqrt(er)) ln(D/d)",
    "two_wire": "exact TEM: eta0/(pi sqrt(er)) acosh(s/d)",
    "edge_coupled_microstrip": "Kirschning & Jansen 1984 (static), Hammerstad & Jensen thickness correction",
    "edge_coupled_stripline": "Cohn 1955 exact (t = 0) x Wheeler 1978 / Cohn 1955 thickness factors",
}


def _parse_dims(kind: str, dims: Mapping[str, object]) -> dict[str, float]:
    from .units import parse_quantity

    if kind not in KINDS:
        raise ArgumentError(f"unknown cross-section kind {kind!r}; kinds are: {', '.join(KINDS)}")
    keys = KINDS[kind]
    extra = [k for k in dims if k not in keys]
    missing = [k for k in keys if k not in dims]
    if extra:
        raise ArgumentError(f"{kind}: unknown key{'s' if len(extra) > 1 else ''} {', '.join(map(repr, extra))}; "
                            f"{kind} takes: {', '.join(keys)}")
    if missing:
        raise ArgumentError(f"{kind}: missing key{'s' if len(missing) > 1 else ''} {', '.join(map(repr, missing))}; "
                            f"{kind} takes: {', '.join(keys)}")
    out = {}
    for key in keys:
        dim = "dimensionless" if key == "er" else "length"
        try:
            value = parse_quantity(dims[key], dim, source="geometry", table=kind, key=key)
        except DesignError as exc:
            raise ArgumentError(f"{kind}: {key}: {exc.reason}") from None
        if key == "er":
            if not value >= 1.0:
                raise ArgumentError(f"{kind}: er must be at least 1 (relative permittivity), got {value:g}")
        elif key in _MAY_BE_ZERO:
            if not value >= 0.0:
                raise ArgumentError(f"{kind}: {key} must be 0 or more [m], got {value:g}")
        elif not value > 0.0:
            raise ArgumentError(f"{kind}: {key} must be positive [m], got {value:g}")
        out[key] = value
    if kind == "coax" and not out["D"] > out["d"]:
        raise ArgumentError(f"coax: D (shield inside diameter) must exceed d (inner conductor), "
                            f"got d = {out['d']:g} m, D = {out['D']:g} m")
    if kind == "two_wire" and not out["s"] > out["d"]:
        raise ArgumentError(f"two_wire: s (centre spacing) must exceed d (wire diameter), "
                            f"got d = {out['d']:g} m, s = {out['s']:g} m")
    if kind in ("stripline", "edge_coupled_stripline") and not out["t"] < out["b"]:
        raise ArgumentError(f"{kind}: t (strip thickness) must be less than b (ground-to-ground spacing), "
                            f"got t = {out['t']:g} m, b = {out['b']:g} m")
    return out


def line(kind: str, **dims) -> CrossSection:
    """Quasi-static Z0 and delay of a cross-section from its geometry.

    Parameters
    ----------
    kind : str
        One of :data:`KINDS`: "microstrip", "stripline", "coax", "two_wire",
        "edge_coupled_microstrip", "edge_coupled_stripline".
    **dims :
        The kind's keys (see :data:`KINDS`): lengths [m] as floats or unit
        strings ("0.3 mm", "5 mil"), er [-] the relative permittivity (>= 1).
        t (strip thickness) may be 0.

    Returns
    -------
    CrossSection
        Frozen; z0 [ohm], delay [s/m], er_eff [-]; for coupled kinds z0 = z_odd,
        z_diff = 2 z_odd, z_even [ohm] and er_eff_even [-], delay_even [s/m].

    Raises
    ------
    ArgumentError
        Unknown kind, missing or extra key, unreadable or non-physical value
        (non-positive length, er < 1, D <= d, s <= d, t >= b); the message names
        the key and lists the allowed ones.

    Warns
    -----
    GeometryRangeWarning
        The geometry is outside the formula's stated range (see each function).
    """
    v = _parse_dims(kind, dims)
    with np.errstate(all="ignore"):   # far outside a formula's range: caught below as a non-finite result
        out = evaluate(kind, v)
    if not all(np.isfinite(x[0]) and x[0] > 0.0 for x in out.values()):
        raise ArgumentError(f"{kind}: the formula gives no finite impedance for {v} "
                            f"(dimensions far outside its range)")
    out = {k: float(x[0]) for k, x in out.items()}
    z0, er_eff = out.pop("z0"), out.pop("er_eff")
    coupled = {}
    if kind in COUPLED_KINDS:
        coupled = dict(z_odd=out["z_odd"], z_even=out["z_even"], z_diff=out["z_diff"],
                       er_eff_even=out["er_eff_even"], delay_even=float(delay_from_er_eff(out["er_eff_even"])))
    return CrossSection(kind=kind, dims=v, z0=z0, delay=float(delay_from_er_eff(er_eff)), er_eff=er_eff,
                        formula=_FORMULAS[kind], **coupled)


def evaluate(kind: str, v: Mapping[str, object]) -> dict:
    """The formulas of ``kind`` on checked dimensions ``v`` (key -> float [m] / [-] or arrays over variants).

    Returns {"z0", "er_eff"} and, for coupled kinds, {"z_odd", "z_even", "z_diff", "er_eff_even"}
    (floats or arrays, [ohm] and [-]); z0 is the odd-mode impedance of one line for coupled kinds.
    No checks and no error handling: :func:`line` and the design files (:func:`derive`) do those.

    Every input is taken as a 1-D float64 array (a float becomes one element), so one variant gives
    the same bits alone as inside any batch: numpy's array loops and Python's float arithmetic
    (``x ** 4``) can differ in the last bit.  Returns 1-D arrays.
    """
    v = {k: np.atleast_1d(np.asarray(x, dtype=float)) for k, x in v.items()}
    er = v["er"]
    if kind == "microstrip":
        z0, er_eff = microstrip(v["w"], v["h"], v["t"], er)
        return {"z0": z0, "er_eff": er_eff}
    if kind == "stripline":
        return {"z0": stripline(v["w"], v["b"], v["t"], er), "er_eff": er}
    if kind == "coax":
        return {"z0": coax_z0(v["d"], v["D"], er), "er_eff": er}
    if kind == "two_wire":
        return {"z0": two_wire_z0(v["d"], v["s"], er), "er_eff": er}
    if kind == "edge_coupled_microstrip":
        ze, zo, ee, eo = edge_coupled_microstrip(v["w"], v["s"], v["h"], v["t"], er)
    else:  # edge_coupled_stripline
        ze, zo = edge_coupled_stripline(v["w"], v["s"], v["b"], v["t"], er)
        ee = eo = er
    return {"z0": zo, "er_eff": eo, "z_odd": zo, "z_even": ze, "z_diff": 2.0 * zo, "er_eff_even": ee}


#: kinds that describe one conductor over its return, and those that describe a pair
SINGLE_ENDED_KINDS = ("microstrip", "stripline", "coax", "two_wire")
DIFFERENTIAL_KINDS = ("two_wire", "edge_coupled_microstrip", "edge_coupled_stripline")


def derive(kind: str, v: Mapping[str, object], *, differential: bool):
    """(z0 [ohm], delay [s/m], er_eff [-], notes) of a design file's ``geometry`` table, for one or many variants.

    v: key -> float or 1-D array over variants (already checked: positive lengths, er >= 1, D > d...).
    differential: the design is differential, so z0 is the pair's differential impedance
    (``z_diff = 2 z_odd`` for the coupled kinds; a two-wire line's own impedance is already the
    impedance between its wires) and the delay the odd (differential) mode's.  The formulas'
    range warnings come back as ``notes`` (text) instead of being raised.  A result that is not
    finite and positive is NaN in z0 (the caller refuses it, naming the table).
    """
    notes: list = []
    token = _NOTES.set(notes)
    try:
        with np.errstate(all="ignore"):
            out = evaluate(kind, v)
    finally:
        _NOTES.reset(token)
    z0 = out["z_diff"] if differential and kind in COUPLED_KINDS else out["z0"]
    er_eff = out["er_eff"]
    ok = np.isfinite(z0) & (z0 > 0) & np.isfinite(er_eff) & (er_eff >= 1.0)
    z0 = np.where(ok, z0, np.nan)
    delay = delay_from_er_eff(er_eff)
    shape = np.broadcast_shapes(z0.shape, np.shape(er_eff))
    z0, delay, er_eff = (np.broadcast_to(x, shape).copy() for x in (z0, delay, er_eff))
    if all(np.ndim(x) == 0 for x in v.values()):          # one variant: floats, as in a scalar design
        return float(z0[0]), float(delay[0]), float(er_eff[0]), notes
    return z0, delay, er_eff, notes


__all__ = ["KINDS", "COUPLED_KINDS", "SINGLE_ENDED_KINDS", "DIFFERENTIAL_KINDS", "CrossSection", "line", "evaluate", "derive", "delay_from_er_eff", "coax_z0", "two_wire_z0",
           "microstrip", "stripline", "stripline_cohn_z0", "stripline_wheeler_z0", "coupled_stripline_cohn",
           "edge_coupled_stripline", "coupled_microstrip_kj", "edge_coupled_microstrip", "ETA0"]
