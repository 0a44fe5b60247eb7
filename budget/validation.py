"""Physics validation of a design: sign rules, plausibility ranges and cross-checks.

A design's rules are plain data (:class:`Rule`), built once from its structure
(:func:`rules_for`) and evaluated with numpy over scalar or per-variant values,
so a batch of variants is validated in one pass and :meth:`Design.with_values`
evaluates only the rules that read a changed path.

Plausibility ranges (:data:`PLAUSIBLE`) refuse values that no user means -- a
pin capacitance of 1.8 F (a forgotten "p"), a package inductance of 2 H, a line
faster than light -- and suggest the likely unit.  They are generous on
purpose: they refuse nonsense, not unusual designs.  Each range states its
reason; the numbers are common practice of the trade unless a source is named.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .errors import DesignError
from .units import si

C0 = 299_792_458.0  # speed of light in vacuum [m/s] (SI definition)

# One line piece (segment or stub) may be at most this many edge times long (one-way delay
# over the faster 10-90 % edge).  A 1 km stub on a 1 ns bus is 5000; a 1200 m field-bus cable
# (the longest RS-485 runs) with a fast 3 ns driver edge is 2000.
MAX_DELAY_IN_EDGES = 2000.0


@dataclass(frozen=True)
class Range:
    """Plausible values of one kind of quantity [SI]: lo..hi inclusive; typical: for the unit hint."""
    lo: float
    hi: float
    unit: str
    typical: float
    what: str
    reason: str


PLAUSIBLE = {
    "pin_capacitance": Range(0.0, 100e-9, "F", 5e-12, "pin capacitance",
                             "device pins are 0.1-30 pF; a lumped board load reaches tens of nF"),
    "capacitance": Range(0.0, 100e-6, "F", 100e-12, "capacitance",
                         "RC-termination capacitors are 10 pF to a few uF"),
    "package_inductance": Range(0.0, 1e-6, "H", 2e-9, "package inductance",
                                "packages and leads are 0.1-20 nH; a connector adds tens of nH"),
    "driver_resistance": Range(1e-6, 1e12, "ohm", 30.0, "driver output resistance",
                               "a fraction of an ohm (strong drivers; micro-ohms for an ideal source) "
                               "to open-drain leakage"),
    "input_resistance": Range(1.0, 1e15, "ohm", 1e6, "input resistance",
                              "an input below 1 ohm would short the pin; inputs are kohm to Tohm"),
    "resistance": Range(1e-6, 1e12, "ohm", 50.0, "resistance",
                        "board resistors are milliohms to gigaohms (micro-ohms: an ideal short)"),
    "impedance": Range(1.0, 2000.0, "ohm", 50.0, "characteristic impedance",
                       "traces and cables are 20-150 ohm, open wire up to about 600 ohm"),
    "resistance_per_length": Range(0.0, 1e4, "ohm/m", 5.0, "series resistance per length",
                                   "thin traces and fine wire are under 100 ohm/m"),
    "voltage": Range(-1000.0, 1000.0, "V", 1.0, "voltage",
                     "logic and field buses run below 100 V"),
    "edge_time": Range(1e-12, 1e-3, "s", 1e-9, "edge time",
                       "driver edges are picoseconds (SerDes) to microseconds (slow field buses)"),
    "window": Range(1e-12, 1.0, "s", 100e-9, "simulation window",
                    "reflections on a bus settle within microseconds"),
    "step": Range(1e-15, 1e-3, "s", 10e-12, "time step", "a step resolves the edges"),
    "length": Range(1e-6, 10e3, "m", 0.01, "length",
                    "board traces are millimetres to a metre; cables up to a few kilometres"),
    "delay_per_length": Range(1.0 / C0, 100e-9, "s/m", 6e-9, "delay per length",
                              "no line is faster than light in vacuum (3.336 ns/m); "
                              "100 ns/m would need er_eff 900"),
    "er_eff": Range(1.0, 1000.0, "", 4.0, "effective permittivity",
                    "1 (air) to about 100 (ceramics)"),
    "permittivity": Range(1.0, 1000.0, "", 4.0, "relative permittivity",
                          "1 (air) to about 100 (ceramics)"),
    "thickness": Range(0.0, 0.1, "m", 35e-6, "strip thickness",
                       "copper is 5 um to a few hundred um thick; 0 = the zero-thickness formula"),
    "dimension": Range(1e-7, 1.0, "m", 0.2e-3, "cross-section dimension",
                       "trace widths, gaps, dielectric heights and wire or shield diameters are "
                       "micrometres to centimetres"),
    "ibis_corner": Range(-1.0, 1.0, "", 0.0, "IBIS corner",
                         "-1 (min: slow-weak), 0 (typ) or +1 (max: fast-strong)"),
}

# the kind of each design-file key (the last part of a parameter path)
KEY_KINDS = {
    "c_pin": "pin_capacitance", "l_pkg": "package_inductance", "r_high": "driver_resistance",
    "r_low": "driver_resistance", "r_in": "input_resistance", "v_high": "voltage", "v_low": "voltage",
    "vih": "voltage", "vil": "voltage", "v_max": "voltage", "v_min": "voltage", "v_meas": "voltage",
    "z0": "impedance", "delay": "delay_per_length", "er_eff": "er_eff", "r_dc": "resistance_per_length",
    "length": "length", "rise": "edge_time", "fall": "edge_time", "t_stop": "window", "dt": "step",
    "r": "resistance", "v": "voltage", "c": "capacitance", "r_up": "resistance", "r_down": "resistance",
    "v_up": "voltage", "corner": "ibis_corner",
    # cross-section geometry ([lines.NAME] geometry = {...}; budget.geometry.KINDS)
    "w": "dimension", "h": "dimension", "b": "dimension", "s": "dimension", "d": "dimension",
    "D": "dimension", "t": "thickness", "er": "permittivity",
}


def kind_of(path: str) -> str:
    """Kind of quantity at a parameter path (a key of :data:`PLAUSIBLE`)."""
    if ".ref_load." in path and path.endswith(".c"):
        return "pin_capacitance"
    return KEY_KINDS[path.rpartition(".")[2]]


@dataclass(frozen=True)
class Rule:
    """One check over parameter values; ``paths`` are the values it reads, ``blame`` the one it names.

    kind: "positive" | "nonneg" | "at_least_one" | "plausible" (path), "less" (paths[0] < paths[1]),
    "reach_high" / "reach_low" (threshold paths[0] against the sources paths[1:]), "delay" (length
    paths[0], line delay or er_eff paths[1], edges paths[2:4]), "geometry" (a line's cross-section
    dimensions, in budget.geometry.KINDS order; ``text`` holds the kind, ``flag`` differential).
    ``text``: the reason given.
    """
    kind: str
    paths: tuple
    blame: str
    text: str = ""
    flag: bool = False      # "reach_*": a ground-referenced element exists; "delay": paths[1] is er_eff


def rules_for(parts, lines, segments, taps, terminations, dims, *, geometry=None, differential=False) -> tuple:
    """Every rule of a design, in the order errors are reported.

    parts: name -> (role, present numeric keys); lines: name -> delay key ("delay", "er_eff" or
    "geometry"); segments: (from, to, line); taps: (name, node, part, stub line);
    terminations: (type, node, tap); dims: parameter path -> dimension; geometry: geometry line ->
    its kind; differential: the design is differential (geometry lines give z_diff).
    """
    geometry = geometry or {}
    out = []
    for p in ("bus.t_stop", "bus.dt", "edge.rise", "edge.fall"):
        if p in dims:
            out.append(Rule("positive", (p,), p, "must be positive"))
    for name, (role, keys) in parts.items():
        t = f"parts.{name}"
        for k in ("r_high", "r_low", "r_in", "ref_load.r"):
            if k in keys:
                out.append(Rule("positive", (f"{t}.{k}",), f"{t}.{k}", "must be positive"))
        for k in ("c_pin", "l_pkg", "ref_load.c"):
            if k in keys:
                out.append(Rule("nonneg", (f"{t}.{k}",), f"{t}.{k}", "cannot be negative"))
        if role != "receiver":
            out.append(Rule("less", (f"{t}.v_low", f"{t}.v_high"), f"{t}.v_high", "must be above v_low"))
        if role != "driver":
            out.append(Rule("less", (f"{t}.vil", f"{t}.vih"), f"{t}.vih", "must be above vil"))
        if "v_max" in keys and "v_min" in keys:
            out.append(Rule("less", (f"{t}.v_min", f"{t}.v_max"), f"{t}.v_max", "must be above v_min"))
    for name, key in lines.items():
        t = f"lines.{name}"
        if key == "geometry":
            from .geometry import KINDS

            for k in KINDS[geometry[name]]:
                p = f"{t}.geometry.{k}"
                if k == "er":
                    out.append(Rule("at_least_one", (p,), p, "must be at least 1 (a relative permittivity)"))
                elif k == "t":
                    out.append(Rule("nonneg", (p,), p, "cannot be negative (0: a zero-thickness strip)"))
                else:
                    out.append(Rule("positive", (p,), p, "must be positive"))
            if f"{t}.r_dc" in dims:
                out.append(Rule("nonneg", (f"{t}.r_dc",), f"{t}.r_dc", "cannot be negative"))
            continue
        out.append(Rule("positive", (f"{t}.z0",), f"{t}.z0", "must be positive"))
        if key == "delay":
            out.append(Rule("positive", (f"{t}.delay",), f"{t}.delay", "must be positive"))
        else:
            out.append(Rule("at_least_one", (f"{t}.er_eff",), f"{t}.er_eff",
                            "must be at least 1 (a line is never faster than light in vacuum)"))
        if f"{t}.r_dc" in dims:
            out.append(Rule("nonneg", (f"{t}.r_dc",), f"{t}.r_dc", "cannot be negative"))
    for i in range(len(segments)):
        p = f"segment.{i}.length"
        out.append(Rule("positive", (p,), p, "must be positive"))
    for name, _, _, stub in taps:
        if stub is not None:
            p = f"tap.{name}.stub.length"
            out.append(Rule("positive", (p,), p, "must be positive"))
    for i, (typ, _, _) in enumerate(terminations):
        for k in ("r", "r_up", "r_down", "c"):
            p = f"termination.{i}.{k}"
            if p in dims:
                out.append(Rule("positive", (p,), p, "must be positive"))
    for p in dims:
        if dims[p] == "ibis_corner":
            out.append(Rule("corner", (p,), p, "an IBIS corner is -1 (min), 0 (typ) or +1 (max)"))
    # plausibility of every value (after the sign rules, so a negative value gets the sign message)
    for p in dims:
        out.append(Rule("plausible", (p,), p))
    # a geometry the formulas can evaluate, giving a plausible impedance
    for name, kind in geometry.items():
        from .geometry import KINDS

        paths = tuple(f"lines.{name}.geometry.{k}" for k in KINDS[kind])
        out.append(Rule("geometry", paths, paths[0], kind, flag=differential))
    # a line piece no one means: far longer than the edge
    edges = ("edge.rise", "edge.fall")
    for i, (_, _, line) in enumerate(segments):
        out.append(_delay_rule(f"segment.{i}.length", line, lines[line], edges))
    for name, _, _, stub in taps:
        if stub is not None:
            out.append(_delay_rule(f"tap.{name}.stub.length", stub, lines[stub], edges))
    # thresholds the bus can never cross: DC levels of a passive linear network are weighted
    # averages of its source voltages (nodal analysis), so a level above every source is unreachable
    used = {part for _, _, part, _ in taps}
    sources_hi = [f"parts.{n}.v_high" for n in parts if n in used and parts[n][0] != "receiver"]
    sources_lo = [f"parts.{n}.v_low" for n in parts if n in used and parts[n][0] != "receiver"]
    supplies = []
    ground = any("r_in" in parts[n][1] for n in used)
    for i, (typ, _, _) in enumerate(terminations):
        if typ == "parallel":
            supplies.append(f"termination.{i}.v")
        elif typ == "thevenin":
            supplies.append(f"termination.{i}.v_up")
            ground = True
    if sources_hi:
        for n, (role, _) in parts.items():
            if n not in used or role == "driver":
                continue
            t = f"parts.{n}"
            out.append(Rule("reach_high", (f"{t}.vih", *sources_hi, *supplies), f"{t}.vih", flag=ground))
            out.append(Rule("reach_low", (f"{t}.vil", *sources_lo, *supplies), f"{t}.vil", flag=ground))
    for n, (role, _) in parts.items():
        if role == "transceiver":
            t = f"parts.{n}"
            out.append(Rule("less", (f"{t}.vih", f"{t}.v_high"), f"{t}.vih",
                            "must be below this part's own v_high (two of these parts could never pass a high)"))
            out.append(Rule("less", (f"{t}.v_low", f"{t}.vil"), f"{t}.vil",
                            "must be above this part's own v_low (two of these parts could never pass a low)"))
    return tuple(out)


def _delay_rule(length_path, line, delay_key, edges):
    # a geometry line: sqrt(er)/c bounds its delay from above (er_eff <= er), enough for this sanity rule
    key = "geometry.er" if delay_key == "geometry" else delay_key
    return Rule("delay", (length_path, f"lines.{line}.{key}", *edges), length_path,
                flag=delay_key in ("er_eff", "geometry"))


def index_rules(rules) -> dict:
    """Parameter path -> indices of the rules that read it."""
    out: dict = {}
    for i, r in enumerate(rules):
        for p in r.paths:
            out.setdefault(p, []).append(i)
    return {p: tuple(v) for p, v in out.items()}


# ---------------------------------------------------------------------------
# evaluation

class RuleFailed(Exception):
    """A rule failed: ``blame`` path and the reason (internal; turned into DesignError by the caller)."""

    def __init__(self, blame: str, reason: str):
        self.blame = blame
        self.reason = reason
        super().__init__(reason)


def _pick(v, shape, i) -> float:
    """Value ``i`` of ``v`` broadcast to ``shape`` (flattened)."""
    return float(np.broadcast_to(np.asarray(v, dtype=float), shape).ravel()[i] if shape else v)


def _bad(ok):
    """(shape, index of the first failing variant or None) of a condition over variants."""
    ok = np.asarray(ok)
    if ok.all():
        return ok.shape, None
    return ok.shape, int(np.flatnonzero(~ok.ravel())[0]) if ok.shape else 0


def _first_bad(ok, values):
    """Description of the first failing value, " (got X)" (and the variant in a batch)."""
    shape, i = _bad(ok)
    if i is None:
        return ""
    shape = np.broadcast_shapes(shape, np.shape(values))
    where = f", variant {i}" if shape else ""
    return f" (got {_pick(values, shape, i):g}{where})"


def _hint(x: float, rng: Range) -> str:
    """"; did you mean 1.8 pF?" -- the same number with another SI prefix that is plausible."""
    if x == 0 or not math.isfinite(x) or not rng.unit:
        return ""
    best = None
    for k in range(-8, 9):
        if k == 0:
            continue
        y = x * 10.0 ** (3 * k)
        if rng.lo <= y <= rng.hi:
            d = abs(math.log10(abs(y) / rng.typical))
            if best is None or d < best[0]:
                best = (d, y)
    return f"; did you mean {si(best[1], rng.unit)}?" if best else ""


def _plausible(path, x):
    rng = PLAUSIBLE[kind_of(path)]
    shape, i = _bad((np.asarray(x) >= rng.lo) & (np.asarray(x) <= rng.hi))
    if i is None:
        return
    bad = _pick(x, shape, i)
    shown = si(bad, rng.unit) if rng.unit else f"{bad:g}"
    where = f" (variant {i})" if shape else ""
    if rng.what == "delay per length" and bad < rng.lo:
        reason = (f"{shown}{where} is faster than light in vacuum (a line's delay is at least "
                  f"{si(rng.lo, rng.unit)})")
    else:
        lo = si(rng.lo, rng.unit) if rng.unit else f"{rng.lo:g}"
        hi = si(rng.hi, rng.unit) if rng.unit else f"{rng.hi:g}"
        reason = f"{shown}{where} is not a plausible {rng.what} (expected {lo} to {hi}: {rng.reason})"
    raise RuleFailed(path, reason + _hint(bad, rng))


def evaluate(rule: Rule, P) -> None:
    """Raise RuleFailed if ``rule`` fails for any variant of the values ``P`` (path -> float | array)."""
    k = rule.kind
    if k == "plausible":
        _plausible(rule.blame, P[rule.blame])
        return
    if k in ("positive", "nonneg", "at_least_one"):
        x = P[rule.paths[0]]
        ok = x > 0 if k == "positive" else (x >= 0 if k == "nonneg" else x >= 1)
        if not np.all(ok):
            raise RuleFailed(rule.blame, rule.text + _first_bad(ok, x))
        return
    if k == "corner":
        x = np.asarray(P[rule.paths[0]])
        ok = (x == -1.0) | (x == 0.0) | (x == 1.0)
        if not np.all(ok):
            raise RuleFailed(rule.blame, rule.text + _first_bad(ok, x))
        return
    if k == "less":
        a, b = (P[p] for p in rule.paths)
        ok = np.asarray(a) < np.asarray(b)
        if not np.all(ok):
            raise RuleFailed(rule.blame, rule.text + _first_bad(ok, P[rule.blame]))
        return
    if k in ("reach_high", "reach_low"):
        x = np.asarray(P[rule.paths[0]])
        src = [np.asarray(P[p]) for p in rule.paths[1:]] + ([np.asarray(0.0)] if rule.flag else [])
        high = k == "reach_high"
        level = np.maximum.reduce(np.broadcast_arrays(*src)) if high else np.minimum.reduce(np.broadcast_arrays(*src))
        ok = x < level if high else x > level
        shape, i = _bad(ok)
        if i is not None:
            xv, lv = _pick(x, shape, i), _pick(level, shape, i)
            key, word, drv = ("vih", "highest", "v_high") if high else ("vil", "lowest", "v_low")
            where = f" (variant {i})" if shape else ""
            raise RuleFailed(rule.blame, f"{key} {xv:g} V{where} is at or {'above' if high else 'below'} the "
                                         f"{word} level the bus can settle at ({lv:g} V, from the drivers' {drv} "
                                         f"and the terminations): this receiver can never see a "
                                         f"{'high' if high else 'low'}")
        return
    if k == "geometry":
        _geometry_rule(rule, P)
        return
    if k == "delay":
        length, d, rise, fall = (np.asarray(P[p]) for p in rule.paths)
        delay = np.sqrt(d) / C0 if rule.flag else d
        td = delay * length
        edge = np.minimum(rise, fall)
        ok = td <= MAX_DELAY_IN_EDGES * edge
        shape, i = _bad(ok)
        if i is not None:
            L, tdv, ev, dl = (_pick(v, shape, i) for v in (length, td, edge, delay))
            hint = ""
            best = None
            for kk in range(1, 6):
                y = L * 10.0 ** (-3 * kk)
                if y * dl <= MAX_DELAY_IN_EDGES * ev and y >= PLAUSIBLE["length"].lo:
                    dist = abs(math.log10(y / PLAUSIBLE["length"].typical))
                    if best is None or dist < best[0]:
                        best = (dist, y)
            if best:
                hint = f"; did you mean {si(best[1], 'm')}?"
            raise RuleFailed(rule.blame, f"{si(L, 'm')} of line at {si(dl, 's/m')} has a one-way delay of "
                                         f"{si(tdv, 's')}, {tdv / ev:.0f} times the {si(ev, 's')} edge (at most "
                                         f"{MAX_DELAY_IN_EDGES:.0f}): not a length this bus can mean{hint}")
        return
    raise AssertionError(f"unknown rule kind {k!r}")


def _geometry_rule(rule: Rule, P) -> None:
    """A cross-section the formulas can evaluate: its shape rules (D > d, s > d, t < b), then a finite,
    plausible impedance from budget.geometry.derive (every variant at once)."""
    from .geometry import derive

    kind = rule.text
    v = {p.rpartition(".")[2]: np.asarray(P[p], dtype=float) for p in rule.paths}
    table = rule.paths[0].rpartition(".")[0]
    for big, small, text in (("D", "d", "D (shield inside diameter) must exceed d (inner conductor diameter)"),
                             ("s", "d", "s (centre spacing) must exceed d (wire diameter)")):
        if big in v and small in v and kind in ("coax", "two_wire"):
            ok = v[big] > v[small]
            if not np.all(ok):
                raise RuleFailed(f"{table}.{big}", text + _first_bad(ok, v[big]))
    if "b" in v:
        ok = v["t"] < v["b"]
        if not np.all(ok):
            raise RuleFailed(f"{table}.t", "t (strip thickness) must be less than b (ground-to-ground spacing)"
                             + _first_bad(ok, v["t"]))
    z0, _, _, _ = derive(kind, v, differential=rule.flag)
    z = np.asarray(z0)
    rng = PLAUSIBLE["impedance"]
    finite = np.isfinite(z)
    shape, i = _bad(finite)
    if i is not None:
        raise RuleFailed(rule.blame, f"the {kind} formulas give no finite impedance for this geometry"
                         f"{' (variant %d)' % i if shape else ''}: the dimensions are far outside their range")
    shape, i = _bad((z >= rng.lo) & (z <= rng.hi))
    if i is not None:
        raise RuleFailed(rule.blame, f"this {kind} geometry gives z0 = {_pick(z, shape, i):.4g} ohm"
                         f"{' (variant %d)' % i if shape else ''}, not a plausible {rng.what} (expected "
                         f"{rng.lo:g} to {rng.hi:g} ohm: {rng.reason}); check the dimensions and their units")


def check(rules, P, only=None) -> None:
    """Evaluate ``rules`` (all, or the indices in ``only``, in order); raise RuleFailed at the first failure."""
    if only is None:
        for r in rules:
            evaluate(r, P)
    else:
        for i in sorted(only):
            evaluate(rules[i], P)


def table_label(table: str) -> str:
    """Design-file table label of the table part of a path: "segment.0" -> "segment #1"."""
    head, _, rest = table.partition(".")
    if head in ("segment", "termination") and rest.split(".")[0].isdigit():
        idx, _, tail = rest.partition(".")
        return f"{head} #{int(idx) + 1}" + (f".{tail}" if tail else "")
    return table


def file_error(source: str, exc: RuleFailed) -> DesignError:
    """The DesignError of a failed rule, naming table and key as the design file does."""
    table, _, key = exc.blame.rpartition(".")
    return DesignError(exc.reason, source=source, table=table_label(table), key=key)
