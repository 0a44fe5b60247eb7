"""A TDR impedance profile turned into measured values for a design's line segments.

On the production line the TDR port sits at one end of the bus (a tap's pad or an end node).
:func:`assign_profile` walks the design from that port -- the port tap's stub (if it has one),
then segment after segment along the trunk -- and gives each piece of line the impedance the
profile measured over its span of round-trip time.  The result is a values file
(``"lines.NAME.z0" = "52.31 ohm"``) that ``check --values`` / ``judge --values`` accept.

Which piece is which
--------------------
``match="delay"`` (default)
    Piece k spans the round-trip times 2 (TD_1 + ... + TD_{k-1}) .. 2 (TD_1 + ... + TD_k)
    from the port, TD being the design's nominal one-way delay of each piece (length x delay
    per length).  Its impedance is the mean of the profile's cells that lie inside the span
    at least one cell from either end (a cell next to an impedance step reads an intermediate
    value, budget.tdr), or, for a piece of one or two cells, of the cells wholly inside it.
    A piece shorter than one cell cannot be read and is refused.
``match="order"``
    The profile's segments (runs of near-constant impedance, :func:`budget.tdr.find_segments`)
    are matched to the pieces in order from the port; segments that start later than half a
    cell before the end of the path's round trip (by the design's delays: the far end) are not
    counted, and the counts must then agree.  A one-cell segment whose impedance lies between its
    neighbours' is a step that fell inside that cell and is left out first.  A segment's
    impedance is the mean of all its cells, including the after-effect of a step (up to about
    2 %, budget.tdr), so this is less accurate than matching by delay; it is useful when the
    unit's delays differ from the design's.

Values are per line type (the design's parameters are ``lines.NAME.z0``): pieces that share
a line type get the mean of their impedances, weighted by the cells used, and a note when
they differ by more than 2 %.  A line type also used off the path (other taps' stubs,
branches) takes the measured value there too, which is said in a note.

Refused (a :class:`~budget.errors.CaptureError` naming the capture, or a
:class:`~budget.errors.ArgumentError` for the port): a port inside the bus (two segments meet
there: the TDR sees both directions at once), a profile that ends (capture end, open or short)
before the path does, fewer profile segments than pieces (``order``).  The walk stops at a
branch (three or more segments at a node): the pieces beyond it are not assigned and a note
says so.  Stubs of other taps along the path are side branches the peeling does not separate:
a TDR of the bare board sees them as dips; a note names them.

The values are estimates from a lossless layer-peeling model (see :mod:`budget.tdr`); confirm
against impedance coupons and the fabricator's data.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .errors import ArgumentError, CaptureError
from .model import Design
from .tdr import Profile

MATCHES = ("delay", "order")
SPREAD_NOTE = 0.02      # pieces of one line type differing by more than this fraction get a note


@dataclass(frozen=True)
class Piece:
    """One piece of line on the path from the port, with the impedance measured for it.

    label: "segment #3 (n2-n3)" or "tap U1 stub"; line: its line type; t_start, t_end [s]:
    its round-trip span from the design's delays; z [ohm]: measured; cells: profile cells used.
    """
    label: str
    line: str
    t_start: float
    t_end: float
    z: float
    z_design: float
    cells: int

    def to_json(self) -> dict:
        return {"piece": self.label, "line": self.line, "t_start": self.t_start, "t_end": self.t_end,
                "z": self.z, "z_design": self.z_design, "cells": self.cells}


@dataclass(frozen=True)
class Assignment:
    """The pieces from the port and the values file they make."""
    port: str
    match: str
    pieces: tuple
    values: dict            # "lines.NAME.z0" -> ohm
    notes: tuple

    def values_toml(self, header: str = "") -> str:
        """A values file (TOML, ``"lines.NAME.z0" = "52.31 ohm"``) for ``--values``."""
        out = [f"# {line}" for line in header.splitlines()] if header else []
        out.append(f"# measured by TDR from port {self.port} (pieces matched by {self.match}); estimates from a "
                   "lossless layer-peeling model: confirm with impedance coupons and the fabricator's data")
        out += [f'"{p}" = "{z:.6g} ohm"' for p, z in self.values.items()]
        return "\n".join(out) + "\n"

    def to_json(self) -> dict:
        return {"port": self.port, "match": self.match, "pieces": [p.to_json() for p in self.pieces],
                "values": dict(self.values), "notes": list(self.notes)}

    def text(self) -> str:
        rows = [("piece", "line", "round trip from", "to", "design Z", "measured Z", "cells")]
        for p in self.pieces:
            rows.append((p.label, p.line, f"{p.t_start * 1e9:.3f} ns", f"{p.t_end * 1e9:.3f} ns",
                         f"{p.z_design:.2f} ohm", f"{p.z:.2f} ohm", str(p.cells)))
        w = [max(len(r[i]) for r in rows) for i in range(len(rows[0]))]
        out = [f"Line pieces from the TDR port {self.port} (matched by {self.match}):"]
        out += ["  " + "  ".join(c.ljust(w[i]) if i < 2 else c.rjust(w[i]) for i, c in enumerate(r)) for r in rows]
        out.append("Values (for --values):")
        out += [f"  {p} = {z:.6g} ohm" for p, z in self.values.items()]
        out += [f"note: {n}" for n in self.notes]
        return "\n".join(out) + "\n"


def _walk(design: Design, port: str):
    """[(label, line name, one-way delay [s])] from the port along the trunk, and notes."""
    names = design.tap_names
    pieces, notes = [], []
    if port in names:
        tap = design.tap(port)
        node = tap.node
        if tap.stub is not None:
            td = float(np.asarray(design.lines[tap.stub.line].delay)) * float(np.asarray(tap.stub.length))
            pieces.append((f"tap {tap.name} stub", tap.stub.line, td))
    elif port in design.nodes:
        node = port
    else:
        from .limits import listed
        raise ArgumentError(f"--port {port!r} is neither a tap nor a node of the design; taps: {listed(names)}")
    at = {}
    for s in design.segments:
        at.setdefault(s.a, []).append(s)
        at.setdefault(s.b, []).append(s)
    ends = [n for n in design.nodes if len(at.get(n, ())) == 1]
    start = at.get(node, [])
    if len(start) > 1:
        from .limits import listed
        raise ArgumentError(f"--port {port}: node {node!r} joins {len(start)} segments, so a TDR there sees both "
                            f"directions at once; put the port at an end of the bus (nodes with one segment: "
                            f"{listed(ends)})")
    prev, on_path = None, set()
    while True:
        nxt = [s for s in at.get(node, []) if s is not prev]
        if not nxt:
            break
        if len(nxt) > 1:
            rest = [s for s in design.segments if s.index not in on_path]
            notes.append(f"the bus branches at node {node!r} ({len(nxt) + 1} segments): the profile beyond it mixes "
                         f"the branches, so {len(rest)} segment(s) beyond it are not assigned")
            break
        s = nxt[0]
        td = float(np.asarray(design.lines[s.line].delay)) * float(np.asarray(s.length))
        far = s.b if s.a == node else s.a
        pieces.append((f"segment #{s.index + 1} ({node}-{far})", s.line, td))
        on_path.add(s.index)
        prev, node = s, far
    if not pieces:
        raise ArgumentError(f"--port {port}: no line starts there (no stub and no segment at node {node!r})")
    side = [t.name for t in design.taps if t.stub is not None and t.name != port
            and any(t.node in (s.a, s.b) for s in design.segments if s.index in on_path)]
    if side:
        from .limits import listed
        notes.append(f"taps with stubs along the path ({listed(side)}): their stubs are side branches the peeling "
                     "does not separate; on a bare-board TDR they show as dips next to their nodes")
    used = {ln for _, ln, _ in pieces}
    elsewhere = sorted({s.line for s in design.segments if s.index not in on_path and s.line in used} |
                       {t.stub.line for t in design.taps if t.stub is not None and t.name != port
                        and t.stub.line in used})
    if elsewhere:
        notes.append(f"line type(s) {', '.join(elsewhere)} also serve pieces off the path; the measured value "
                     "applies to those too")
    return pieces, notes


def _without_step_cells(segs, cell):
    """Segments without the one-cell ones that read between their neighbours (a step inside that cell)."""
    out = []
    for i, s in enumerate(segs):
        one_cell = s.t_end - s.t_start <= 1.5 * cell
        if one_cell and 0 < i < len(segs) - 1:
            lo, hi = sorted((segs[i - 1].z, segs[i + 1].z))
            if lo <= s.z <= hi:
                continue
        out.append(s)
    return out


def assign_profile(design: Design, profile: Profile, port: str, *, match: str = "delay",
                   source: str = "<capture>") -> Assignment:
    """Measured impedance [ohm] of every line piece on the path from ``port`` (a tap or an end node).

    ``design``: scalar values (its delays place the pieces with ``match="delay"``);
    ``profile``: from :func:`budget.tdr.tdr_profile` of the capture taken at ``port``;
    ``source``: the capture's name in error messages.  Rules in the module docstring.
    """
    if match not in MATCHES:
        raise ArgumentError(f"match must be one of {', '.join(MATCHES)}, got {match!r}")
    if design.batch_size is not None:
        raise ArgumentError("assign_profile takes a design with scalar values")
    walk, notes = _walk(design, port)
    cell = profile.cell
    t_cells = profile.t
    z_cells = profile.z
    t_end_profile = float(t_cells[-1] + cell) if profile.end is None else float(t_cells[-1])
    pieces = []
    if match == "delay":
        t0 = 0.0
        eps = 1e-6 * cell
        for label, line, td in walk:
            a, b = t0, t0 + 2.0 * td
            t0 = b
            # at an open or a short the cell that holds the end may already read it: half a cell of slack
            if b > t_end_profile + (cell if profile.end is not None else 0.0) + eps:
                why = ("the capture ends" if profile.end is None else f"the profile ends at an {profile.end[0]}")
                missing = [lb for lb, _, _ in walk[len(pieces):]]
                raise CaptureError(f"{why} at {t_end_profile * 1e9:.3f} ns round trip but the path from {port} needs "
                                   f"{2 * sum(td for _, _, td in walk) * 1e9:.3f} ns: {len(missing)} piece(s) not covered "
                                   f"({', '.join(missing[:6])}{' ...' if len(missing) > 6 else ''}); capture a longer "
                                   "window or check the port and the design's delays", source=source)
            inside = (t_cells >= a - eps) & (t_cells + cell <= b + eps)
            inner = (t_cells >= a + cell - eps) & (t_cells + 2 * cell <= b + eps)
            use = inner if inner.any() else inside
            if not use.any():
                raise CaptureError(f"{label} spans {2 * td * 1e12:.0f} ps round trip, less than one cell of the "
                                   f"profile ({cell * 1e12:.0f} ps): its impedance cannot be read (a faster edge "
                                   "resolves it)", source=source)
            zs = z_cells[use]
            if not np.all(np.isfinite(zs)):
                raise CaptureError(f"{label}: the profile reads an open or a short inside it", source=source)
            pieces.append((label, line, a, b, float(np.mean(zs)), int(use.sum())))
    else:
        found = _without_step_cells([s for s in profile.segments if math.isfinite(s.z)], cell)
        # a segment starting at the path's round trip (by the design's delays, less half a cell) is the far end
        path_end = 2.0 * sum(td for _, _, td in walk)
        beyond = [s for s in found if s.t_start >= path_end - 0.5 * cell]
        found = [s for s in found if s.t_start < path_end - 0.5 * cell]
        if beyond:
            notes.append(f"{len(beyond)} profile segment(s) beyond the path's {path_end * 1e9:.3f} ns round trip "
                         "(the far end) are not used")
        if len(found) < len(walk):
            raise CaptureError(f"the profile shows {len(found)} segment(s) of near-constant impedance but the path from "
                               f"{port} has {len(walk)} piece(s) ({', '.join(lb for lb, _, _ in walk[:6])}"
                               f"{' ...' if len(walk) > 6 else ''}); match by the design's delays instead "
                               "(--match delay) or check the port", source=source)
        if len(found) > len(walk):
            raise CaptureError(f"the profile shows {len(found)} segment(s) of near-constant impedance within the "
                               f"path's round trip but the path from {port} has {len(walk)} piece(s); match by the "
                               "design's delays instead (--match delay)", source=source)
        for (label, line, _), s in zip(walk, found):
            pieces.append((label, line, s.t_start, s.t_end, float(s.z), int(round((s.t_end - s.t_start) / cell))))
    out, by_line = [], {}
    for label, line, a, b, z, n in pieces:
        out.append(Piece(label=label, line=line, t_start=a, t_end=b, z=z,
                         z_design=float(np.asarray(design.lines[line].z0)), cells=n))
        by_line.setdefault(line, []).append((z, n, label))
    values = {}
    for line, items in by_line.items():
        w = np.array([n for _, n, _ in items], dtype=float)
        zs = np.array([z for z, _, _ in items])
        values[f"lines.{line}.z0"] = float(np.sum(w * zs) / np.sum(w))
        if zs.max() > zs.min() * (1 + SPREAD_NOTE):
            notes.append(f"pieces of line {line!r} measure {zs.min():.2f} to {zs.max():.2f} ohm; the value is their "
                         "mean: give each segment its own [lines] table to set them apart")
    return Assignment(port=port, match=match, pieces=tuple(out), values=values, notes=tuple(notes))


__all__ = ["assign_profile", "Assignment", "Piece", "MATCHES"]
