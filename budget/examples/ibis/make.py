"""Regenerate tansy_tsx33.ibs, the IBIS file of a fictional 3.3 V CMOS bus transceiver (demo data).

Run: ``python budget/examples/ibis/make.py`` (writes the file beside this script, byte for byte
the same each time).  The part is made up: the device equations below are a plain
behavioural sketch chosen for demos and tests, not any real part's data.

- Pulldown / pullup: I = Isat tanh(V / (Isat R)) (a resistive region of slope 1/R that
  saturates at Isat), pullup on the rail-relative voltage Vtable = Vcc - Vout.
- Clamps: a junction diode (Is = 1e-14 A, n = 1, kT/q = 25.85 mV) in series with 4 ohm.
- Switching: the pullup's coefficient rises as a raised cosine over T, the pulldown's falls
  over 0.8 T (break before make), so the two-waveform extraction has something to find.
- V-T tables: the die (C_comp only, no package) into each fixture, integrated with scipy's
  Radau solver at rtol 1e-10; [Ramp] from the 20-80 % points into 50 ohm (rising to GND,
  falling to Vcc).
"""
from __future__ import annotations

import math
from pathlib import Path

import numpy as np
from scipy.integrate import solve_ivp
from scipy.optimize import brentq

HERE = Path(__file__).resolve().parent
OUT = HERE / "tansy_tsx33.ibs"
VT = 0.02585          # kT/q at 300 K [V]
IS, RS = 1e-14, 4.0   # clamp diode saturation current [A], series resistance [ohm]
CORNER = {            # Vcc [V], pulldown R [ohm], Isat [A], pullup R, Isat, T [s], C_comp io, C_comp in [F]
    "typ": (3.3, 22.0, 0.070, 26.0, 0.060, 1.2e-9, 4.0e-12, 3.0e-12),
    "min": (3.0, 29.7, 0.049, 35.1, 0.042, 1.8e-9, 3.6e-12, 2.7e-12),
    "max": (3.6, 16.5, 0.091, 19.5, 0.078, 0.8e-9, 4.4e-12, 3.3e-12),
}
COLS = ("typ", "min", "max")
V_GRID = np.round(np.linspace(-3.3, 6.6, 100), 6)
T_GRID = np.round(np.linspace(0.0, 5e-9, 101), 15)


def pulldown(v, c):
    _, rn, isn, *_ = CORNER[c]
    return isn * math.tanh(v / (isn * rn))


def pullup(vt, c):
    _, _, _, rp, isp, *_ = CORNER[c]
    return -isp * math.tanh(vt / (isp * rp))


def diode(vd):
    """Current [A] of the clamp diode with its series resistance at a forward voltage vd [V]."""
    if vd <= 0.0:
        return IS * (math.exp(vd / VT) - 1.0)
    return brentq(lambda x: IS * (math.exp(min((vd - x * RS) / VT, 700.0)) - 1.0) - x, 0.0, vd / RS)


def gnd_clamp(v):          # conducts when the pin goes below ground: current out of the buffer (negative)
    return -diode(-v)


def power_clamp(vt):       # vt = Vcc - Vout; conducts above the rail: current into the buffer (positive)
    return diode(-vt)


def smooth(x):
    return 0.0 if x <= 0 else 1.0 if x >= 1 else 0.5 * (1.0 - math.cos(math.pi * x))


def coefficients(t, c, rising):
    T = CORNER[c][5]
    up, down = smooth(t / T), 1.0 - smooth(t / (0.8 * T))
    if rising:
        return up, down
    return 1.0 - smooth(t / (0.8 * T)), smooth(t / T)   # falling: pullup lets go first


def waveform(c, rising, r_fix, v_fix):
    vcc, *_, ccomp, _ = CORNER[c]

    def i_buf(t, v):
        ku, kd = coefficients(t, c, rising)
        return ku * pullup(vcc - v, c) + kd * pulldown(v, c) + gnd_clamp(v) + power_clamp(vcc - v)

    v0 = brentq(lambda v: i_buf(0.0, v) + (v - v_fix) / r_fix, -2.0, vcc + 2.0)
    sol = solve_ivp(lambda t, y: [-(i_buf(t, y[0]) + (y[0] - v_fix) / r_fix) / ccomp], (0.0, T_GRID[-1]), [v0],
                    method="Radau", t_eval=T_GRID, rtol=1e-10, atol=1e-12, max_step=5e-12)
    return sol.y[0]


def fmt(x):
    return f"{x:.6g}"


def table(fn, header):
    lines = [f"| {header}"]
    for v in V_GRID:
        lines.append(f"{fmt(v):>10} " + " ".join(f"{fmt(fn(v, c)):>14}" for c in COLS))
    return lines


def clamps(ccomp_idx):
    out = ["[GND Clamp]"] + table(lambda v, c: gnd_clamp(v), "voltage     I(typ)         I(min)         I(max)")
    out += ["[POWER Clamp]"] + table(lambda v, c: power_clamp(v),
                                     "voltage     I(typ)         I(min)         I(max)")
    return out


def main():
    L = ["[IBIS Ver]       5.1",
         "[File Name]      tansy_tsx33.ibs",
         "[File Rev]       1.0",
         "[Date]           2 December 2026",
         "[Source]         Behavioural sketch made up for busbudget demos and tests;",
         "                 regenerate with budget/examples/ibis/make.py.",
         "[Notes]          FICTIONAL PART. Tansy Microdevices and the TSX33 do not exist.",
         "                 The curves are smooth device equations, not measurements.",
         "[Disclaimer]     Demo data only: do not use for any real design.",
         "|",
         "[Component]      TSX33",
         "[Manufacturer]   Tansy Microdevices (fictional)",
         "[Package]",
         "| variable       typ        min        max",
         "R_pkg            0.30       0.25       0.35",
         "L_pkg            4.0nH      3.5nH      4.5nH",
         "C_pkg            0.60pF     0.50pF     0.70pF",
         "|",
         "[Pin]  signal_name  model_name  R_pin   L_pin   C_pin",
         "1      IO0          tsx33_io    0.28    3.8nH   0.58pF",
         "2      IO1          tsx33_io    0.31    4.2nH   0.62pF",
         "3      RX0          tsx33_in    NA      NA      NA",
         "4      VCC          POWER       NA      NA      NA",
         "5      GND          GND         NA      NA      NA",
         "|"]
    for name, mtype, ci in (("tsx33_io", "I/O", 6), ("tsx33_in", "Input", 7)):
        cc = [CORNER[c][ci] for c in COLS]
        L += [f"[Model]          {name}",
              f"Model_type       {mtype}",
              "Vinl = 0.8V",
              "Vinh = 2.0V",
              "Vmeas = 1.65V",
              *(["Rref = 50", "Vref = 1.65V", "Cref = 0pF"] if mtype == "I/O" else []),
              "| variable       typ        min        max",
              "C_comp           " + "  ".join(f"{fmt(c * 1e12)}pF" for c in cc),
              "[Voltage Range]  " + "  ".join(f"{CORNER[c][0]:.2f}" for c in COLS),
              "[Temperature Range]  50  100  0"]
        if mtype == "I/O":
            L += ["[Pulldown]"] + table(pulldown, "voltage     I(typ)         I(min)         I(max)")
            L += ["[Pullup]"] + table(pullup, "voltage     I(typ)         I(min)         I(max)")
        L += clamps(ci)
        if mtype != "I/O":
            continue
        waves = {}
        for rising in (True, False):
            for v_fix_name in ("gnd", "vcc"):
                waves[rising, v_fix_name] = {
                    c: waveform(c, rising, 50.0, 0.0 if v_fix_name == "gnd" else CORNER[c][0]) for c in COLS}
        ramp = []
        for rising, key, tag in ((True, "gnd", "r"), (False, "vcc", "f")):
            entries = []
            for c in COLS:
                w = waves[rising, key][c]
                t_fine = np.linspace(0, T_GRID[-1], 20001)
                wf = np.interp(t_fine, T_GRID, w)
                lo, hi = wf[0], wf[-1]
                p20 = lo + 0.2 * (hi - lo)
                p80 = lo + 0.8 * (hi - lo)
                s = np.sign(hi - lo)
                t20 = t_fine[np.argmax(s * wf >= s * p20)]
                t80 = t_fine[np.argmax(s * wf >= s * p80)]
                entries.append(f"{fmt(abs(p80 - p20))}/{fmt((t80 - t20) * 1e9)}n")
            ramp.append(f"dV/dt_{tag}        " + "  ".join(entries))
        L += ["[Ramp]", "| variable       typ              min              max"] + ramp + ["R_load = 50"]
        for rising in (True, False):
            for key in ("gnd", "vcc"):
                L += [f"[{'Rising' if rising else 'Falling'} Waveform]", "R_fixture = 50",
                      f"V_fixture = {0.0 if key == 'gnd' else CORNER['typ'][0]:.2f}"]
                if key == "vcc":
                    L += [f"V_fixture_min = {CORNER['min'][0]:.2f}", f"V_fixture_max = {CORNER['max'][0]:.2f}"]
                L += ["| time           V(typ)         V(min)         V(max)"]
                for k, t in enumerate(T_GRID):
                    L.append(f"{fmt(t * 1e9)}n".rjust(10) + " " +
                             " ".join(f"{fmt(waves[rising, key][c][k]):>14}" for c in COLS))
        L.append("|")
    L.append("[End]")
    OUT.write_text("\n".join(L) + "\n")


if __name__ == "__main__":
    main()
