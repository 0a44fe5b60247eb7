"""Quick hand numbers to sanity-check a simulation: loaded lines, reflection coefficients, bounce tables.

Three estimates, each a closed form with its source, none of them a substitute
for the transient engine:

- :func:`loaded_line` / :func:`loaded_lines`: effective impedance and delay of a
  line loaded by evenly spaced capacitances, Z0' = Z0/sqrt(1 + Cd/C0),
  t_pd' = t_pd sqrt(1 + Cd/C0) (docs/references.md C1: TI SCBA015A; Johnson & Graham
  1993 section 4.4.3.1).  Holds while the load spacing is electrically short
  against the edge (docs/references.md C5).
- :func:`discontinuities`: the reflection and transmission coefficient a wave
  meets at every junction, line end and driver of a design (docs/references.md A1, A2,
  A8, A9), under the *resistive rule* stated there.
- :func:`bounce_table`: the lattice (bounce) diagram of a resistive source, one
  lossless line and a resistive load (docs/references.md A4-A7), optionally in exact
  rationals.

Every value is SI: [ohm], [s], [s/m], [F], [F/m], [V].  These are textbook
idealisations; confirm with the simulation, a measurement and the part makers'
data.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from fractions import Fraction
from numbers import Rational

from .errors import ArgumentError
from .limits import MAX_BOUNCES

# J&G's lumped rule (docs/references.md C5(a), from memory): a section is electrically short if its delay
# is under 1/6 of the rise time.  Used only to flag estimates that may not hold.
SHORT_SECTION_FRACTION = 1.0 / 6.0


def _finite_positive(value, name: str, *, allow_zero: bool = False) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float, Rational)):
        raise ArgumentError(f"{name} must be a number, got {type(value).__name__}")
    v = float(value)
    ok = v >= 0.0 if allow_zero else v > 0.0
    if not (math.isfinite(v) and ok):
        raise ArgumentError(f"{name} must be a {'non-negative' if allow_zero else 'positive'} finite number, "
                            f"got {value!r}")
    return v


# ---------------------------------------------------------------------------
# (a) capacitively loaded line

@dataclass(frozen=True)
class LoadedLine:
    """A line with distributed extra capacitance.

    z0 [ohm], delay [s/m]: unloaded; c0 [F/m] = delay/z0 its own capacitance;
    cd [F/m] the added load per length; factor [-] = sqrt(1 + cd/c0);
    z0_loaded [ohm] = z0/factor; delay_loaded [s/m] = delay*factor.
    """
    z0: float
    delay: float
    c0: float
    cd: float
    factor: float
    z0_loaded: float
    delay_loaded: float


def loaded_line(z0: float, delay: float, c_load: float, spacing: float) -> LoadedLine:
    """Effective impedance and delay of a line loaded every ``spacing`` by ``c_load``.

    z0 [ohm], delay [s/m] of the bare line; c_load [F] per load; spacing [m].
    Cd = c_load/spacing [F/m], C0 = delay/z0 [F/m] (docs/references.md B1), and
    Z0' = Z0/sqrt(1 + Cd/C0), t_pd' = t_pd sqrt(1 + Cd/C0) (docs/references.md C1; TI SCBA015A
    Fig. 2 and Johnson & Graham 1993 section 4.4.3.1).  The continuum limit:
    valid while the spacing's delay is short against the edge (docs/references.md C5).
    """
    z0 = _finite_positive(z0, "z0")
    delay = _finite_positive(delay, "delay")
    c_load = _finite_positive(c_load, "c_load", allow_zero=True)
    spacing = _finite_positive(spacing, "spacing")
    return _loaded(z0, delay, c_load / spacing)


def _loaded(z0: float, delay: float, cd: float) -> LoadedLine:
    c0 = delay / z0
    factor = math.sqrt(1.0 + cd / c0)
    return LoadedLine(z0=z0, delay=delay, c0=c0, cd=cd, factor=factor, z0_loaded=z0 / factor,
                      delay_loaded=delay * factor)


@dataclass(frozen=True)
class SegmentLoading:
    """The loaded-line estimate of one trunk segment (or of all segments of one line type).

    name: "segment 3" or the line type's name; line: line type; length [m];
    c_assigned [F]: the tap capacitance given to it; loaded: the :class:`LoadedLine`;
    flight [s] = length * delay_loaded; section_fraction [-] = flight / rise time
    of the design's edge (> 1/6: the continuum estimate is doubtful, docs/references.md C5(a)).
    """
    name: str
    line: str
    length: float
    c_assigned: float
    loaded: LoadedLine
    flight: float
    section_fraction: float

    @property
    def short_enough(self) -> bool:
        return self.section_fraction <= SHORT_SECTION_FRACTION

    def to_json(self) -> dict:
        ll = self.loaded
        return {"name": self.name, "line": self.line, "length": self.length, "c_assigned": self.c_assigned,
                "z0": ll.z0, "delay": ll.delay, "c0": ll.c0, "cd": ll.cd, "factor": ll.factor,
                "z0_loaded": ll.z0_loaded, "delay_loaded": ll.delay_loaded, "flight": self.flight,
                "section_fraction": self.section_fraction, "short_enough": self.short_enough}


@dataclass(frozen=True)
class LoadedLinesReport:
    """:func:`loaded_lines` result: per segment and per line type, plus the rules used."""
    segments: tuple[SegmentLoading, ...]
    lines: tuple[SegmentLoading, ...]
    tap_capacitance: dict
    rule: str

    def to_json(self) -> dict:
        return {"rule": self.rule, "tap_capacitance": dict(self.tap_capacitance),
                "lines": [x.to_json() for x in self.lines], "segments": [x.to_json() for x in self.segments]}


def tap_capacitance(design) -> dict[str, float]:
    """Capacitance [F] each tap hangs on its bus node: part c_pin plus its stub's own capacitance.

    The stub counts as its total line capacitance length*delay/z0 [F] (docs/references.md B1;
    TI SCEA019 Q8 adds stub trace capacitance the same way); package inductance
    and series resistors are ignored.  Lumping a stub this way holds only while
    the stub is short against the edge (docs/references.md C5); a longer stub rings, and
    only the simulation shows that.
    """
    out = {}
    for tap in design.taps:
        c = float(design.parts[tap.part].c_pin)
        if tap.stub is not None:
            lt = design.lines[tap.stub.line]
            c += float(tap.stub.length) * float(lt.delay) / float(lt.z0)
        out[tap.name] = c
    return out


def _require_scalar(design) -> None:
    if design.batch_size is not None:
        raise ArgumentError("estimates take a design with scalar values (no batch of variants)")


LOADING_RULE = ("each tap's capacitance (c_pin + its stub's line capacitance) is split half to each trunk "
                "segment end at its node, so Cd = (C_a/2 + C_b/2)/length; a uniform bus gives the textbook "
                "Cd = C_tap/pitch; a node with three or more segments is over-counted")


def loaded_lines(design) -> LoadedLinesReport:
    """The loaded-line estimate of every trunk segment and of every trunk line type of a design.

    Each segment gets half of the tap capacitance at each of its two nodes
    (:data:`LOADING_RULE`); per line type, the capacitance and length of its
    segments are summed.  Terminations (resistive; an RC termination's C is
    not a distributed load) are left out.  flight = length * delay_loaded [s].
    """
    _require_scalar(design)
    ctap = tap_capacitance(design)
    node_c: dict[str, float] = {}
    for tap in design.taps:
        node_c[tap.node] = node_c.get(tap.node, 0.0) + ctap[tap.name]
    rise = float(design.edge.rise)
    segs = []
    per_line: dict[str, list[float]] = {}
    for seg in design.segments:
        lt = design.lines[seg.line]
        length = float(seg.length)
        c = 0.5 * node_c.get(seg.a, 0.0) + 0.5 * node_c.get(seg.b, 0.0)
        ll = _loaded(float(lt.z0), float(lt.delay), c / length)
        flight = length * ll.delay_loaded
        segs.append(SegmentLoading(name=f"segment {seg.index} ({seg.a}-{seg.b})", line=seg.line, length=length,
                                   c_assigned=c, loaded=ll, flight=flight, section_fraction=flight / rise))
        acc = per_line.setdefault(seg.line, [0.0, 0.0, 0.0])
        acc[0] += length
        acc[1] += c
        acc[2] = max(acc[2], flight / rise)
    lines = []
    for name, (length, c, worst_fraction) in per_line.items():
        lt = design.lines[name]
        ll = _loaded(float(lt.z0), float(lt.delay), c / length)
        lines.append(SegmentLoading(name=name, line=name, length=length, c_assigned=c, loaded=ll,
                                    flight=length * ll.delay_loaded, section_fraction=worst_fraction))
    return LoadedLinesReport(segments=tuple(segs), lines=tuple(lines), tap_capacitance=ctap, rule=LOADING_RULE)


# ---------------------------------------------------------------------------
# (b) reflection and transmission coefficients at every discontinuity

RESISTIVE_RULE = (
    "resistive rule: a wave sees only resistances and other lines; pin capacitances are open (their "
    "short dip is given separately as tau = R * C, R being every line and resistor there in "
    "parallel: Z0/2 on a through line) and package inductances "
    "short; an RC termination's capacitor is a short (it is sized so that R*C is long against the edge), "
    "so the wave sees its R; a parallel termination's rail and a Thevenin pair's rails are AC ground; "
    "a device pin is its r_in (none = open) behind any series termination; a driver is its output "
    "resistance in the stated state behind any series termination")


@dataclass(frozen=True)
class Discontinuity:
    """One place where a travelling wave meets a change of impedance.

    where: "node s3", "device end of stub SLOT1", "driver SLOT1 (high)";
    kind: "junction", "device", "driver"; arriving_on: the segment or stub the
    wave travels on; z_line [ohm]: that line's Z0; z_load [ohm]: what it sees
    (math.inf = open); gamma [-] = (z_load - z_line)/(z_load + z_line) (1 for open);
    transmission [-] = 1 + gamma (the voltage passed on to every branch, docs/references.md A2, A8);
    tau [s]: time constant of the capacitance at that point with the resistance it sees (0 if none).
    """
    where: str
    kind: str
    arriving_on: str
    z_line: float
    z_load: float
    gamma: float
    transmission: float
    tau: float = 0.0

    def to_json(self) -> dict:
        return {"where": self.where, "kind": self.kind, "arriving_on": self.arriving_on, "z_line": self.z_line,
                "z_load": None if math.isinf(self.z_load) else self.z_load, "gamma": self.gamma,
                "transmission": self.transmission, "tau": self.tau}


def reflection(z_line: float, z_load: float) -> float:
    """Voltage reflection coefficient [-] = (ZL - Z0)/(ZL + Z0) (docs/references.md A1); z_load = inf -> +1."""
    if math.isinf(z_load):
        return 1.0
    return (z_load - z_line) / (z_load + z_line)


def _parallel(values) -> float:
    g = sum(0.0 if math.isinf(v) else 1.0 / v for v in values)
    return math.inf if g == 0.0 else 1.0 / g


def _record(where, kind, on, z_line, others, c=0.0) -> Discontinuity:
    z_load = _parallel(others)
    gamma = reflection(z_line, z_load)
    r_seen = _parallel([*others, z_line])  # the capacitance sees the arriving line in parallel too
    tau = 0.0 if c == 0.0 or math.isinf(r_seen) else r_seen * c
    return Discontinuity(where=where, kind=kind, arriving_on=on, z_line=z_line, z_load=z_load, gamma=gamma,
                         transmission=1.0 + gamma, tau=tau)


def _termination_r(term) -> float:
    if term.type in ("parallel", "rc"):
        return float(term.r)
    if term.type == "thevenin":
        return _parallel([float(term.r_up), float(term.r_down)])
    raise AssertionError(term.type)  # series terminations sit on taps, handled there


def discontinuities(design) -> tuple[Discontinuity, ...]:
    """Reflection and transmission coefficients at every junction, device and driver of a design.

    At each bus node, for every line attached to it (trunk segments and tap
    stubs), the wave arriving on that line sees all the *other* attached lines
    in parallel with the node's terminations and the resistive load of any tap
    sitting directly on the node (docs/references.md A8, A9).  At the device end of
    each stub, the wave sees the device; each tap that can drive gives a record
    per output state (the wave coming back to the driver).  All under
    :data:`RESISTIVE_RULE`.  Records come in node order, then taps in file order.
    """
    _require_scalar(design)
    series_r: dict[str, float] = {}
    node_terms: dict[str, list[float]] = {}
    for term in design.terminations:
        if term.type == "series":
            series_r[term.tap] = series_r.get(term.tap, 0.0) + float(term.r)
        else:
            node_terms.setdefault(term.node, []).append(_termination_r(term))

    def device_r(tap) -> float:
        r_in = float(design.parts[tap.part].r_in)
        return r_in + series_r.get(tap.name, 0.0)

    attached: dict[str, list[tuple[str, float]]] = {}  # node -> [(label, z0)]
    node_c: dict[str, float] = {}
    node_devices: dict[str, list[float]] = {}
    for seg in design.segments:
        z = float(design.lines[seg.line].z0)
        label = f"segment {seg.index} ({seg.a}-{seg.b}, {seg.line})"
        attached.setdefault(seg.a, []).append((label, z))
        attached.setdefault(seg.b, []).append((label, z))
    for tap in design.taps:
        if tap.stub is not None:
            attached.setdefault(tap.node, []).append((f"stub {tap.name} ({tap.stub.line})",
                                                      float(design.lines[tap.stub.line].z0)))
        else:
            node_devices.setdefault(tap.node, []).append(device_r(tap))
            node_c[tap.node] = node_c.get(tap.node, 0.0) + float(design.parts[tap.part].c_pin)
    out = []
    for node in design.nodes:
        lines = attached.get(node, [])
        fixed = node_terms.get(node, []) + node_devices.get(node, [])
        for i, (label, z) in enumerate(lines):
            others = [zz for j, (_, zz) in enumerate(lines) if j != i] + fixed
            out.append(_record(f"node {node}", "junction", label, z, others, node_c.get(node, 0.0)))
    for tap in design.taps:
        part = design.parts[tap.part]
        if tap.stub is not None:
            z = float(design.lines[tap.stub.line].z0)
            on = f"stub {tap.name} ({tap.stub.line})"
            out.append(_record(f"device end of stub {tap.name}", "device", on, z, [device_r(tap)],
                               float(part.c_pin)))
            if part.can_drive:
                for state, r in (("high", part.r_high), ("low", part.r_low)):
                    r_drv = float(r) + series_r.get(tap.name, 0.0)
                    out.append(_record(f"driver {tap.name} ({state})", "driver", on, z, [r_drv]))
        elif part.can_drive:
            # the driver sits on the node: a wave coming back on one line sees the other lines, the
            # node's terminations, the other devices there and the driver's output resistance
            lines = attached.get(tap.node, [])
            others_dev = list(node_devices.get(tap.node, []))
            others_dev.remove(device_r(tap))
            for state, r in (("high", part.r_high), ("low", part.r_low)):
                r_drv = float(r) + series_r.get(tap.name, 0.0)
                for i, (label, z) in enumerate(lines):
                    others = ([zz for j, (_, zz) in enumerate(lines) if j != i] + node_terms.get(tap.node, [])
                              + others_dev + [r_drv])
                    out.append(_record(f"driver {tap.name} ({state}) at node {tap.node}", "driver", label, z,
                                       others, node_c.get(tap.node, 0.0)))
    return tuple(out)


# ---------------------------------------------------------------------------
# (c) bounce (lattice) table

@dataclass(frozen=True)
class Bounce:
    """One arrival in a lattice diagram.

    t [TD] time in one-way delays; end: "source" or "load"; incident, reflected
    [V]: the wave arriving and the wave sent back; voltage [V]: that end's
    voltage from this arrival until the next one.
    """
    t: int
    end: str
    incident: object
    reflected: object
    voltage: object


@dataclass(frozen=True)
class BounceTable:
    """:func:`bounce_table` result: gamma_source, gamma_load [-], v_launch, v_final [V] and the arrivals."""
    gamma_source: object
    gamma_load: object
    v_launch: object
    v_final: object
    rows: tuple[Bounce, ...]

    def at(self, end: str) -> list:
        """Voltages [V] at ``end`` ("source" or "load") after each arrival, in time order."""
        if end not in ("source", "load"):
            raise ArgumentError(f"end must be 'source' or 'load', got {end!r}")
        return [r.voltage for r in self.rows if r.end == end]

    def text(self) -> str:
        """The table for people: one row per arrival, exact fractions shown as such."""
        def fmt(x):
            return str(x) if isinstance(x, Fraction) and x.denominator != 1 and x.denominator < 10 ** 6 \
                else f"{float(x):+.6g}"
        lines = [f"gamma_source = {fmt(self.gamma_source)}, gamma_load = {fmt(self.gamma_load)}, "
                 f"launched wave = {fmt(self.v_launch)} V, final = "
                 f"{'never settles' if self.v_final is None else fmt(self.v_final) + ' V'}",
                 f"{'t [TD]':>6}  {'end':<6}  {'incident [V]':>14}  {'reflected [V]':>14}  {'voltage [V]':>14}"]
        for r in self.rows:
            lines.append(f"{r.t:>6}  {r.end:<6}  {fmt(r.incident):>14}  {fmt(r.reflected):>14}  {fmt(r.voltage):>14}")
        return "\n".join(lines) + "\n"


def _gamma(z_end, z0):
    if z_end is None or (isinstance(z_end, float) and math.isinf(z_end)):
        return 1
    return (z_end - z0) / (z_end + z0)


def bounce_table(rs, z0, rl, v_step=1, n: int = 6, *, exact: bool = False, v_initial=0, launch=None) -> BounceTable:
    """Lattice diagram of a step from a source (EMF v_step behind rs) into one lossless line ending in rl.

    rs [ohm] source resistance (0 allowed; math.inf or None = open, e.g. a driver
    that cuts off), z0 [ohm] line impedance, rl [ohm] load (math.inf or None =
    open, 0 = short), v_step [V] the EMF step, n the number of arrivals at the
    load (the table has 2n + 1 rows: the launch at t = 0, then load and source in
    turn).  v_initial [V]: the line's DC level before the step (the same at both
    ends); launch [V]: the first wave, when not v_step z0/(z0 + rs) (docs/references.md
    A3) -- e.g. -Idc z0 for a driver that cuts off (docs/references.md A7).
    exact=True computes in fractions.Fraction (inputs must then be int,
    Fraction or None/inf for open).  Source: the lattice method (Blood 1988
    ch. 7; docs/references.md A4-A7).
    """
    if not isinstance(n, int) or isinstance(n, bool) or n < 1:
        raise ArgumentError(f"bounce_table: n must be a whole number >= 1, got {n!r}")
    if n > MAX_BOUNCES:
        raise ArgumentError(f"bounce_table: n = {n:,} arrivals is above the limit of {MAX_BOUNCES:,} "
                            "(budget.limits.MAX_BOUNCES)")

    def check(value, name, *, open_ok, zero_ok):
        if value is None or (isinstance(value, float) and math.isinf(value) and value > 0):
            if not open_ok:
                raise ArgumentError(f"bounce_table: {name} cannot be open")
            return None
        if isinstance(value, bool) or not isinstance(value, (int, float, Rational)):
            raise ArgumentError(f"bounce_table: {name} must be a number, got {type(value).__name__}")
        if not math.isfinite(float(value)) or float(value) < 0 or (float(value) == 0 and not zero_ok):
            raise ArgumentError(f"bounce_table: {name} must be a {'non-negative' if zero_ok else 'positive'} "
                                f"finite resistance [ohm]{' or open (math.inf)' if open_ok else ''}, got {value!r}")
        if exact:
            if isinstance(value, float):
                raise ArgumentError(f"bounce_table: exact=True needs int or Fraction inputs; {name} = {value!r}")
            return Fraction(value)
        return float(value)

    rs_, rl_ = check(rs, "rs", open_ok=True, zero_ok=True), check(rl, "rl", open_ok=True, zero_ok=True)
    z0_ = check(z0, "z0", open_ok=False, zero_ok=False)
    conv = Fraction if exact else float
    for name, value in (("v_step", v_step), ("v_initial", v_initial), ("launch", launch)):
        if value is None:
            continue
        if isinstance(value, bool) or not isinstance(value, (int, float, Rational)) or not math.isfinite(float(value)):
            raise ArgumentError(f"bounce_table: {name} must be a finite number [V], got {value!r}")
        if exact and isinstance(value, float):
            raise ArgumentError(f"bounce_table: exact=True needs int or Fraction inputs; {name} = {value!r}")
    gs, gl = conv(_gamma(rs_, z0_)), conv(_gamma(rl_, z0_))
    if launch is None:
        if rs_ is None:
            raise ArgumentError("bounce_table: an open source (rs = inf) launches nothing; give launch=")
        v1 = conv(v_step) * z0_ / (z0_ + rs_)
    else:
        v1 = conv(launch)
    v0 = conv(v_initial)
    # steady state: the resistive divider (docs/references.md A4), or v_initial + the geometric sum of the waves
    if launch is None and rs_ is not None and not (rs_ == 0 and rl_ == 0):
        v_final = conv(v_step) + v0 if rl_ is None else conv(v_step) * rl_ / (rs_ + rl_) + v0
    elif rs_ == 0 and rl_ == 0:
        v_final = None  # a short across an ideal source: not a physical steady state
    elif gs * gl != 1:
        v_final = v0 + v1 * (1 + gl) / (1 - gs * gl)
    else:
        v_final = None  # lossless open-open: it never settles
    rows = [Bounce(t=0, end="source", incident=conv(0), reflected=v1, voltage=v0 + v1)]
    v_src, v_load, wave = v0 + v1, v0, v1
    for k in range(n):
        refl = gl * wave
        v_load = v_load + wave + refl
        rows.append(Bounce(t=2 * k + 1, end="load", incident=wave, reflected=refl, voltage=v_load))
        wave = refl
        refl = gs * wave
        v_src = v_src + wave + refl
        rows.append(Bounce(t=2 * k + 2, end="source", incident=wave, reflected=refl, voltage=v_src))
        wave = refl
    return BounceTable(gamma_source=gs, gamma_load=gl, v_launch=v1, v_final=v_final, rows=tuple(rows))


__all__ = ["LoadedLine", "loaded_line", "SegmentLoading", "LoadedLinesReport", "loaded_lines", "tap_capacitance",
           "LOADING_RULE", "Discontinuity", "RESISTIVE_RULE", "reflection", "discontinuities", "Bounce",
           "BounceTable", "bounce_table"]
