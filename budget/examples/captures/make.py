"""Regenerate the demo captures of the fictional "Wren" sensor-hub board (see README.md beside this file).

    python budget/examples/captures/make.py [OUTPUT_DIRECTORY]

Every waveform comes from busbudget's own engine (the bundled ``short-bus``
example, with a unit's values applied), then is made to look like a bench
capture: resampled onto a scope's time grid, given Gaussian noise, a probe
offset, a trigger that is not the driver's ramp start, pre-trigger samples,
and written in a scope-like CSV dialect with units in the header.  The numbers
are invented for the demo (rule: invented numbers are for demos only); the seeds
are fixed, so the files are reproduced byte for byte.
"""
from __future__ import annotations

from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent

# unit 0042: the measured values its TDR and fixture gave (fictional)
UNIT_0042 = {"lines.route.z0": "47.6 ohm", "parts.hub_ctrl.r_high": "19.5 ohm", "parts.hub_ctrl.r_low": "17.2 ohm",
             "termination.0.r": "22.3 ohm"}
# unit 0117: a board from another panel, thinner dielectric and longer stubs (fictional)
UNIT_0117 = {"lines.route.z0": "57 ohm", "tap.MEM1.stub.length": "11 mm", "tap.MEM2.stub.length": "11 mm",
             "tap.MEM3.stub.length": "11 mm"}

DT_SCOPE = 20e-12       # scope sample interval [s]
PRE_TRIGGER = 6e-9      # record start before the trigger [s]
RECORD = 36e-9          # record length [s]
T_STOP = 40e-9          # simulated window [s] (longer than the record after the ramp start)
# The engine's time steps [s] the demo data were made with (the automatic steps of their
# designs at the time: 32 per ramp, 16 per package L-C period), fixed so the files stay
# reproduced byte for byte whatever the automatic step becomes.
DT_UNITS = 1.5209170034901045e-11
DT_TDR = 1.3671875e-12


def unit_design(values):
    import budget
    from budget.units import parse_quantity

    d = budget.example("short-bus")
    dims = d.structure.dimensions
    return d.with_values({p: parse_quantity(v, dims[p]) for p, v in values.items()})


def scope_trace(w, tap, t_scope, t_ramp_start, rng, noise, offset):
    """Pin waveform of ``tap`` on the scope's grid: the ramp starts at t_ramp_start [s] of the record."""
    v = w[tap]
    x = np.interp(t_scope - t_ramp_start, w.t, v, left=v[0], right=v[-1])
    return x + offset + rng.normal(0.0, noise, t_scope.shape)


def trigger_time(w, tap, level):
    """Time [s] after the ramp start at which ``tap``'s waveform first crosses ``level`` [V]."""
    v = w[tap]
    rising = v[-1] > v[0]
    x = v if rising else -v
    lv = level if rising else -level
    i = int(np.flatnonzero(x >= lv)[0])
    return float(w.t[i - 1] + (lv - x[i - 1]) / (x[i] - x[i - 1]) * (w.t[i] - w.t[i - 1]))


def record_grid(rng):
    # a grid that does not line up with the engine's steps
    return -PRE_TRIGGER + DT_SCOPE * np.arange(int(RECORD / DT_SCOPE)) + 3.1e-12


def write_0042_rise(out):
    import budget

    rng = np.random.default_rng(42)
    w = budget.simulate(unit_design(UNIT_0042), "CTRL", "rise", t_stop=T_STOP, dt=DT_UNITS)
    t = record_grid(rng)
    # trigger on CH1 (CTRL) rising through 1.25 V: the ramp started that long before t = 0
    t0 = -trigger_time(w, "CTRL", 1.25)
    ch = [scope_trace(w, "CTRL", t, t0, rng, 0.006, 0.0),
          scope_trace(w, "MEM1", t, t0, rng, 0.008, +0.009),
          scope_trace(w, "MEM3", t, t0, rng, 0.008, -0.004)]
    lines = ["# Fictional bench export: Wren sensor-hub board, unit 0042, address line A3",
             "# Instrument: demo four-channel oscilloscope; sample interval 20 ps; 8-bit; averaging off",
             "# Trigger: CH1 rising through 1.25 V at t = 0",
             "# Probes: CH1 at the controller (CTRL), CH2 at MEM1, CH3 at MEM3",
             "Time (ns),CH1 (V),CH2 (mV),CH3 (mV)"]
    for i in range(t.size):
        lines.append(f"{t[i] * 1e9:.4f},{ch[0][i]:.4f},{ch[1][i] * 1e3:.1f},{ch[2][i] * 1e3:.1f}")
    (out / "wren_unit0042_rise.csv").write_text("\n".join(lines) + "\n")


def write_0042_fall(out):
    import budget

    rng = np.random.default_rng(4242)
    w = budget.simulate(unit_design(UNIT_0042), "CTRL", "fall", t_stop=T_STOP, dt=DT_UNITS)
    t = record_grid(rng)
    # an external trigger 0.7 ns after the ramp start
    t0 = -0.7e-9
    ch = [scope_trace(w, tap, t, t0, rng, 0.008, off) for tap, off in (("CTRL", 0.0), ("MEM2", 0.006),
                                                                        ("MEM3", -0.003))]
    lines = ["Record Length;1800", "Sample Interval;2,0E-11", "Trigger;external",
             "Time [s];CTRL [V];MEM2 [V];MEM3 [V]"]
    for i in range(t.size):
        cells = [f"{t[i]:.6e}"] + [f"{c[i]:.4f}" for c in ch]
        lines.append(";".join(cells).replace(".", ","))
    (out / "wren_unit0042_fall.csv").write_text("\n".join(lines) + "\n")


def write_0117_rise(out):
    import budget

    rng = np.random.default_rng(117)
    w = budget.simulate(unit_design(UNIT_0117), "CTRL", "rise", t_stop=T_STOP, dt=DT_UNITS)
    t = record_grid(rng)
    t0 = 1.9e-9  # the trigger fired 1.9 ns before the ramp started (a trigger from the test sequencer)
    ch = [scope_trace(w, tap, t, t0, rng, 0.007, off) for tap, off in (("MEM1", 0.005), ("MEM3", 0.002))]
    lines = ["Wren sensor-hub board, unit 0117 (fictional), address line A3", "time\tMEM1\tMEM3", "s\tV\tV"]
    for i in range(t.size):
        lines.append(f"{t[i]:.5e}\t{ch[0][i]:.4f}\t{ch[1][i]:.4f}")
    (out / "wren_unit0117_rise.csv").write_text("\n".join(lines) + "\n")


TDR_SECTIONS = [("launch", 50.0, 0.010), ("trunk_a", 47.5, 0.040), ("neck", 41.0, 0.006), ("trunk_b", 48.5, 0.020)]
TDR_ER_EFF = 3.6
TDR_RISE = 35e-12       # 10-90 % of the TDR step [s]
TDR_EMF = 0.25          # open-circuit step [V]


def tdr_design_text():
    """A fictional TDR coupon: a 50 ohm step source, then the sections of TDR_SECTIONS, open at the end."""
    out = ['[bus]\nname = "Wren trunk coupon (TDR)"\nsignaling = "single-ended"\n',
           f'[edge]\nrise = "{TDR_RISE!r} s"\nfall = "{TDR_RISE!r} s"\n',
           f'[parts.tdr]\nrole = "driver"\nv_high = "{TDR_EMF!r} V"\nv_low = "0 V"\nr_high = "50 ohm"\n'
           'r_low = "50 ohm"\nc_pin = "0 pF"\n']
    for i, (name, z, length) in enumerate(TDR_SECTIONS):
        out.append(f'[lines.{name}]\nz0 = "{z} ohm"\ner_eff = {TDR_ER_EFF}\n')
        out.append(f'[[segment]]\nfrom = "n{i}"\nto = "n{i + 1}"\nline = "{name}"\nlength = "{length!r} m"\n')
    out.append('[[tap]]\nname = "PORT"\nnode = "n0"\npart = "tdr"\n')
    return "".join(out)


def write_tdr(out):
    import budget

    rng = np.random.default_rng(7)
    d = budget.loads(tdr_design_text())
    w = budget.simulate(d, "PORT", "rise", t_stop=1.2e-9, dt=DT_TDR)
    dt = 2.0e-12
    t = -0.2e-9 + dt * np.arange(int(1.4e-9 / dt))
    v = np.interp(t - 0.1e-9, w.t, w["PORT"], left=w["PORT"][0], right=w["PORT"][-1])
    v = v + rng.normal(0.0, 0.0003, t.shape)
    lines = ["# Fictional TDR export: Wren trunk coupon, 50 ohm source, 250 mV step, 35 ps (10-90 %)",
             "Time (ps),Port (mV)"]
    lines += [f"{t[i] * 1e12:.2f},{v[i] * 1e3:.3f}" for i in range(t.size)]
    (out / "wren_trunk_tdr.csv").write_text("\n".join(lines) + "\n")


def write_values(out):
    (out / "wren_unit0042_values.toml").write_text(
        "# Measured values of Wren unit 0042 (fictional): TDR of the trunk, fixture measurement of the\n"
        "# controller's output resistance, the series resistor measured in circuit.\n"
        + "".join(f'"{p}" = "{v}"\n' for p, v in UNIT_0042.items()))
    (out / "wren_unit0117_values.csv").write_text(
        "# Measured values of Wren unit 0117 (fictional)\npath,value\n"
        + "".join(f"{p},{v}\n" for p, v in UNIT_0117.items()))


def main(out=HERE, quiet=False):
    """Write every demo file into the directory ``out`` (default: beside this script)."""
    out = Path(out)
    out.mkdir(parents=True, exist_ok=True)
    write_values(out)
    write_0042_rise(out)
    write_0042_fall(out)
    write_0117_rise(out)
    write_tdr(out)
    if not quiet:
        for p in sorted(out.glob("wren_*")):
            print(f"wrote {p.name} ({p.stat().st_size} bytes)")


if __name__ == "__main__":
    import sys

    main(sys.argv[1] if len(sys.argv) > 1 else HERE)
