"""Hypothesis strategies for bus designs: variants of a design, and random physical buses.

This is the only module of the package that imports hypothesis (install the
``ci`` extra: ``pip install busbudget[ci]``).  Style follows hypothesis' own
strategies: keyword-only bounds, arguments say what is valid (not how values
are distributed), and invalid arguments fail when the strategy is first drawn
from (or ``.validate()`` is called) with :class:`InvalidStrategyArgument`,
which is both a :class:`budget.errors.ArgumentError` and hypothesis'
``InvalidArgument``.

variants(design, *, within=None)
    Designs inside the design's tolerance box, or inside ``within`` =
    {path: (lo, hi)} (units allowed: ``("5 mm", "25 mm")``).  Each value is
    drawn as the point of its interval nearest the nominal value plus an
    offset towards one end; offsets shrink to zero, so a failing example
    shrinks towards the nominal design; both ends (the corners) are drawn
    often.  Draws are :class:`budget.testing.Variant` objects: ordinary
    designs that remember their nominal, print as one line, and are what
    :func:`budget.testing.assert_margin` explains.  A list of them
    (``st.lists(variants(d), max_size=16)``) goes to ``assert_margin`` as one
    batched sweep.
buses(*, min_taps=2, max_taps=16, signaling=None)
    Random but physical bus designs written as design-file text and loaded
    with :func:`budget.loads`: daisy chains, trees and rings of segments,
    several taps on a node, taps with or without stubs, drivers, receivers
    and transceivers, parallel / Thevenin / RC / series terminations,
    single-ended and differential, lossless and lossy lines, optional
    tolerances, budget allocations and timing reference loads.  Shrinks
    towards a short daisy chain of identical transceivers without stubs or
    terminations.  Each draw is a :class:`GeneratedBus` whose ``text`` is
    the design file; it prints as ``budget.loads(...)`` of that text.
mirrored_buses(*, min_taps=2, max_taps=16, signaling=None)
    Mirror-symmetric buses: a random half-bus and its mirror image, joined at
    a shared centre node or by a centre segment; ``mirror`` maps each tap to
    its image.

The physical ranges (edge 0.2-3 ns single-ended, 2-20 ns differential; line
impedance 30-130 ohm single-ended, 80-150 ohm differential; segment
electrical lengths up to about two rise times) keep every draw cheap to
simulate on a plain 2-core machine while still ringing.

JIT-compiled code and hypothesis
--------------------------------
The first example of a test pays numba's compile (or cache load) time, which
hypothesis would report as a flaky deadline.  :data:`JIT_PROFILE` names a
settings profile registered here (no deadline, no ``too_slow`` health check);
load it with ``settings.load_profile(budget.strategies.JIT_PROFILE)`` (e.g. in
a ``conftest.py``), or decorate a test with :func:`jit_settings`.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Mapping

from hypothesis import HealthCheck, settings
from hypothesis import strategies as st
from hypothesis.errors import InvalidArgument

from .errors import ArgumentError, DesignError
from .model import SIGNALING, Design
from .testing import variant

JIT_PROFILE = "busbudget-jit"
_JIT = {"deadline": None, "suppress_health_check": [HealthCheck.too_slow, HealthCheck.data_too_large]}
settings.register_profile(JIT_PROFILE, **_JIT)


def jit_settings(**overrides) -> settings:
    """Hypothesis settings for tests of JIT-compiled code: no deadline, no ``too_slow`` health check.

    Use as a decorator, ``@jit_settings(max_examples=30)``; every setting not
    given here comes from the profile active when the test module is imported
    (so a CI profile with its own ``max_examples`` or seed still applies).
    """
    return settings(**{**_JIT, **overrides})


class InvalidStrategyArgument(ArgumentError, InvalidArgument):
    """An invalid argument to a strategy of this module (raised when the strategy is first drawn from)."""


def _fail(msg: str):
    raise InvalidStrategyArgument(msg)


# ---------------------------------------------------------------------------
# variants of a design

def _interval(design: Design, path, spec) -> tuple[float, float]:
    from .units import parse_quantity

    dims = design.structure.dimensions
    if not isinstance(path, str) or path not in dims:
        near = ", ".join(list(dims)[:12])
        _fail(f"variants(within=...): {path!r} is not a numeric value of {design.source}; paths: {near} ...")
    if isinstance(spec, (str, bytes)) or not hasattr(spec, "__len__") or len(spec) != 2:
        _fail(f"variants(within=...)[{path!r}] must be a pair (lo, hi), got {spec!r}")
    out = []
    for end, x in zip(("lo", "hi"), spec):
        if isinstance(x, bool) or not isinstance(x, (int, float, str)):
            _fail(f"variants(within=...)[{path!r}] {end} must be a number [SI] or a string with units, got {x!r}")
        try:
            out.append(parse_quantity(x, dims[path], source="variants(within=...)", key=path))
        except DesignError as exc:
            _fail(f"variants(within=...)[{path!r}] {end}: {exc.reason}")
    lo, hi = out
    if lo > hi:
        _fail(f"variants(within=...)[{path!r}]: lo {spec[0]!r} is above hi {spec[1]!r}")
    return lo, hi


def _box(design: Design, within) -> dict:
    if not isinstance(design, Design):
        _fail(f"variants() takes a Design (from budget.load), got {type(design).__name__}")
    if design.batch_size is not None:
        _fail("variants() takes a design with scalar values, not arrays")
    base = design
    if within is None:
        box = {p: (lo, hi) for p, (lo, hi) in base.tolerances.items() if hi > lo}
    else:
        if not isinstance(within, Mapping):
            _fail(f"variants(within=...) must be a mapping {{path: (lo, hi)}}, got {type(within).__name__}")
        box = {p: _interval(base, p, spec) for p, spec in within.items()}
    # both ends of every interval, and all lows / all highs together, must be physical
    import numpy as np
    for p, (lo, hi) in box.items():
        try:
            base.with_values({p: np.array([lo, hi])})
        except DesignError as exc:
            _fail(f"variants(): the interval of {p} reaches a non-physical design: {exc}")
    if box:
        try:
            base.with_values({p: np.array(b) for p, b in box.items()})
        except DesignError as exc:
            _fail(f"variants(): with every value at its low or high end the design is non-physical: {exc}")
    return box


def _value(lo: float, hi: float, x0: float):
    """Strategy for one value in [lo, hi]; shrinks to the point nearest x0; both ends are frequent."""
    a = min(max(x0, lo), hi)
    sides = [s for s, room in ((1.0, hi - a), (-1.0, a - lo)) if room > 0]
    if not sides:
        return st.just(a)
    # (side, at the end?, fraction of the way to the end): a fixed shape of choices, so the
    # shrinker can turn "at the end" off and then walk the fraction down to 0 (the nominal)

    def at(choice):
        side, to_end, f = choice
        end = hi if side > 0 else lo
        return end if to_end or f == 1.0 else min(max(a + f * (end - a), lo), hi)

    return st.tuples(st.sampled_from(sides), st.booleans(), st.floats(0.0, 1.0)).map(at)


def variants(design: Design, *, within: Mapping[str, tuple] | None = None) -> st.SearchStrategy:
    """Variants of ``design`` inside its tolerance box, or inside ``within``.

    Parameters
    ----------
    design : Design
        The nominal design (from :func:`budget.load`).
    within : {dotted path: (lo, hi)}, optional
        Intervals to draw from instead of the ``[tolerances]`` box; ends are
        numbers in SI units or strings with units ("5 mm", "25 mm"); the path
        must be a numeric value of the design (``design.params``) and lo <= hi.
        The nominal value need not lie inside: the draw then shrinks to the
        end nearest to it.

    Returns a strategy of :class:`budget.testing.Variant`.  With no tolerances
    and no ``within`` it draws the nominal design only.
    """
    def build():
        box = _box(design, within)
        # values shrink towards the design's own (for a Variant: its values, and the result
        # keeps its changes and its nominal)
        parts = {p: _value(lo, hi, float(design.params[p])) for p, (lo, hi) in box.items()}
        for p, (lo, hi) in box.items():
            if design.structure.dimensions.get(p) == "ibis_corner":
                # an IBIS corner is discrete: min / typ / max inside the interval, shrinking to the nominal
                x0 = float(design.params[p])
                picks = sorted((c for c in (-1.0, 0.0, 1.0) if lo <= c <= hi), key=lambda c: (abs(c - x0), c))
                parts[p] = st.sampled_from(picks or [x0])

        def make(vals):
            try:
                return variant(design, vals)
            except DesignError as exc:
                _fail(f"variants(): a drawn variant is non-physical ({exc}); narrow the intervals")

        return st.fixed_dictionaries(parts).map(make)

    return st.deferred(build)


# ---------------------------------------------------------------------------
# random buses

@dataclass
class _Plan:
    """A bus being drawn, before it is written as design-file text."""
    signaling: str
    rise: float
    fall: float
    v_lo: float
    v_hi: float
    lines: dict = field(default_factory=dict)     # name -> {key: text}
    parts: dict = field(default_factory=dict)     # name -> {key: text}
    segments: list = field(default_factory=list)  # (a, b, line, length text)
    taps: list = field(default_factory=list)      # (name, node, part, (line, length text) | None)
    terms: list = field(default_factory=list)     # {key: text}
    tolerances: dict = field(default_factory=dict)
    budget: dict = field(default_factory=dict)


def _q(x: float, unit: str) -> str:
    return f'"{x:.6g} {unit}"'


def _text(plan: _Plan, name: str) -> str:
    out = [f'[bus]\nname = "{name}"\nsignaling = "{plan.signaling}"\n',
           f"[edge]\nrise = {_q(plan.rise * 1e9, 'ns')}\nfall = {_q(plan.fall * 1e9, 'ns')}\n"]
    for pname, keys in plan.parts.items():
        out.append(f"[parts.{pname}]\n" + "".join(f"{k} = {v}\n" for k, v in keys.items()))
    for lname, keys in plan.lines.items():
        out.append(f"[lines.{lname}]\n" + "".join(f"{k} = {v}\n" for k, v in keys.items()))
    for a, b, line, length in plan.segments:
        out.append(f'[[segment]]\nfrom = "{a}"\nto = "{b}"\nline = "{line}"\nlength = {length}\n')
    for tname, node, part, stub in plan.taps:
        s = f'stub = {{ line = "{stub[0]}", length = {stub[1]} }}\n' if stub else ""
        out.append(f'[[tap]]\nname = "{tname}"\nnode = "{node}"\npart = "{part}"\n{s}')
    for tm in plan.terms:
        out.append("[[termination]]\n" + "".join(f"{k} = {v}\n" for k, v in tm.items()))
    if plan.tolerances:
        out.append("[tolerances]\n" + "".join(f'"{p}" = {v}\n' for p, v in plan.tolerances.items()))
    if plan.budget:
        out.append("[budget]\n" + "".join(f"{k} = {v}\n" for k, v in plan.budget.items()))
    return "\n".join(out)


def _ints(draw, lo, hi):
    return draw(st.integers(lo, hi))


def _draw_edge_and_levels(draw, signaling):
    diff = signaling == "differential"
    rise = _ints(draw, 20, 200) * 1e-10 if diff else _ints(draw, 2, 30) * 1e-10
    fall = rise if not draw(st.booleans()) else (_ints(draw, 20, 200) if diff else _ints(draw, 2, 30)) * 1e-10
    if diff:
        v = _ints(draw, 5, 30) / 10            # differential output level +-v [V], above every vih
        return rise, fall, -v, v
    v_lo = _ints(draw, 0, 4) / 10
    return rise, fall, v_lo, v_lo + _ints(draw, 8, 50) / 10


def _draw_lines(draw, plan: _Plan):
    diff = plan.signaling == "differential"
    for i in range(_ints(draw, 1, 3)):
        keys = {"z0": _q(_ints(draw, 80, 150) if diff else _ints(draw, 30, 130), "ohm")}
        if draw(st.booleans()):
            keys["er_eff"] = f"{_ints(draw, 20, 120) / 10:g}"
        else:
            keys["delay"] = _q(_ints(draw, 45, 90) / 10, "ns/m")
        if draw(st.booleans()):
            keys["r_dc"] = _q(_ints(draw, 1, 500) / 10, "ohm/m")
        plan.lines[f"l{i}"] = keys


def _draw_part(draw, plan: _Plan, role: str) -> dict:
    diff = plan.signaling == "differential"
    swing = plan.v_hi - plan.v_lo
    keys = {"role": f'"{role}"'}
    if role != "receiver":
        keys["v_high"] = _q(plan.v_hi, "V")
        keys["v_low"] = _q(plan.v_lo, "V")
        keys["r_high"] = _q(_ints(draw, 5, 80), "ohm")
        keys["r_low"] = _q(_ints(draw, 5, 80), "ohm")
    # c_pin 0 (an ideal probe) or at least 0.5 pF: a tinier c_pin behind l_pkg would force a tiny step
    keys["c_pin"] = _q(draw(st.just(0) | st.integers(5, 80)) / 10 * (5 if diff else 1), "pF")
    if role != "driver":
        if diff:
            t = _ints(draw, 5, 30) / 100
            keys["vih"], keys["vil"] = _q(t, "V"), _q(-t, "V")
        else:
            keys["vih"] = _q(round(plan.v_lo + _ints(draw, 55, 80) / 100 * swing, 3), "V")
            keys["vil"] = _q(round(plan.v_lo + _ints(draw, 20, 45) / 100 * swing, 3), "V")
    if draw(st.booleans()):
        keys["l_pkg"] = _q(_ints(draw, 3, 50) / 10, "nH")
    if draw(st.booleans()):
        keys["r_in"] = _q(_ints(draw, 10, 100) if diff else _ints(draw, 1, 100), "kohm")
    if draw(st.booleans()):
        keys["v_max"] = _q(round(plan.v_hi + _ints(draw, 2, 15) / 10, 3), "V")
        keys["v_min"] = _q(round(plan.v_lo - _ints(draw, 2, 15) / 10, 3), "V")
    if role != "receiver" and draw(st.booleans()):
        keys["ref_load"] = f'{{ r = {_q(_ints(draw, 25, 100), "ohm")}, v = {_q(0.5 * (plan.v_lo + plan.v_hi), "V")} }}'
        if draw(st.booleans()):
            keys["v_meas"] = _q(0.5 * (plan.v_lo + plan.v_hi), "V")
    return keys


def _half_bus(draw, plan: _Plan, n_taps: int, prefix: str, rings: bool):
    """Nodes, segments and taps of a bus (or half-bus) with ``n_taps`` taps; names start with ``prefix``."""
    lines = list(plan.lines)
    # segment electrical length up to about two rise times (at 6 ns/m), stubs up to half a rise time
    seg_max = max(5, int(2 * plan.rise / 6e-9 * 1e3))
    stub_max = max(2, int(0.5 * plan.rise / 6e-9 * 1e3))
    n_nodes = n_taps - _ints(draw, 0, n_taps - 1) + _ints(draw, 0, 2)   # shrinks to one node per tap
    nodes = [f"{prefix}n{i}" for i in range(n_nodes)]
    segments = []
    for i in range(1, n_nodes):
        parent = i - 1 - _ints(draw, 0, i - 1)                           # shrinks to a daisy chain
        segments.append((nodes[parent], nodes[i], draw(st.sampled_from(lines)),
                         _q(_ints(draw, 1, seg_max), "mm")))
    if rings and n_nodes > 2:
        for _ in range(_ints(draw, 0, 1)):                                # a ring: close a loop
            a, b = draw(st.sampled_from([(nodes[0], nodes[-1]), (nodes[-1], nodes[0])]))
            segments.append((a, b, draw(st.sampled_from(lines)), _q(_ints(draw, 1, seg_max), "mm")))
    taps = []
    for i in range(n_taps):
        node = nodes[i] if i < min(n_nodes, n_taps) else nodes[_ints(draw, 0, n_nodes - 1)]
        stub = None
        if draw(st.booleans()):
            stub = (draw(st.sampled_from(lines)), _q(_ints(draw, 1, stub_max), "mm"))
        taps.append([f"{prefix}{i + 1}", node, None, stub])
    return nodes, segments, taps


def _draw_parts(draw, plan: _Plan, taps):
    roles = ["transceiver"] + [draw(st.sampled_from(["transceiver", "receiver", "driver"]))
                               for _ in range(_ints(draw, 0, min(3, len(taps) - 1)))]
    for i, role in enumerate(roles):
        plan.parts[f"p{i}"] = _draw_part(draw, plan, role)
    receiving = [i for i, r in enumerate(roles) if r != "driver"]
    for k, tap in enumerate(taps):
        if k == 0:
            tap[2] = "p0"                                   # a transceiver: someone can drive
        elif k == 1:
            tap[2] = f"p{draw(st.sampled_from(receiving))}"  # ... and someone else can receive
        else:
            tap[2] = f"p{_ints(draw, 0, len(roles) - 1)}"


def _draw_terminations(draw, plan: _Plan, nodes, taps):
    diff = plan.signaling == "differential"
    swing = plan.v_hi - plan.v_lo
    terms = []
    for _ in range(_ints(draw, 0, 2)):
        node = draw(st.sampled_from(nodes))
        kind = draw(st.sampled_from(["parallel", "rc", "thevenin"]))
        if kind == "parallel":
            v = 0.0 if diff else round(plan.v_lo + _ints(draw, 0, 10) / 10 * swing, 3)
            terms.append({"type": '"parallel"', "node": f'"{node}"',
                          "r": _q(_ints(draw, 80, 150) if diff else _ints(draw, 20, 200), "ohm"), "v": _q(v, "V")})
        elif kind == "rc":
            r = _ints(draw, 20, 200)
            c_max = max(1, int(20 * plan.rise / r * 1e12))            # time constant up to 20 rise times
            terms.append({"type": '"rc"', "node": f'"{node}"', "r": _q(r, "ohm"),
                          "c": _q(_ints(draw, 1, c_max), "pF")})
        else:
            terms.append({"type": '"thevenin"', "node": f'"{node}"', "r_up": _q(_ints(draw, 50, 500), "ohm"),
                          "r_down": _q(_ints(draw, 50, 500), "ohm"), "v_up": _q(plan.v_hi, "V")})
    for tap in taps:
        if draw(st.booleans()):
            terms.append({"type": '"series"', "tap": f'"{tap[0]}"', "r": _q(_ints(draw, 5, 50), "ohm")})
    return terms


def _draw_extras(draw, plan: _Plan):
    """Optional tolerances (on always-positive values) and budget allocations."""
    candidates = [f"lines.{n}.z0" for n in plan.lines] + [f"parts.{n}.c_pin" for n in plan.parts]
    candidates += [f"segment.{i}.length" for i in range(len(plan.segments))]
    candidates += [f"termination.{i}.r" for i, t in enumerate(plan.terms) if "r" in t]
    for p in draw(st.lists(st.sampled_from(candidates), max_size=3, unique=True)):
        plan.tolerances[p] = f'"{_ints(draw, 1, 20)}%"'
    if draw(st.booleans()):
        plan.budget["crosstalk"] = _q(_ints(draw, 0, 5) / 100 * (plan.v_hi - plan.v_lo), "V")
    if draw(st.booleans()):
        plan.budget["supply_noise"] = f'"{_ints(draw, 0, 5)}%"'


class GeneratedBus(Design):
    """A design drawn by :func:`buses` or :func:`mirrored_buses`; ``text`` is its design file.

    ``mirror`` ({tap: image tap}) is set for mirrored buses, else empty.  It
    prints as ``budget.loads('''...''')``, a reproducer of the draw.
    """

    text: str
    mirror: Mapping[str, str]

    def __repr__(self) -> str:
        return 'budget.loads("""\n' + self.text + '""")'

    def _repr_pretty_(self, p, cycle):
        p.text(repr(self))

    def __reduce__(self):  # rebuilt from its text
        return (_load, (self.text, dict(self.mirror)))


def _load(text: str, mirror=None) -> GeneratedBus:
    from .design_file import loads

    d = loads(text, source="<drawn bus>")
    out = object.__new__(GeneratedBus)
    out.__dict__.update(d.__dict__)
    object.__setattr__(out, "text", text)
    object.__setattr__(out, "mirror", dict(mirror or {}))
    return out


def _check_bus_args(who, min_taps, max_taps, signaling):
    for name, x in (("min_taps", min_taps), ("max_taps", max_taps)):
        if isinstance(x, bool) or not isinstance(x, int):
            _fail(f"{who}({name}=...) must be an integer, got {x!r}")
    if min_taps < 2:
        _fail(f"{who}(min_taps={min_taps}): a bus needs at least 2 taps (a driver and a receiver)")
    if min_taps > max_taps:
        _fail(f"{who}(): min_taps={min_taps} is above max_taps={max_taps}")
    if signaling is not None and signaling not in SIGNALING:
        _fail(f"{who}(signaling={signaling!r}) must be None (either) or one of: {', '.join(SIGNALING)}")


def _signaling(draw, signaling):
    return signaling if signaling is not None else draw(st.sampled_from(SIGNALING))


@st.composite
def _bus(draw, min_taps, max_taps, signaling):
    sig = _signaling(draw, signaling)
    plan = _Plan(sig, *_draw_edge_and_levels(draw, sig))
    _draw_lines(draw, plan)
    n = _ints(draw, min_taps, max_taps)
    nodes, plan.segments, taps = _half_bus(draw, plan, n, "U", rings=True)
    _draw_parts(draw, plan, taps)
    plan.taps = [tuple(t) for t in taps]
    plan.terms = _draw_terminations(draw, plan, nodes, taps)
    _draw_extras(draw, plan)
    return _load(_text(plan, f"drawn {sig} bus, {n} taps"))


def buses(*, min_taps: int = 2, max_taps: int = 16, signaling: str | None = None) -> st.SearchStrategy:
    """Random but physical bus designs (see the module docstring for what they cover).

    Parameters
    ----------
    min_taps, max_taps : int
        Number of taps, 2 <= min_taps <= max_taps.  Every draw has a
        transceiver (tap ``U1``) and another tap that can receive.
    signaling : None, "single-ended" or "differential"
        None draws both.

    Returns a strategy of :class:`GeneratedBus` (a :class:`budget.model.Design`).
    """
    def build():
        _check_bus_args("buses", min_taps, max_taps, signaling)
        return _bus(min_taps, max_taps, signaling)

    return st.deferred(build)


@st.composite
def _mirrored(draw, min_taps, max_taps, signaling):
    sig = _signaling(draw, signaling)
    plan = _Plan(sig, *_draw_edge_and_levels(draw, sig))
    _draw_lines(draw, plan)
    half = _ints(draw, max(1, math.ceil(min_taps / 2)), max(1, max_taps // 2))
    nodes, segs, taps = _half_bus(draw, plan, half, "A", rings=False)
    if half == 1:
        # one tap per side: it needs a partner that can receive, so it is the transceiver p0
        plan.parts["p0"] = _draw_part(draw, plan, "transceiver")
        taps[0][2] = "p0"
    else:
        _draw_parts(draw, plan, taps)
    terms = _draw_terminations(draw, plan, nodes, taps)
    shared = draw(st.booleans())          # join at a shared centre node, or by a centre segment
    image = {nd: (nd if shared and nd == nodes[0] else "B" + nd[1:]) for nd in nodes}
    tap_image = {t[0]: "B" + t[0][1:] for t in taps}
    m_segs = [(image[a], image[b], ln, length) for a, b, ln, length in segs]
    join = []
    if not shared:
        seg_max = max(5, int(2 * plan.rise / 6e-9 * 1e3))
        join = [(nodes[0], image[nodes[0]], draw(st.sampled_from(list(plan.lines))),
                 _q(_ints(draw, 1, seg_max), "mm"))]
    plan.segments = segs + join + m_segs
    plan.taps = [tuple(t) for t in taps] + [(tap_image[t[0]], image[t[1]], t[2], t[3]) for t in taps]
    m_terms = []
    for tm in terms:
        tm2 = dict(tm)
        if "node" in tm2:
            tm2["node"] = f'"{image[tm["node"].strip(chr(34))]}"'
        else:
            tm2["tap"] = f'"{tap_image[tm["tap"].strip(chr(34))]}"'
        m_terms.append(tm2)
    plan.terms = terms + m_terms
    mirror = {**tap_image, **{v: k for k, v in tap_image.items()}}
    return _load(_text(plan, f"drawn mirror-symmetric {sig} bus, {2 * half} taps"), mirror)


def mirrored_buses(*, min_taps: int = 2, max_taps: int = 16, signaling: str | None = None) -> st.SearchStrategy:
    """Mirror-symmetric random buses: a half-bus (taps ``A1``...) and its image (``B1``...).

    The image has the same parts, lines, lengths, stubs and terminations;
    the halves share their centre node or are joined by one centre segment.
    ``min_taps`` / ``max_taps`` bound the total (even) number of taps.
    """
    def build():
        _check_bus_args("mirrored_buses", min_taps, max_taps, signaling)
        if max_taps // 2 < math.ceil(min_taps / 2):
            _fail(f"mirrored_buses(min_taps={min_taps}, max_taps={max_taps}): no even tap count in range")
        return _mirrored(min_taps, max_taps, signaling)

    return st.deferred(build)


__all__ = ["variants", "buses", "mirrored_buses", "GeneratedBus", "InvalidStrategyArgument", "JIT_PROFILE",
           "jit_settings"]
