"""Reading IBIS files (I/O Buffer Information Specification, ANSI/EIA-656, IBIS Open Forum).

Only the parts of the standard a bus budget needs are read: ``[Component]``,
``[Manufacturer]``, ``[Package]``, ``[Pin]``, ``[Model]`` (``Model_type``,
``C_comp``, ``Vinl``/``Vinh``, ``Vmeas``/``Rref``/``Cref``/``Vref``),
``[Voltage Range]`` and the four reference keywords, ``[Pullup]``,
``[Pulldown]``, ``[GND Clamp]``, ``[POWER Clamp]``, ``[Ramp]`` and
``[Rising Waveform]`` / ``[Falling Waveform]`` with their fixtures.  Other
keywords are skipped and listed (``IbisModel.skipped``), so a report can say what
was not modelled.  Why a reader of our own: the one IBIS parser on the package
index when this was written was a first release (two versions within a month)
without ``[Comment Char]`` or line-numbered keyword errors.

The rules applied (IBIS "General syntax rules and guidelines", section 3 of the
specification; version 4.2 (2006) seen, items marked "from memory" not checked
against the text):

- Keywords are in square brackets at the start of a line; keywords, sub-parameters
  and reserved words (``NA``) are case-insensitive, and a keyword's spaces and
  underscores are interchangeable (``[GND Clamp]`` = ``[GND_Clamp]``, from memory).
  Everything else (names of components, models, pins) is case-sensitive.
- The comment character is ``|`` until ``[Comment Char]`` changes it (``[Comment
  Char] #_char``); everything from the comment character to the end of the line
  is a comment.
- Line length: at most 80 characters up to IBIS 3.2, 120 from IBIS 4.0 (BIRD 78.1,
  2003) and 1024 from IBIS 5.1 (from memory), counted up to the first comment
  character.  This reader refuses lines over 1024 characters (the most any version
  allows), so a file that no version permits is named, and longer lines of
  older-version files are read.
- Numbers may carry one scale letter of the standard, case-sensitive: T (1e12),
  G (1e9), M (1e6), k (1e3), m (1e-3), u (1e-6), n (1e-9), p (1e-12), f (1e-15)
  (IBIS 2.0 added T, G and f to 1.1's M k m u n p: IBIS reflector, B. Ross,
  27 Nov 1996); letters after it are units and ignored (``3.3V``, ``2.5pF``).
- ``NA`` means "not available": a min or max entry that is NA takes the typ value
  (the usual reading of the standard, from memory); a typ entry may not be NA.
- Text keywords (``[Notes]``, ``[Disclaimer]``, ``[Copyright]``, ``[Source]``...)
  continue on the following lines up to the next keyword; every other keyword's
  data lines are its table rows or sub-parameters.
- [Pullup] and [POWER Clamp] voltages are relative to their rail
  (Vtable = Vcc - Voutput); [Pulldown] and [GND Clamp] to theirs (normally 0 V).
  Table currents are positive into the buffer.

Errors: :class:`IbisError` (a :class:`~budget.errors.BusBudgetError` and
``ValueError``, so the CLI exits 2) naming the file, the line and the keyword.
"""
from __future__ import annotations

import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .errors import BusBudgetError
from .files import read_regular_file
from .limits import MAX_FILE_BYTES

MAX_LINE_CHARS = 1024
CORNERS = ("typ", "min", "max")
SCALE = {"T": 1e12, "G": 1e9, "M": 1e6, "k": 1e3, "m": 1e-3, "u": 1e-6, "n": 1e-9, "p": 1e-12, "f": 1e-15}
# Model_type values a bus budget can use: what can drive, what can receive
DRIVE_TYPES = {"output", "i/o", "3-state", "open_drain", "i/o_open_drain", "open_sink", "i/o_open_sink",
               "open_source", "i/o_open_source", "output_ecl", "i/o_ecl", "3-state_ecl"}
RECEIVE_TYPES = {"input", "i/o", "i/o_open_drain", "i/o_open_sink", "i/o_open_source", "input_ecl", "i/o_ecl"}
KNOWN_TYPES = DRIVE_TYPES | RECEIVE_TYPES | {"terminator", "series", "series_switch"}
_TEXT_KEYWORDS = {"file name", "file rev", "date", "source", "notes", "disclaimer", "copyright"}
_NUMBER = re.compile(r"([+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)([A-Za-z]*)$")
# unit letters after the number (and its scale letter) are ignored; only these are accepted, so a typo
# such as "1OOm" or a SPICE-style "1meg" is refused instead of being read as 1
_UNITS = {"", "v", "a", "f", "h", "s", "ohm", "ohms", "w"}
_COMMENT_CHARS = set("!\"#$%&'()*,:;<>?@\\^`{|}~")


class IbisError(BusBudgetError, ValueError):
    """An IBIS file is unreadable, breaks the standard's rules, or lacks what a model needs.

    The message names the file, the line (where there is one) and the keyword:
    ``file: line 42: [Pullup]: reason``.
    """

    def __init__(self, message, *, source="<ibis>", line=None, keyword=None):
        self.source = str(source)
        self.line = line
        self.keyword = keyword
        self.reason = message
        where = self.source
        if line is not None:
            where += f": line {line}"
        if keyword is not None:
            where += f": [{keyword}]"
        super().__init__(f"{where}: {message}")


@dataclass(frozen=True)
class Triple:
    """A typ/min/max value in SI units; min and max are the typ value where the file says NA."""
    typ: float
    min: float
    max: float

    def at(self, corner: str) -> float:
        return {"typ": self.typ, "min": self.min, "max": self.max}[corner]


@dataclass(frozen=True)
class Table:
    """A table with one x column [V or s] (increasing) and typ/min/max y columns [A or V]; NA -> typ."""
    x: np.ndarray
    y: np.ndarray        # [3, n]: typ, min, max
    line: int            # where the keyword stands

    def at(self, corner: str) -> np.ndarray:
        return self.y[CORNERS.index(corner)]


@dataclass(frozen=True)
class Waveform:
    """A [Rising Waveform] / [Falling Waveform]: V-T table [s, V] and its fixture (SI)."""
    table: Table
    r_fixture: float
    v_fixture: Triple
    c_fixture: float = 0.0
    l_fixture: float = 0.0
    r_dut: float = 0.0
    l_dut: float = 0.0
    c_dut: float = 0.0


@dataclass(frozen=True)
class Ramp:
    """[Ramp]: 20-80 % voltage change dv [V] over dt [s] per edge and corner, into r_load [ohm]."""
    dv_r: Triple
    dt_r: Triple
    dv_f: Triple
    dt_f: Triple
    r_load: float
    line: int


@dataclass
class IbisModel:
    """One [Model], values in SI units."""
    name: str
    line: int
    model_type: str = ""
    c_comp: Triple | None = None
    vinl: float | None = None
    vinh: float | None = None
    vmeas: float | None = None
    rref: float | None = None
    cref: float | None = None
    vref: float | None = None
    voltage_range: Triple | None = None
    pullup_ref: Triple | None = None
    pulldown_ref: Triple | None = None
    power_clamp_ref: Triple | None = None
    gnd_clamp_ref: Triple | None = None
    pullup: Table | None = None
    pulldown: Table | None = None
    gnd_clamp: Table | None = None
    power_clamp: Table | None = None
    ramp: Ramp | None = None
    rising: list = field(default_factory=list)
    falling: list = field(default_factory=list)
    skipped: list = field(default_factory=list)   # keywords present but not modelled

    @property
    def can_drive(self) -> bool:
        return self.model_type.lower() in DRIVE_TYPES

    @property
    def can_receive(self) -> bool:
        return self.model_type.lower() in RECEIVE_TYPES

    def rail(self, which: str, corner: str) -> float:
        """Reference voltage [V] of 'pullup', 'pulldown', 'power_clamp' or 'gnd_clamp' at a corner."""
        ref = getattr(self, f"{which}_ref")
        if ref is not None:
            return ref.at(corner)
        if which in ("pullup", "power_clamp"):
            return self.voltage_range.at(corner)
        return 0.0


@dataclass
class IbisComponent:
    """One [Component]: manufacturer, package R/L/C (typ/min/max) and pins -> (signal, model, R, L, C)."""
    name: str
    line: int
    manufacturer: str = ""
    r_pkg: Triple | None = None
    l_pkg: Triple | None = None
    c_pkg: Triple | None = None
    pins: dict = field(default_factory=dict)


@dataclass
class IbisFile:
    """A whole IBIS file: version, components and models by name (case-sensitive)."""
    source: str
    version: str
    components: dict
    models: dict

    def model(self, name: str) -> IbisModel:
        if name not in self.models:
            raise IbisError(f"no [Model] named {name!r}; the file has: {', '.join(self.models) or 'none'}",
                            source=self.source)
        return self.models[name]

    def component(self, name: str) -> IbisComponent:
        if name not in self.components:
            raise IbisError(f"no [Component] named {name!r}; the file has: {', '.join(self.components) or 'none'}",
                            source=self.source)
        return self.components[name]


# ---------------------------------------------------------------------------
# numbers

def number(text: str, *, source="<ibis>", line=None, keyword=None, what="value") -> float:
    """An IBIS number in SI: ``2.5p`` -> 2.5e-12, ``3.3V`` -> 3.3, ``1M`` -> 1e6 (IBIS: M is mega)."""
    m = _NUMBER.match(text.strip())
    if not m:
        raise IbisError(f"{what} {text!r} is not a number", source=source, line=line, keyword=keyword)
    value = float(m.group(1))
    tail = m.group(2)
    if tail and tail[0] in SCALE:
        value *= SCALE[tail[0]]
        tail = tail[1:]
    if tail.lower() not in _UNITS:
        raise IbisError(f"{what} {text!r}: {tail!r} is neither a scale letter of the standard "
                        f"({' '.join(SCALE)}, case-sensitive) nor a unit ({', '.join(sorted(_UNITS - {''}))})",
                        source=source, line=line, keyword=keyword)
    if not np.isfinite(value):
        raise IbisError(f"{what} {text!r} is not finite", source=source, line=line, keyword=keyword)
    return value


def _is_na(text: str) -> bool:
    return text.upper() == "NA"


# ---------------------------------------------------------------------------
# lines -> keyword sections

@dataclass
class _Section:
    keyword: str         # normalised: lower case, single spaces
    shown: str           # as written, for messages
    line: int
    arg: str
    rows: list           # (line number, text) of the following data lines


def _sections(text: str, source: str):
    comment = "|"
    out = []
    for no, raw in enumerate(text.splitlines(), start=1):
        stripped = raw.lstrip()
        if re.match(r"\[\s*comment[ _]+char\s*\]", stripped, re.IGNORECASE):
            arg = stripped[stripped.index("]") + 1:].strip()
            if len(arg) < 6 or arg[1:6].lower() != "_char" or arg[0] not in _COMMENT_CHARS:
                raise IbisError(f"expected a comment character followed by '_char' (e.g. '#_char'), got {arg!r}; "
                                f"allowed characters: {''.join(sorted(_COMMENT_CHARS))}",
                                source=source, line=no, keyword="Comment Char")
            comment = arg[0]
            continue
        cut = raw.find(comment)
        body = raw if cut < 0 else raw[:cut]
        if len(body) > MAX_LINE_CHARS:
            own = re.match(r"\s*\[([^\]]{1,40})\]", body)
            raise IbisError(f"line has {len(body)} characters before any comment; the standard allows at most "
                            f"{MAX_LINE_CHARS}", source=source, line=no,
                            keyword=own.group(1).strip() if own else (out[-1].shown if out else None))
        body = body.rstrip()
        if not body.strip():
            continue
        if body.startswith("["):
            close = body.find("]")
            if close < 0:
                raise IbisError(f"keyword without a closing ']': {body.strip()[:60]!r}", source=source, line=no)
            shown = body[1:close].strip()
            key = re.sub(r"[ _]+", " ", shown.lower())
            out.append(_Section(key, shown, no, body[close + 1:].strip(), []))
        else:
            if not out:
                raise IbisError(f"data before the first keyword: {body.strip()[:60]!r}", source=source, line=no)
            out[-1].rows.append((no, body.strip()))
    return out


# ---------------------------------------------------------------------------
# the reader

def read(path) -> IbisFile:
    """Read and check the IBIS file at ``path``; raises :class:`IbisError` naming file, line and keyword."""
    source = str(path)
    data = read_regular_file(path, MAX_FILE_BYTES, lambda reason: IbisError(reason, source=source))
    return reads(data, source=source)


def reads(data, *, source="<ibis>") -> IbisFile:
    """Read IBIS text (str or bytes); ``source`` names it in messages."""
    if isinstance(data, bytes):
        for no, line in enumerate(data.splitlines(), start=1):
            bad = next((c for c in line if c > 0x7E or (c < 0x20 and c != 0x09)), None)
            if bad is not None:
                raise IbisError(f"character 0x{bad:02X} is not allowed: IBIS files are 7-bit ASCII without control "
                                "characters other than tab", source=source, line=no)
        data = data.decode("ascii")
    return _Reader(source).run(_sections(data, source))


class _Reader:
    def __init__(self, source: str):
        self.source = source

    def fail(self, msg, sec=None, line=None):
        raise IbisError(msg, source=self.source, line=line if line is not None else (sec.line if sec else None),
                        keyword=sec.shown if sec else None)

    def num(self, text, sec, line, what):
        return number(text, source=self.source, line=line, keyword=sec.shown, what=what)

    def triple(self, words, sec, line, what):
        if len(words) != 3:
            self.fail(f"{what}: expected typ, min and max (3 entries), got {len(words)}: {' '.join(words)!r}",
                      sec, line)
        if _is_na(words[0]):
            self.fail(f"{what}: the typ entry may not be NA", sec, line)
        typ = self.num(words[0], sec, line, what)
        lo = typ if _is_na(words[1]) else self.num(words[1], sec, line, what)
        hi = typ if _is_na(words[2]) else self.num(words[2], sec, line, what)
        return Triple(typ, lo, hi)

    def table(self, sec, what_x):
        xs, ys = [], []
        for no, row in sec.rows:
            words = row.split()
            if len(words) != 4:
                self.fail(f"a table row has {what_x}, typ, min and max (4 entries), got {len(words)}: {row[:60]!r}",
                          sec, no)
            xs.append(self.num(words[0], sec, no, what_x))
            t = self.triple(words[1:], sec, no, "table entry")
            ys.append((t.typ, t.min, t.max))
        if len(xs) < 2:
            self.fail(f"a table needs at least 2 rows, got {len(xs)}", sec)
        x = np.array(xs)
        y = np.array(ys).T.copy()
        order = np.argsort(x, kind="stable")
        if what_x == "time" and not np.all(np.diff(x) > 0):
            k = int(np.argmax(np.diff(x) <= 0)) + 1
            self.fail(f"time must increase from row to row ({xs[k - 1]:g} s then {xs[k]:g} s)", sec, sec.rows[k][0])
        x, y = x[order], y[:, order]
        if np.any(np.diff(x) == 0):
            k = int(np.argmax(np.diff(x) == 0))
            self.fail(f"{what_x} {x[k]:g} appears twice", sec, sec.rows[int(order[k + 1])][0])
        return Table(x, y, sec.line)

    def run(self, sections) -> IbisFile:
        if not sections:
            self.fail("no IBIS keywords in the file (expected [IBIS Ver] first)")
        first = sections[0]
        if first.keyword != "ibis ver":
            self.fail("the file must start with [IBIS Ver]", first)
        version = first.arg
        if not re.fullmatch(r"\d+\.\d+", version):
            self.fail(f"version {version!r} is not of the form N.N (e.g. 3.2, 5.1)", first)
        components, models = {}, {}
        comp = model = None
        ended = False
        for sec in sections[1:]:
            k = sec.keyword
            if ended:
                self.fail("keyword after [End]", sec)
            if k == "end":
                ended = True
            elif k in _TEXT_KEYWORDS:
                continue
            elif k == "component":
                if not sec.arg:
                    self.fail("a component needs a name", sec)
                if sec.arg in components:
                    self.fail(f"component {sec.arg!r} is defined twice (first at line {components[sec.arg].line})",
                              sec)
                comp = components[sec.arg] = IbisComponent(sec.arg, sec.line)
                model = None
            elif k == "manufacturer":
                self._need(comp, sec, "[Component]")
                comp.manufacturer = sec.arg
            elif k == "package":
                self._need(comp, sec, "[Component]")
                self._package(comp, sec)
            elif k == "pin":
                self._need(comp, sec, "[Component]")
                self._pins(comp, sec)
            elif k == "model":
                if not sec.arg:
                    self.fail("a model needs a name", sec)
                if sec.arg in models:
                    self.fail(f"model {sec.arg!r} is defined twice (first at line {models[sec.arg].line})", sec)
                model = models[sec.arg] = IbisModel(sec.arg, sec.line)
                comp = None
                self._model_params(model, sec)
            elif model is not None and k in ("voltage range", "pullup reference", "pulldown reference",
                                             "power clamp reference", "gnd clamp reference"):
                attr = {"voltage range": "voltage_range"}.get(k, k.replace(" reference", "_ref").replace(" ", "_"))
                if sec.rows:
                    self.fail(f"unexpected line after the keyword: {sec.rows[0][1][:60]!r}", sec, sec.rows[0][0])
                setattr(model, attr, self.triple(sec.arg.split(), sec, sec.line, "voltage"))
            elif model is not None and k in ("pullup", "pulldown", "gnd clamp", "power clamp"):
                if sec.arg:
                    self.fail(f"unexpected text after the keyword: {sec.arg[:60]!r}", sec)
                attr = k.replace(" ", "_")
                if getattr(model, attr) is not None:
                    self.fail(f"model {model.name!r} has this table twice", sec)
                setattr(model, attr, self.table(sec, "voltage"))
            elif model is not None and k == "ramp":
                model.ramp = self._ramp(sec)
            elif model is not None and k in ("rising waveform", "falling waveform"):
                (model.rising if k.startswith("rising") else model.falling).append(self._waveform(sec))
            elif model is not None:
                model.skipped.append(sec.shown)
            # keywords outside a model that a bus budget does not use ([Model Selector], [Diff Pin],
            # [Define Package Model], ...) are skipped
        if not ended:
            self.fail("the file does not end with [End]")
        for m in models.values():
            self._check_model(m)
        return IbisFile(self.source, version, components, models)

    def _need(self, owner, sec, what):
        if owner is None:
            self.fail(f"must follow a {what}", sec)

    def _package(self, comp, sec):
        for no, row in sec.rows:
            words = row.split()
            name = words[0].lower()
            if name not in ("r_pkg", "l_pkg", "c_pkg"):
                self.fail(f"expected R_pkg, L_pkg or C_pkg, got {words[0]!r}", sec, no)
            t = self.triple(words[1:], sec, no, words[0])
            if min(t.typ, t.min, t.max) < 0:
                self.fail(f"{words[0]} may not be negative", sec, no)
            setattr(comp, name, t)
        for name in ("r_pkg", "l_pkg", "c_pkg"):
            if getattr(comp, name) is None:
                self.fail(f"{name.upper()[0]}{name[1:]} is missing", sec)

    def _pins(self, comp, sec):
        head = [w.lower() for w in sec.arg.split()]
        if head[:2] != ["signal_name", "model_name"]:
            self.fail("the header must read 'signal_name model_name' (then optionally R_pin L_pin C_pin)", sec)
        extra = head[2:]
        if extra not in ([], ["r_pin", "l_pin", "c_pin"]):
            self.fail("optional columns are R_pin L_pin C_pin, all three", sec)
        for no, row in sec.rows:
            words = row.split()
            if len(words) != 3 + len(extra):
                self.fail(f"a pin row has {3 + len(extra)} entries (pin, signal, model"
                          f"{', R_pin, L_pin, C_pin' if extra else ''}), got {len(words)}", sec, no)
            rlc = None
            if extra:
                rlc = tuple(None if _is_na(w) else self.num(w, sec, no, n) for w, n in zip(words[3:], extra))
            if words[0] in comp.pins:
                self.fail(f"pin {words[0]!r} is listed twice", sec, no)
            comp.pins[words[0]] = (words[1], words[2], rlc)

    def _model_params(self, model, sec):
        for no, row in sec.rows:
            m = re.match(r"([A-Za-z_]+)\s*(=?)\s*(.*)$", row)
            if not m:
                self.fail(f"expected a sub-parameter, got {row[:60]!r}", sec, no)
            name, rest = m.group(1).lower(), m.group(3).strip()
            if name == "model_type":
                if rest.lower() not in KNOWN_TYPES:
                    self.fail(f"Model_type {rest!r} is not one the standard defines for this reader "
                              f"(known: {', '.join(sorted(KNOWN_TYPES))})", sec, no)
                model.model_type = rest
            elif name == "c_comp":
                t = self.triple(rest.split(), sec, no, "C_comp")
                if min(t.typ, t.min, t.max) < 0:
                    self.fail("C_comp may not be negative", sec, no)
                model.c_comp = t
            elif name in ("vinl", "vinh", "vmeas", "rref", "cref", "vref"):
                if not rest:
                    self.fail(f"{m.group(1)} has no value", sec, no)
                setattr(model, name, self.num(rest.split()[0], sec, no, m.group(1)))
            # other sub-parameters (Polarity, Enable, Vinh+, Cref_rising, ...) are not used

    def _ramp(self, sec):
        vals = {}
        r_load = 50.0   # the standard's default R_load when none is given (from memory)
        for no, row in sec.rows:
            words = row.replace("=", " ").split()
            name = words[0].lower()
            if name == "r_load":
                if len(words) != 2:
                    self.fail("R_load takes one value", sec, no)
                r_load = self.num(words[1], sec, no, "R_load")
                if not r_load > 0:
                    self.fail("R_load must be positive", sec, no)
            elif name in ("dv/dt_r", "dv/dt_f"):
                if len(words) != 4:
                    self.fail(f"{words[0]} takes typ, min and max entries (dV/dt each), got {len(words) - 1}",
                              sec, no)
                dv, dt = [], []
                for i, w in enumerate(words[1:]):
                    if _is_na(w):
                        if i == 0:
                            self.fail(f"{words[0]}: the typ entry may not be NA", sec, no)
                        dv.append(dv[0])
                        dt.append(dt[0])
                        continue
                    if w.count("/") != 1:
                        self.fail(f"{words[0]}: expected dV/dt such as 1.2/0.5n, got {w!r}", sec, no)
                    a, b = w.split("/")
                    dv.append(abs(self.num(a, sec, no, "dV")))
                    dt.append(self.num(b, sec, no, "dt"))
                    if not (dv[-1] > 0 and dt[-1] > 0):
                        self.fail(f"{words[0]}: dV and dt must be positive, got {w!r}", sec, no)
                vals[name] = (Triple(*dv), Triple(*dt))
            else:
                self.fail(f"expected dV/dt_r, dV/dt_f or R_load, got {words[0]!r}", sec, no)
        for name in ("dv/dt_r", "dv/dt_f"):
            if name not in vals:
                self.fail(f"{name.replace('dv', 'dV')} is missing", sec)
        return Ramp(*vals["dv/dt_r"], *vals["dv/dt_f"], r_load, sec.line)

    def _waveform(self, sec):
        fixture = {}
        rows = []
        for no, row in sec.rows:
            m = re.match(r"([A-Za-z_]+)\s*=\s*(\S+)\s*$", row)
            if m:
                name = m.group(1).lower()
                if name not in ("r_fixture", "v_fixture", "v_fixture_min", "v_fixture_max", "c_fixture",
                                "l_fixture", "r_dut", "l_dut", "c_dut"):
                    self.fail(f"unknown fixture parameter {m.group(1)!r}", sec, no)
                fixture[name] = self.num(m.group(2), sec, no, m.group(1))
            else:
                rows.append((no, row))
        for name in ("r_fixture", "v_fixture"):
            if name not in fixture:
                self.fail(f"{name.upper()[0]}{name[1:]} is missing", sec)
        if not fixture["r_fixture"] > 0:
            self.fail("R_fixture must be positive", sec)
        table = self.table(_Section(sec.keyword, sec.shown, sec.line, "", rows), "time")
        vf = fixture["v_fixture"]
        return Waveform(table, fixture["r_fixture"],
                        Triple(vf, fixture.get("v_fixture_min", vf), fixture.get("v_fixture_max", vf)),
                        fixture.get("c_fixture", 0.0), fixture.get("l_fixture", 0.0), fixture.get("r_dut", 0.0),
                        fixture.get("l_dut", 0.0), fixture.get("c_dut", 0.0))

    def _check_model(self, m):
        def fail(msg):
            raise IbisError(f"model {m.name!r}: {msg}", source=self.source, line=m.line, keyword="Model")
        if not m.model_type:
            fail("Model_type is missing")
        if m.c_comp is None and m.model_type.lower() not in ("series", "series_switch"):
            fail("C_comp is missing")
        if m.voltage_range is None:
            # the standard: without [Voltage Range], the reference keywords must be given (of the tables used)
            for name, shown in (("pullup", "Pullup"), ("pulldown", "Pulldown"), ("power_clamp", "POWER Clamp"),
                                ("gnd_clamp", "GND Clamp")):
                if getattr(m, name) is not None and getattr(m, f"{name}_ref") is None:
                    fail(f"[{shown}] needs [Voltage Range] or [{shown} Reference]")
        t = m.model_type.lower()
        if t in DRIVE_TYPES:
            if t.startswith("open_drain") or t.startswith("open_sink") or t.endswith("open_drain") \
                    or t.endswith("open_sink"):
                if m.pulldown is None:
                    fail(f"a {m.model_type} model needs [Pulldown]")
            elif t.endswith("open_source"):
                if m.pullup is None:
                    fail(f"a {m.model_type} model needs [Pullup]")
            elif m.pullup is None or m.pulldown is None:
                fail(f"a {m.model_type} model needs [Pullup] and [Pulldown]")
            if m.ramp is None:
                fail(f"a {m.model_type} model needs [Ramp]")
