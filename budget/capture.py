"""Captured waveforms: bench and oscilloscope CSV exports, or numpy arrays, as time [s] and volts [V].

File rules (docs/cli.md):

* Optional free-text lines (instrument settings, comments) before the header.  The
  header is the first line of two or more text cells that is followed by a row of
  as many cells that are mostly numbers.  The **first column is time**; every other
  column is a channel.
* Units in a header cell: ``Time (ns)``, ``CH1 [mV]``, a cell that is only a unit in
  brackets (``[s]``) or a bare unit (``V``, ``ms``), or a second header line that
  holds only units.  A cell without a unit is SI (seconds, volts).  Channel units
  must be voltages (V, mV, uV, kV ...); time units must be times.
* Cells separated by tab, ``;`` or ``,`` (detected from the header and first row,
  in that order of preference).  A tab- or ``;``-separated file may write decimal
  commas (``1,25e-9``); a file mixing decimal commas and points is refused.
* Every data cell must be a finite number (no empty cells, no NaN, no text); time
  must increase strictly (a repeated time, e.g. from printing too few digits, is
  refused: resample or print more digits).

Limits (absurd sizes are refused rather than run out of memory): at most
``MAX_BYTES`` of text, ``MAX_ROWS`` samples and ``MAX_CHANNELS`` channels; at least
``MIN_ROWS`` samples; the header within the first ``MAX_PREAMBLE`` lines.
"""
from __future__ import annotations

import io
import re
from dataclasses import dataclass, field

import numpy as np

from .errors import CaptureError, DesignError
from .files import read_regular_file
from .limits import listed

MAX_BYTES = 512 * 1024 * 1024   # 512 MiB of text
MAX_ROWS = 20_000_000           # samples per channel (a 20 M point scope record)
MAX_CHANNELS = 64
MIN_ROWS = 2
MAX_PREAMBLE = 500              # the header must be within the first 500 lines
DELIMITERS = ("\t", ";", ",")
_NUMBER = re.compile(r"^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$")
_UNIT_SUFFIX = re.compile(r"^(?P<name>.*?)\s*(?P<open>[\(\[])\s*(?P<unit>[^\(\)\[\]]*?)\s*[\)\]]\s*$")
_DELIM_NAMES = {"\t": "tab", ";": "semicolon", ",": "comma"}


@dataclass(frozen=True)
class Capture:
    """A captured waveform set: one time axis t [s] and one or more channels [V].

    channels maps each channel name (header text without its unit) to its samples;
    units maps each column name (time first) to the unit written in the file ("" = SI);
    notes say how the file was read (delimiter, decimal commas, units).
    """
    t: np.ndarray
    channels: dict
    source: str = "<arrays>"
    time_name: str = "time"
    units: dict = field(default_factory=dict)
    notes: tuple = ()

    @property
    def names(self) -> tuple:
        """Channel names in file order."""
        return tuple(self.channels)

    def __getitem__(self, name: str) -> np.ndarray:
        """Samples [V] of channel ``name``."""
        try:
            return self.channels[name]
        except KeyError:
            raise CaptureError(f"no channel {name!r}; channels are: {listed(self.channels)}",
                               source=self.source) from None

    @classmethod
    def from_arrays(cls, t, channels: dict, *, source: str = "<arrays>") -> "Capture":
        """A Capture from numpy arrays: t [s] strictly increasing, channels {name: v [V]} of the same length."""
        t = np.array(t, dtype=float, copy=True)
        if t.ndim != 1:
            raise CaptureError(f"time must be a 1-D array, got shape {t.shape}", source=source, column="time")
        if not isinstance(channels, dict) or not channels:
            raise CaptureError("need at least one channel {name: samples}", source=source)
        if len(channels) > MAX_CHANNELS:
            raise CaptureError(f"{len(channels)} channels, more than the {MAX_CHANNELS} allowed", source=source)
        out = {}
        for name, v in channels.items():
            if not isinstance(name, str) or not name.strip():
                raise CaptureError(f"channel names must be non-empty strings, got {name!r}", source=source)
            v = np.array(v, dtype=float, copy=True)
            if v.shape != t.shape:
                raise CaptureError(f"{v.shape[0] if v.ndim == 1 else v.shape} samples but time has {t.shape[0]}",
                                   source=source, column=name)
            bad = np.flatnonzero(~np.isfinite(v))
            if bad.size:
                raise CaptureError(f"sample {int(bad[0])} is {float(v[bad[0]])!r}, not a finite voltage",
                                   source=source, column=name)
            out[name] = v
        _check_time(t, source, row_line=None, time_name="time")
        return cls(t=t, channels=out, source=source, units={"time": "", **{n: "" for n in out}})


def _check_time(t, source, row_line, time_name):
    """Sample-count limits, finite and strictly increasing time; row_line(i) -> file line of sample i."""
    where = (lambda i: dict(line=row_line(i))) if row_line else (lambda i: {})
    if t.shape[0] < MIN_ROWS:
        raise CaptureError(f"{t.shape[0]} sample(s); need at least {MIN_ROWS}", source=source)
    if t.shape[0] > MAX_ROWS:
        raise CaptureError(f"{t.shape[0]} samples, more than the {MAX_ROWS} allowed (decimate the record first)",
                           source=source)
    bad = np.flatnonzero(~np.isfinite(t))
    if bad.size:
        i = int(bad[0])
        raise CaptureError(f"time {float(t[i])!r} is not a finite number" + ("" if row_line else f" (sample {i})"),
                           source=source, column=time_name, **where(i))
    d = np.diff(t)
    bad = np.flatnonzero(d <= 0)
    if bad.size:
        i = int(bad[0]) + 1
        what = "repeats" if d[i - 1] == 0 else "goes back to"
        raise CaptureError(f"time {what} {t[i]:.9g} s after {t[i - 1]:.9g} s; time must increase strictly"
                           + ("" if row_line else f" (sample {i})"), source=source, column=time_name, **where(i))


# ---------------------------------------------------------------------------
# reading files

def read_capture(path_or_text, *, source: str | None = None) -> Capture:
    """Read a bench / oscilloscope CSV export (rules in the module docstring).

    Parameters
    ----------
    path_or_text : str | os.PathLike
        A path, or the file's text itself (a str containing a newline).
    source : str, optional
        Name used in error messages (default: the path, or ``<text>``).

    Returns
    -------
    Capture
        t [s] and channels [V].

    Raises
    ------
    CaptureError
        Naming the file and, where it applies, the line and column.
    """
    if isinstance(path_or_text, str) and "\n" in path_or_text:
        text, src = path_or_text, source or "<text>"
        if len(text) > MAX_BYTES:
            raise CaptureError(f"{len(text)} characters, more than the {MAX_BYTES} allowed", source=src)
    else:
        src = source or str(path_or_text)
        raw = read_regular_file(path_or_text, MAX_BYTES, lambda reason: CaptureError(reason, source=src),
                                hint="decimate the record first")
        try:
            text = raw.decode("utf-8-sig")
        except UnicodeDecodeError:
            text = raw.decode("latin-1")  # instruments often write Latin-1 for the micro sign and comments
    return _parse(text, src)


def _split(line: str, delim: str) -> list:
    return [c.strip().strip('"').strip("'").strip() for c in line.split(delim)]


def _is_number(cell: str, decimal_comma: bool) -> bool:
    return bool(_NUMBER.match(cell.replace(",", ".") if decimal_comma else cell))


def _numeric_share(cells, delim) -> float:
    dc = delim != ","
    return sum(_is_number(c, dc) for c in cells) / len(cells)


def _find_header(lines):
    """(index of header line, delimiter, n_cells, trailing_empty) or raise with the most useful reason."""
    idx = [i for i, ln in enumerate(lines[:MAX_PREAMBLE + 2]) if ln.strip()]
    for a, b in zip(idx, idx[1:]):
        for d in DELIMITERS:
            head = _split(lines[a], d)
            trailing = len(head) > 2 and head[-1] == ""
            if trailing:
                head = head[:-1]
            if len(head) < 2 or any(c == "" for c in head) or _numeric_share(head, d) > 0:
                continue
            row = _split(lines[b], d)
            if trailing and row and row[-1] == "":
                row = row[:-1]
            if len(row) == len(head) and _is_number(row[0], d != ",") and _numeric_share(row, d) >= 0.5:
                return a, d, len(head), trailing
            if len(row) == len(head) and _is_units_row(row):
                return a, d, len(head), trailing
    return None


def _is_units_row(cells) -> bool:
    return all(_unit_of(c) is not None for c in cells)


def _unit_of(cell: str):
    """The unit text if ``cell`` is only a unit ("ns", "(mV)", "[s]"), else None."""
    m = _UNIT_SUFFIX.match(cell)
    if m and not m.group("name"):
        return m.group("unit")
    if re.fullmatch(r"[A-Za-zµμ]{1,6}", cell) and _scale_or_none(cell) is not None:
        return cell
    return None


def _scale_or_none(unit: str):
    from .units import parse_quantity
    for dim in ("time", "voltage"):
        try:
            return dim, parse_quantity(f"1 {unit.replace('μ', 'µ')}", dim)
        except DesignError:
            continue
    return None


def _scale(unit: str, dim: str, src, line, column) -> float:
    """SI factor of ``unit`` for a quantity of dimension ``dim`` ("time" or "voltage")."""
    from .units import parse_quantity

    if unit == "":
        return 1.0
    try:
        return parse_quantity(f"1 {unit.replace('μ', 'µ')}", dim)
    except DesignError:
        from .units import _registry

        other = _scale_or_none(unit)
        what = "the time column" if dim == "time" else "a channel"
        need = "a time (s, ms, us, ns, ps)" if dim == "time" else "a voltage (V, mV, uV, kV)"
        if other is not None:
            raise CaptureError(f"unit {unit!r} is a {other[0]}, but {what} must be in {need}",
                               source=src, line=line, column=column) from None
        # a unit that is neither a time nor a voltage: known to pint (A, W...) or not at all;
        # only a short single word reaches pint, so no expression is ever evaluated
        try:
            if len(unit) > 16 or not unit.replace("µ", "u").isalpha():
                raise ValueError(unit)
            _registry().Unit(unit)
        except Exception:  # pint raises several unrelated types
            raise CaptureError(f"unknown unit {unit!r}", source=src, line=line, column=column) from None
        raise CaptureError(f"unit {unit!r}: {what} must be in {need}", source=src, line=line,
                           column=column) from None


def _name_and_unit(cell: str, k: int, src, line):
    """Split a header cell into (name, unit); nameless cells get 'time' / 'CH<k>'."""
    default = "time" if k == 0 else f"CH{k}"
    m = _UNIT_SUFFIX.match(cell)
    if m:
        name, unit = m.group("name").strip(), m.group("unit").strip()
        if _UNIT_SUFFIX.match(name):
            raise CaptureError(f"header cell {cell!r} gives two units", source=src, line=line, column=cell)
        if not unit:
            raise CaptureError(f"header cell {cell!r} has empty unit brackets", source=src, line=line, column=cell)
        return (name or default), unit
    bare = _unit_of(cell)
    if bare is not None and cell not in ("t", "T"):
        return default, bare
    return cell, ""


def _parse(text: str, src: str) -> Capture:
    lines = text.splitlines()
    if not any(ln.strip() for ln in lines):
        raise CaptureError("empty: no header and no data", source=src)
    found = _find_header(lines)
    if found is None:
        raise CaptureError(_why_no_header(lines), source=src)
    h, delim, ncol, trailing = found
    hline = h + 1
    if ncol - 1 > MAX_CHANNELS:
        raise CaptureError(f"{ncol - 1} channels, more than the {MAX_CHANNELS} allowed", source=src, line=hline)
    head = _split(lines[h], delim)[:ncol]
    names, units = [], []
    for k, cell in enumerate(head):
        name, unit = _name_and_unit(cell, k, src, hline)
        names.append(name)
        units.append(unit)
    # an optional units line right after the header
    first = h + 1
    while first < len(lines) and not lines[first].strip():
        first += 1
    row = _split(lines[first], delim) if first < len(lines) else []
    if trailing and row and row[-1] == "":
        row = row[:-1]
    if row and len(row) == ncol and _is_units_row(row) and _numeric_share(row, delim) == 0:
        for k, cell in enumerate(row):
            unit = _unit_of(cell)
            if units[k] and units[k] != unit:
                raise CaptureError(f"the header says {units[k]!r} but the units line says {unit!r}",
                                   source=src, line=first + 1, column=names[k])
            units[k] = unit
        first += 1
    dup = {n for n in names if names.count(n) > 1}
    if dup:
        raise CaptureError(f"column name {sorted(dup)[0]!r} appears more than once", source=src, line=hline)
    scales = [_scale(units[0], "time", src, hline, names[0])]
    scales += [_scale(u, "voltage", src, hline, n) for n, u in zip(names[1:], units[1:])]

    data_idx = [i for i in range(first, len(lines)) if lines[i].strip()]
    if not data_idx:
        raise CaptureError("no data rows after the header", source=src, line=hline)
    if len(data_idx) > MAX_ROWS:
        raise CaptureError(f"{len(data_idx)} rows, more than the {MAX_ROWS} allowed (decimate the record first)",
                           source=src)
    body = [lines[i] for i in data_idx]
    decimal_comma = delim != "," and any("," in ln for ln in body)
    if decimal_comma and any("." in ln for ln in body):
        i = next(i for i in data_idx if "." in lines[i])
        raise CaptureError("decimal commas and decimal points in one file; export with one decimal sign",
                           source=src, line=i + 1)
    data = _fast_numbers(body, delim, ncol, trailing, decimal_comma)
    if data is None:
        _locate_bad_cell(lines, data_idx, delim, ncol, trailing, decimal_comma, names, src)
        raise CaptureError("cannot read the data rows", source=src)  # pragma: no cover (located above)
    data = data * np.asarray(scales)
    t = np.ascontiguousarray(data[:, 0])
    _check_time(t, src, row_line=lambda i: data_idx[i] + 1, time_name=names[0])
    channels = {n: np.ascontiguousarray(data[:, k + 1]) for k, n in enumerate(names[1:])}
    notes = [f"{_DELIM_NAMES[delim]}-separated, header on line {hline}, {len(t)} samples"]
    if decimal_comma:
        notes.append("decimal commas read as decimal points")
    for n, u in zip(names, units):
        notes.append(f"{n}: {u or 'SI (no unit given)'}")
    return Capture(t=t, channels=channels, source=src, time_name=names[0], units=dict(zip(names, units)),
                   notes=tuple(notes))


def _why_no_header(lines) -> str:
    rows = [ln for ln in lines if ln.strip()]
    last = [i for i, ln in enumerate(lines) if ln.strip()][-1]
    for d in DELIMITERS:
        cells = _split(rows[-1], d)
        if len(cells) >= 2 and all(cells) and _numeric_share(cells, d) == 0:
            return f"no data rows after the header (line {last + 1})"
    if not any(d in ln for ln in rows for d in DELIMITERS):
        return "only one column; need a time column and at least one channel (separated by tab, ';' or ',')"
    for d in DELIMITERS:
        cells = _split(rows[0], d)
        if len(cells) >= 2 and _numeric_share(cells, d) == 1:
            return "no header line: the file starts with numbers; add a header (time column, then channels)"
    return ("no header found: need a line of column names (time first, then channels) followed by rows "
            f"of as many numbers, separated by tab, ';' or ',', within the first {MAX_PREAMBLE} lines")


def _fast_numbers(body, delim, ncol, trailing, decimal_comma):
    """All rows as an array [rows, ncol] if every cell is a plain finite number, else None."""
    text = "\n".join(body)
    if decimal_comma:
        text = text.replace(",", ".")
    if re.search(r"[^0-9eE+\-.\s" + re.escape(delim) + "]", text):
        return None  # letters (nan, inf, text), underscores, quotes ...: the careful path names the cell
    try:
        usecols = range(ncol) if trailing else None
        data = np.loadtxt(io.StringIO(text), delimiter=delim, ndmin=2, dtype=float, usecols=usecols)
    except ValueError:
        return None
    if data.shape[1] != ncol or not np.all(np.isfinite(data)):
        return None
    if trailing and any(not ln.rstrip().endswith(delim) for ln in body):
        return None
    return data


def _locate_bad_cell(lines, data_idx, delim, ncol, trailing, decimal_comma, names, src):
    """Raise CaptureError at the first cell that is not a finite number (or the first ragged row)."""
    for i in data_idx:
        cells = _split(lines[i], delim)
        if trailing and cells and cells[-1] == "":
            cells = cells[:-1]
        if len(cells) != ncol:
            raise CaptureError(f"{len(cells)} cells where the header has {ncol}", source=src, line=i + 1)
        for k, c in enumerate(cells):
            if c == "":
                raise CaptureError("empty cell", source=src, line=i + 1, column=names[k])
            s = c.replace(",", ".") if decimal_comma else c
            if not _NUMBER.match(s):
                if s.lower().lstrip("+-") in ("nan", "inf", "infinity"):
                    raise CaptureError(f"{c!r} is not a finite number", source=src, line=i + 1, column=names[k])
                raise CaptureError(f"{c!r} is not a number", source=src, line=i + 1, column=names[k])


# ---------------------------------------------------------------------------
# judging a captured waveform with the simulation's metrics

@dataclass(frozen=True)
class Judgement:
    """One captured edge judged against the design: metrics, violations and the levels used.

    v_lo, v_hi [V]: the DC levels at the receiver's pin (from the design's DC solutions
    unless given); metrics: :class:`budget.metrics.EdgeMetrics` (flight times measured
    from the driver's timing reference placed at ``t_edge`` of the capture);
    violations: names of the violated rules (same rule as ``check``).
    """
    receiver: str
    driver: str
    edge: str
    v_lo: float
    v_hi: float
    metrics: object
    bits: int
    violations: tuple
    vector: object = None      # the kernel's metrics vector (after the guardband)
    headroom: float = float("nan")   # [V] by the one rule (kernels.metrics.headroom_terms)
    limit: int = 0             # LIMIT_* code of the term that sets the headroom

    @property
    def passed(self) -> bool:
        return self.bits == 0


def judge_waveform(design, t, v, receiver: str, edge: str, driver: str, *, t_edge: float = 0.0,
                   v_lo: float | None = None, v_hi: float | None = None, source: str = "<arrays>",
                   hysteresis: float = 0.0, guardband: float = 0.0, t_open: float = np.inf) -> Judgement:
    """Judge a captured waveform at ``receiver`` with the metric and violation kernels of the simulation.

    Parameters
    ----------
    design : Design
        Scalar design: thresholds (vil, vih), ratings (v_max, v_min), budget
        allocations, settle band and minimum margin come from it.
    t, v : arrays [s], [V]
        Captured pin waveform, strictly increasing time (any spacing).
    receiver, driver : str
        Tap names; ``driver`` sets the DC levels and the timing reference.
    edge : "rise" or "fall"
    t_edge : float [s]
        Time in the capture at which the driver's edge starts (flight times are
        measured from the driver's timing reference shifted by it).
    v_lo, v_hi : float [V], optional
        DC levels at the pin; default: the design's DC operating points.
    source : str
        Name of the capture in error messages.
    hysteresis : float [V]
        Added to the 2 %-of-swing fall-back that opens the ringback window and
        marks a non-monotonic edge (:func:`budget.kernels.metrics.edge_metrics_hyst`);
        0 = the metric contract as in the simulation.
    t_open : float [s]
        Latest opening of the ringback window (inf: the fall-back rule alone;
        :mod:`budget.judge` passes the first peak of a smoothed copy).
    guardband : float [V]
        Measurement uncertainty subtracted from the margin and from the
        headroom to the absolute ratings (v_max - guardband, v_min + guardband).

    The capture must start before the edge (its first sample on the starting side
    of the entry threshold), else CaptureError: a window that cuts the edge is never
    judged silently.  No filtering: noise counts against the margin.
    """
    from .errors import ArgumentError
    from .kernels import metrics as mk
    from .metrics import allocation_terms, from_vector
    from .roles import driving_part
    from .simulate import simulate
    from .sweep import t_ref_of

    if design.batch_size is not None:
        raise ArgumentError("judge_waveform() takes a design with scalar values")
    if edge not in ("rise", "fall"):
        raise ArgumentError(f"edge must be 'rise' or 'fall', got {edge!r}")
    part = design.parts[design.tap(receiver).part]
    if not part.can_receive:
        raise ArgumentError(f"tap {receiver!r} cannot receive (part {part.name!r} has role {part.role!r})")
    if receiver == driver:
        raise ArgumentError(f"tap {receiver!r} is the driver; judge another receiver")
    driving_part(design, driver)
    cap = Capture.from_arrays(t, {receiver: v}, source=source)
    t, v = cap.t, cap[receiver]
    if v_lo is None or v_hi is None:
        w = simulate(design, driver, edge)
        k = w.index(receiver)
        v_lo = float(w.v_low[k]) if v_lo is None else float(v_lo)
        v_hi = float(w.v_high[k]) if v_hi is None else float(v_hi)
    if not (np.isfinite(v_lo) and np.isfinite(v_hi) and v_lo < v_hi):
        raise ArgumentError(f"need finite v_lo < v_hi, got v_lo={v_lo!r} V, v_hi={v_hi!r} V")
    if not np.isfinite(t_edge):
        raise ArgumentError(f"t_edge must be finite, got {t_edge!r}")
    vil, vih = float(part.vil), float(part.vih)
    rising = edge == "rise"
    if (rising and v[0] >= vil) or (not rising and v[0] <= vih):
        raise CaptureError(f"the capture starts at {v[0]:.4g} V, already past the entry threshold "
                           f"({'VIL' if rising else 'VIH'} = {vil if rising else vih:.4g} V): it starts after "
                           "the edge began", source=source, column=receiver)
    swing = abs(v_hi - v_lo)
    # the same arithmetic as the evaluation kernel (budget/kernels/evaluate.py)
    alloc_v, alloc_f = allocation_terms(design.noise_budget)
    alloc = alloc_v + alloc_f * swing
    t_ref = float(t_ref_of(design, driver, edge, 1)[0]) + float(t_edge)
    out = np.empty(mk.N_METRICS)
    if not (np.isfinite(hysteresis) and hysteresis >= 0):
        raise ArgumentError(f"hysteresis must be a finite voltage >= 0, got {hysteresis!r}")
    if not (np.isfinite(guardband) and guardband >= 0):
        raise ArgumentError(f"guardband must be a finite voltage >= 0, got {guardband!r}")
    mk.edge_metrics_hyst(t, v, rising, v_lo, v_hi, vil, vih, t_ref, float(design.noise_budget.settle_band) * swing,
                         float(alloc), float(hysteresis), float(t_open), out)
    out[mk.MARGIN] -= float(guardband)
    v_max = np.inf if part.v_max is None else float(part.v_max) - float(guardband)
    v_min = -np.inf if part.v_min is None else float(part.v_min) + float(guardband)
    min_margin = float(design.noise_budget.min_margin)
    bits = int(mk.violation_bits(out, v_max, v_min, min_margin))
    head, which = mk.headroom_terms(out, v_max, v_min, min_margin)
    return Judgement(receiver=receiver, driver=driver, edge=edge, v_lo=v_lo, v_hi=v_hi,
                     metrics=from_vector(out), bits=bits, violations=tuple(mk.violation_list(bits)),
                     vector=out, headroom=float(head), limit=int(which))
