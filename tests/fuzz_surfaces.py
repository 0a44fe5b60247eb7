"""Fuzz inputs and the rule each surface must keep (issue 13, item 5).

Shared by the bounded fuzz targets of the suite (tests/test_fuzz.py) and the long run outside
it (benchmarks/fuzz.py).  Three surfaces:

loader
    ``budget.loads`` on mutated and generated TOML (wrong types, huge/tiny/negative/NaN-like
    numbers, unit strings, missing and extra keys, odd names, nesting, tolerance tables,
    damaged text).  Allowed: a Design whose every value is finite, or a package error
    (:class:`budget.errors.BusBudgetError`) whose message names the file.
cli
    ``budget.cli.main`` in-process with generated argv and generated files (design files,
    values files, captures, logs).  Allowed: exit 0, 1 or 2; exit 2 with a message on
    stderr; never a traceback, never exit 3.  For a design that loads, ``check --nominal
    --json`` gives the verdict of the Python API.
capi
    the functions the C exports call (budget.capi, bound by :func:`bind_exports` exactly as
    the embedded runtime binds them, with real cffi buffers) with generated handles, paths,
    values, unit strings, NULL pointers and buffer sizes.  Allowed: the statuses of
    cexport/busbudget.h except BB_ERR_INTERNAL, with a message for every error status.

Each ``run_*`` function returns the outcome's kind (a short string, for counting) or raises
:class:`Defect` with what broke.  The strategies are ordinary hypothesis strategies.
"""
from __future__ import annotations

import contextlib
import io
import json
import math
import sys
import tempfile
import tomllib
from pathlib import Path

import numpy as np
from hypothesis import strategies as st

import budget
from budget.errors import BusBudgetError

ROOT = Path(__file__).resolve().parents[1]
SOURCE = "fuzz.toml"
SEED_FILES = [ROOT / "tests" / "designs" / n for n in
              ("robust.toml", "marginal_bus.toml", "stub_resonance.toml", "failing_overshoot.toml")] + \
             [ROOT / "budget" / "examples" / n for n in ("short_bus.toml", "backplane.toml")]
SEEDS = [tomllib.loads(p.read_text()) for p in SEED_FILES]
SEED_TEXTS = [p.read_text() for p in SEED_FILES]
MAX_MESSAGE = 2000      # characters of one error message (test_bad_inputs.py holds the same bound)


class Defect(Exception):
    """An outcome a surface must never give: ``kind`` names it, ``detail`` says what happened."""

    def __init__(self, kind: str, detail: str):
        self.kind = kind
        self.detail = detail
        super().__init__(f"{kind}: {detail}")


# ---------------------------------------------------------------------------
# values and TOML text

UNITS = ["ohm", "Mohm", "mohm", "kohm", "V", "mV", "uV", "pF", "nF", "F", "nH", "H", "ns", "ps", "s", "fs",
         "ns/m", "ps/mm", "ns/km", "m", "mm", "cm", "mil", "um", "km", "ohm/m", "%", "Hz", "A", "kg", "",
         "ohm ohm", "m/ns", "1/s", "degC", "dB"]
NUMBERS = ["0", "-0", "1", "-1", "50", "3.3", "1e-12", "1e-300", "5e-324", "1e308", "1.797e308", "1e309",
           "nan", "NaN", "inf", "-inf", "1_000", "0x10", "1/3", "9**9", "2e", ".5", "5.", "1,5", "١٢", " 7 "]
ODD_TEXT = ["", " ", "\x00", "R\x00X", "\x1b[31m", "\t", "\n", "U1", "n0", "trunk", "xcvr", "ü", "😀",
            "a" * 300, "lines.trunk.z0", "../../etc/passwd", "${HOME}", "%s%n", "'", '"']


def quantity_texts():
    """Quantity strings: a number and a unit from the pools, or odd text."""
    return st.one_of(st.builds(lambda n, u: f"{n} {u}".strip(), st.sampled_from(NUMBERS), st.sampled_from(UNITS)),
                     st.builds(lambda n, u: f"{n}{u}", st.sampled_from(NUMBERS), st.sampled_from(UNITS)),
                     st.sampled_from(ODD_TEXT), st.text(max_size=12))


def scalars():
    """TOML scalar values of every kind, biased to the hostile ones."""
    return st.one_of(
        quantity_texts(),
        st.integers(min_value=-2 ** 70, max_value=2 ** 70), st.sampled_from([0, 1, -1, 10 ** 400, -(10 ** 400)]),
        st.floats(allow_nan=True, allow_infinity=True), st.sampled_from([5e-324, 1.7976931348623157e308, -0.0]),
        st.booleans(),
    )


def values(depth: int = 2):
    """A TOML value: a scalar, or (up to ``depth`` levels) an array or inline table of values."""
    if depth <= 0:
        return scalars()
    inner = values(depth - 1)
    return st.one_of(scalars(), scalars(), st.lists(inner, max_size=3),
                     st.dictionaries(st.sampled_from(["r", "v", "c", "line", "length", "x", "min", "max", "z0"]) |
                                     st.text(max_size=6), inner, max_size=3))


def _key(k: str) -> str:
    return json.dumps(str(k), ensure_ascii=False)


def _value(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        if math.isnan(v):
            return "nan"
        if math.isinf(v):
            return "inf" if v > 0 else "-inf"
        return repr(v)
    if isinstance(v, str):
        return json.dumps(v, ensure_ascii=False)
    if isinstance(v, list):
        return "[" + ", ".join(_value(x) for x in v) + "]"
    if isinstance(v, dict):
        return "{ " + ", ".join(f"{_key(k)} = {_value(x)}" for k, x in v.items()) + " }"
    return json.dumps(str(v))


def to_toml(doc: dict) -> str:
    """A TOML text of ``doc``: plain keys first, then tables, then arrays of tables (one level deep)."""
    out = []
    for k, v in doc.items():
        if not isinstance(v, dict) and not (isinstance(v, list) and v and all(isinstance(x, dict) for x in v)):
            out.append(f"{_key(k)} = {_value(v)}")
    for k, v in doc.items():
        if isinstance(v, dict):
            plain = {a: b for a, b in v.items() if not isinstance(b, dict)}
            subs = {a: b for a, b in v.items() if isinstance(b, dict)}
            if plain or not subs:
                out.append(f"\n[{_key(k)}]")
                out += [f"{_key(a)} = {_value(b)}" for a, b in plain.items()]
            for a, b in subs.items():
                out.append(f"\n[{_key(k)}.{_key(a)}]")
                out += [f"{_key(c)} = {_value(d)}" for c, d in b.items()]
    for k, v in doc.items():
        if isinstance(v, list) and v and all(isinstance(x, dict) for x in v):
            for item in v:
                out.append(f"\n[[{_key(k)}]]")
                out += [f"{_key(a)} = {_value(b)}" for a, b in item.items()]
    return "\n".join(out) + "\n"


def _paths(doc, prefix=()):
    """Every (path tuple) to a value inside ``doc``, tables and arrays included."""
    out = []
    if isinstance(doc, dict):
        for k, v in doc.items():
            out.append(prefix + (k,))
            out += _paths(v, prefix + (k,))
    elif isinstance(doc, list):
        for i, v in enumerate(doc):
            out.append(prefix + (i,))
            out += _paths(v, prefix + (i,))
    return out


def _parent(doc, path):
    for p in path[:-1]:
        doc = doc[p]
    return doc


KEY_NAMES = ["z0", "delay", "er_eff", "r_dc", "length", "line", "from", "to", "name", "node", "part", "stub",
             "role", "v_high", "v_low", "r_high", "r_low", "c_pin", "l_pkg", "r_in", "vih", "vil", "v_max",
             "v_min", "ref_load", "v_meas", "type", "r", "v", "c", "r_up", "r_down", "v_up", "tap", "rise", "fall",
             "t_stop", "dt", "signaling", "crosstalk", "supply_noise", "settle_band", "min_margin", "geometry",
             "ibis", "extra"]


@st.composite
def design_texts(draw):
    """A design-file text: a bundled or test design with 1-4 mutations, sometimes damaged as text."""
    import copy

    doc = copy.deepcopy(draw(st.sampled_from(SEEDS)))
    for _ in range(draw(st.integers(1, 4))):
        paths = _paths(doc)
        op = draw(st.sampled_from(["set", "set", "set", "delete", "add", "tolerance", "duplicate", "rename"]))
        if op == "tolerance":
            tol = doc.setdefault("tolerances", {})
            if not isinstance(tol, dict):
                continue
            tol_paths = [p for p in (draw(st.sampled_from(_param_paths(doc))) for _ in range(1))]
            key = draw(st.sampled_from(tol_paths + ["nowhere.x", "lines", "tap.*.length", ""]))
            tol[key] = draw(st.one_of(quantity_texts(), st.lists(quantity_texts(), min_size=0, max_size=3),
                                      scalars()))
            continue
        if not paths:
            break
        path = draw(st.sampled_from(paths))
        parent = _parent(doc, path)
        last = path[-1]
        if op == "set":
            parent[last] = draw(values())
        elif op == "delete":
            del parent[last]
        elif op == "add" and isinstance(parent, dict):
            parent[draw(st.sampled_from(KEY_NAMES) | st.sampled_from(ODD_TEXT))] = draw(values())
        elif op == "duplicate" and isinstance(parent, list):
            parent.append(copy.deepcopy(parent[last]))
        elif op == "rename" and isinstance(parent, dict):
            v = parent.pop(last)
            parent[draw(st.sampled_from(KEY_NAMES) | st.sampled_from(ODD_TEXT))] = v
    text = to_toml(doc)
    damage = draw(st.sampled_from(["none"] * 6 + ["truncate", "insert", "nest"]))
    if damage == "truncate":
        text = text[:draw(st.integers(0, len(text)))]
    elif damage == "insert":
        i = draw(st.integers(0, len(text)))
        text = text[:i] + draw(st.sampled_from(["[", "]", "=", '"', "\n[[tap]]\n", "\x00", "\\u", "{", "#"])) + text[i:]
    elif damage == "nest":
        n = draw(st.sampled_from([10, 100, 1000, 20000]))
        text += "\n[budget.extra]\nx = " + "[" * n + "]" * n + "\n"
    return text


def _param_paths(doc) -> list:
    """Dotted parameter paths a design has (for tolerances and values), from the seed's tables."""
    out = []
    for name, line in (doc.get("lines") or {}).items() if isinstance(doc.get("lines"), dict) else []:
        if isinstance(line, dict):
            out += [f"lines.{name}.{k}" for k in line]
    for name, part in (doc.get("parts") or {}).items() if isinstance(doc.get("parts"), dict) else []:
        if isinstance(part, dict):
            out += [f"parts.{name}.{k}" for k in part if k != "role"]
    segs = doc.get("segment")
    if isinstance(segs, list):
        out += [f"segment.{i}.length" for i in range(len(segs))]
    return out or ["lines.l.z0"]


def run_loader(text: str) -> str:
    """Load ``text``; the outcome kind, or Defect."""
    try:
        design = budget.loads(text, source=SOURCE)
    except BusBudgetError as exc:
        msg = str(exc)
        if SOURCE not in msg:
            raise Defect("message-without-file", msg[:400]) from None
        if len(msg) > MAX_MESSAGE:
            raise Defect("message-too-long", f"{len(msg)} characters: {msg[:200]}") from None
        table = getattr(exc, "table", None)
        return f"refused {type(exc).__name__}" + (f" [{str(table).split('.')[0]}]" if table else "")
    except RecursionError as exc:
        raise Defect("exception", f"RecursionError: {exc}") from None
    except Exception as exc:   # anything else is a defect
        raise Defect("exception", f"{type(exc).__name__}: {exc}"[:400]) from None
    for path, v in design.params.items():
        a = np.asarray(v, dtype=float)
        if not np.all(np.isfinite(a)):
            raise Defect("non-finite-value-loaded", f"{path} = {v!r}")
    return "loaded"


# ---------------------------------------------------------------------------
# the command line

CLI_COMMANDS = ["check", "check", "check", "waves", "judge", "correlate", "tdr", "estimate", "bounce", "line",
                "log", "examples"]
JUNK = ["", "-", "--", "x", "1", "0", "-1", "1e308", "nan", "inf", "9**9", "5 ps", "50 ohm", "1 V", "10%",
        "1e-30 s", "100000000000", "\x00", "😀", "--json", "rise", "fall", "TX", "RX", "U1", "a=b", "=",
        "lines.l.z0=52 ohm", "lines.l.z0", "--set", "/dev/null", "/", "example:nowhere", "example:short_bus"]
QUANTITY_OPTIONS = {"--dt": ["5 ps", "1 ns", "0 s", "-1 ps", "1 fs", "1e-3", "nan", "9**9 s", "5 V"],
                    "--t-stop": ["40 ns", "1 ns", "1 s", "0", "-5 ns", "1e300 s", "inf"],
                    "--source-r": ["50 ohm", "50", "0", "-50", "1e-300", "50 V", "inf"],
                    "--emf": ["1 V", "250 mV", "0", "-1", "1 ohm", "1e308"],
                    "--delay": ["6.7 ns/m", "0", "5 ns/km", "1e9"], "--er-eff": ["4", "0.5", "1", "nan"],
                    "--rise": ["100 ps", "0", "1 s", "-1 ns"], "--t0": ["0 s", "-1 ns", "1 s", "nan"],
                    "--cell": ["100 ps", "1 fs", "1 s"], "--t-edge": ["0 s", "1 ns", "-1 s", "1e300 s"],
                    "--guardband": ["10 mV", "0", "-1 V", "1e308 V"], "--noise": ["5 mV", "0", "-1", "1 kV"],
                    "--level-tolerance": ["3%", "0%", "-5%", "1e9", "x"],
                    "--voltage-tolerance": ["5%", "200%", "0"], "--time-tolerance": ["10%", "-1%"],
                    "--monte-carlo": ["0", "1", "2", "7", "-1", "1.5", "1000000000000"],
                    "--seed": ["0", "1", "-1", "99999999999999999999", "x"],
                    "--search-generations": ["1", "2", "0", "-3"],
                    "--max-corners": ["1", "2", "4096", "0", "99999999999999"],
                    "-n": ["1", "6", "0", "100000000000"], "--step": ["1 V", "0", "x", "1 ohm"]}
NEVER = {"--allow-long", "--help", "-h", "--version"}   # --allow-long lifts the time bound the fuzz relies on


def _parser_specs():
    """{command: [(option strings, action)]} of the real parser."""
    import argparse

    from budget.cli import build_parser

    parser = build_parser()
    sub = next(a for a in parser._actions if isinstance(a, argparse._SubParsersAction))
    return {name: [a for a in p._actions if not isinstance(a, argparse._HelpAction)]
            for name, p in sub.choices.items()}


SPECS = _parser_specs()


@st.composite
def cli_cases(draw):
    """(command line with FILE placeholders, files {placeholder: text})."""
    cmd = draw(st.sampled_from(CLI_COMMANDS))
    files = {"@design": draw(st.one_of(st.sampled_from(SEED_TEXTS), st.sampled_from(SEED_TEXTS), design_texts())),
             "@values": draw(values_texts()), "@capture": draw(capture_texts()), "@log": draw(log_texts())}
    argv = [cmd]
    for a in SPECS[cmd]:
        if a.option_strings:
            continue   # positionals first
        if a.dest == "design":
            argv.append(draw(st.sampled_from(["@design"] * 8 + ["example:short_bus", "@missing", "@dir"])))
        elif a.dest == "file":
            argv.append(draw(st.sampled_from(["@capture", "@log", "@missing"])) if cmd == "tdr" or cmd == "log"
                        else "@capture")
        elif a.dest == "kind":
            argv.append(draw(st.sampled_from(["microstrip", "stripline", "coax", "two_wire", "edge_coupled_microstrip",
                                              "x"])))
        elif a.dest == "dims":
            argv += draw(st.lists(st.builds(lambda k, v: f"{k}={v}", st.sampled_from(["w", "h", "t", "er", "b", "d",
                                                                                     "D", "s", "x"]),
                                            quantity_texts()), max_size=6))
        elif a.dest in ("rs", "z0", "rl"):
            argv.append(draw(st.sampled_from(["50", "25 ohm", "open", "0", "-5", "inf", "nan", "1e308", "x"])))
    options = [a for a in SPECS[cmd] if a.option_strings and not (set(a.option_strings) & NEVER)]
    chosen = draw(st.lists(st.sampled_from(options), max_size=5, unique_by=id)) if options else []
    if cmd == "check" and draw(st.booleans()):
        argv.append("--nominal")
    for a in chosen:
        opt = a.option_strings[-1]
        if a.nargs == 0:
            argv.append(opt)
            continue
        if opt in QUANTITY_OPTIONS:
            val = draw(st.sampled_from(QUANTITY_OPTIONS[opt]) | st.sampled_from(JUNK))
        elif a.choices:
            val = draw(st.sampled_from(list(a.choices)) | st.sampled_from(JUNK))
        elif opt == "--values":
            val = draw(st.sampled_from(["@values", "@values", "@missing", "@dir", "@capture"]))
        elif opt == "--capture":
            val = draw(st.sampled_from(["@capture", "@capture", "@missing", "@values"]))
        elif opt in ("--csv", "--out", "--log"):
            val = draw(st.sampled_from(["@out", "@out", "-", "@dir", "@missing-dir/x"] + (["@log"] if opt == "--log" else [])))
        elif opt == "--set":
            val = draw(st.builds(lambda p, v: f"{p}={v}", st.sampled_from(_param_paths(SEEDS[0]) + ["x.y", "", "bus.name"]),
                                 quantity_texts()))
        elif opt == "--design":
            val = draw(st.sampled_from(["@design", "@design", "example:short-bus", "@missing", "@capture"]))
        elif opt == "--port":
            val = draw(st.sampled_from(["TX", "RX", "near", "far", "U1", "CTRL", "", "nobody"]))
        elif opt == "--values-out":
            val = draw(st.sampled_from(["@out", "-", "@dir", "@missing-dir/x"]))
        elif opt in ("--driver", "--receiver"):
            val = draw(st.sampled_from(["TX", "RX", "U1", "U4", "", "nobody"]))
        elif opt == "--channel":
            val = draw(st.sampled_from(["RX=RX", "CH1=RX", "CH1=TX", "x", "=RX", "CH9=RX", "CH1", "RX"]))
        elif opt == "--serial":
            val = draw(st.sampled_from(["SN1", "", " ", "\x00"]))
        else:
            val = draw(st.sampled_from(JUNK))
        argv += [opt, val]
    if draw(st.integers(0, 9)) == 0:
        argv.insert(draw(st.integers(1, len(argv))), draw(st.sampled_from(JUNK)))
    return argv, files


@st.composite
def values_texts(draw):
    """A values file: TOML "path" = "value" lines, or CSV path,value (sometimes damaged)."""
    paths = _param_paths(SEEDS[0]) + ["nowhere.z0", "bus.name", "lines.l", ""]
    rows = draw(st.lists(st.tuples(st.sampled_from(paths), quantity_texts()), max_size=4))
    if draw(st.booleans()):
        return "".join(f"{_key(p)} = {_value(v)}\n" for p, v in rows)
    head = draw(st.sampled_from(["path,value\n", "Path,Value,note\n", "value,path\n", ""]))
    return head + "".join(f"{p},{v}\n" for p, v in rows)


_ENGINE = {}


def _engine_edge():
    """The robust design's RX and TX pin waveforms (rising edge), computed once."""
    if not _ENGINE:
        d = budget.loads(SEED_TEXTS[0])
        w = budget.simulate(d, "TX", "rise")
        _ENGINE.update(t=w.t, rx=w["RX"], tx=w["TX"])
    return _ENGINE


@st.composite
def capture_texts(draw):
    """A capture CSV: the robust design's edge as a bench would export it, with damage, or junk."""
    kind = draw(st.sampled_from(["engine", "engine", "engine", "junk"]))
    if kind == "junk":
        return draw(st.sampled_from(["", "t\n", "t,RX\n1,2\n", "t,RX\n0,0\n0,1\n", "a;b\n1;x\n", "\x00\x00",
                                     "Time (ns),RX (mV)\n0,0\n1,nan\n", "t,RX,RX\n0,1,2\n1,2,3\n"]))
    e = _engine_edge()
    step = draw(st.sampled_from([1, 2, 7]))
    t, rx, tx = e["t"][::step], e["rx"][::step], e["tx"][::step]
    shift = draw(st.sampled_from([0.0, 1e-9, -1e-9]))
    pre = draw(st.sampled_from([0, 5]))
    if pre:
        dt = t[1] - t[0]
        t = np.concatenate([t[0] - dt * np.arange(pre, 0, -1), t])
        rx = np.concatenate([np.full(pre, rx[0]), rx])
        tx = np.concatenate([np.full(pre, tx[0]), tx])
    header = draw(st.sampled_from(["t,RX", "Time (ns),RX (mV)", "t,RX,TX", "Time [s],CH1 [V],CH2 [V]", "t,X"]))
    sep = draw(st.sampled_from([",", ";", "\t"]))
    scale_t = 1e9 if "(ns)" in header else 1.0
    scale_v = 1e3 if "(mV)" in header else 1.0
    ncol = header.count(",") + 1
    rows = []
    for a, b, c in zip(t + shift, rx, tx):
        cols = [f"{a * scale_t:.9g}", f"{b * scale_v:.9g}", f"{c * scale_v:.9g}"][:ncol]
        rows.append(sep.join(cols))
    damage = draw(st.sampled_from(["none"] * 4 + ["nan", "text", "repeat", "reverse", "cut"]))
    if damage == "nan" and rows:
        rows[len(rows) // 2] = sep.join(["nan"] * ncol)
    elif damage == "text" and rows:
        rows[len(rows) // 3] = sep.join(["x"] * ncol)
    elif damage == "repeat" and len(rows) > 3:
        rows.insert(3, rows[3])
    elif damage == "reverse":
        rows = rows[::-1]
    elif damage == "cut":
        rows = rows[:len(rows) // 10]
    comment = draw(st.sampled_from(["", "Fictional bench export\n"]))
    return comment + header.replace(",", sep) + "\n" + "\n".join(rows) + "\n"


def log_texts():
    """A run log: records, a torn tail, junk."""
    good = json.dumps({"schema": "busbudget.record/1", "time": "2026-01-01T00:00:00Z", "serial": "SN1",
                       "command": "check", "verdict": "pass"})
    return st.lists(st.sampled_from([good, good[:20], "{}", "[]", "null", "x", "", '{"schema": 5}', "\x00"]),
                    max_size=4).map(lambda lines: "\n".join(lines) + ("\n" if lines else ""))


def _place(argv, files, tmp: Path):
    out = []
    for a in argv:
        if a in files:
            p = tmp / {"@design": "design.toml", "@values": "values.toml" if files["@values"].lstrip().startswith('"')
                       else "values.csv", "@capture": "capture.csv", "@log": "runs.log"}[a]
            p.write_text(files[a])
            out.append(str(p))
        elif a == "@missing":
            out.append(str(tmp / "missing.toml"))
        elif a == "@dir":
            out.append(str(tmp))
        elif a == "@out":
            out.append(str(tmp / "out.txt"))
        elif a.startswith("@missing-dir/"):
            out.append(str(tmp / "no" / "such" / "dir" / "x"))
        else:
            out.append(a)
    return out


def run_main(argv):
    """(exit code, stdout, stderr) of ``budget.cli.main(argv)`` in this process."""
    from budget.cli import main

    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        try:
            code = main(argv)
        except SystemExit as exc:   # pragma: no cover - main never raises it; a defect if it does
            raise Defect("system-exit", f"main raised SystemExit({exc.code})") from None
    return code, out.getvalue(), err.getvalue()


def run_cli(argv, files) -> str:
    """Run one generated command line; the outcome kind, or Defect."""
    with tempfile.TemporaryDirectory(prefix="bbfuzz-") as tmp:
        real = _place(argv, files, Path(tmp))
        try:
            code, out, err = run_main(real)
        except Defect:
            raise
        except BaseException as exc:   # main must catch everything the package can raise
            if isinstance(exc, KeyboardInterrupt):
                raise
            raise Defect("exception-escaped-main", f"{type(exc).__name__}: {exc}"[:400]) from None
        if code not in (0, 1, 2):
            raise Defect(f"exit-{code}", err.strip()[-400:])
        if "Traceback" in err or "Traceback" in out:
            raise Defect("traceback", err[-400:])
        if code == 2 and not err.strip():
            raise Defect("exit-2-without-message", "")
        if code == 2 and len(err) > 3 * MAX_MESSAGE:
            raise Defect("message-too-long", f"{len(err)} characters: {err[:200]}")
        if argv[0] == "check" and "--json" in real and code in (0, 1) and "--out" not in real:
            doc = json.loads(out)
            if doc["verdict"] != ("pass" if code == 0 else "fail"):
                raise Defect("verdict-vs-exit-code", f"verdict {doc['verdict']} with exit {code}")
        return f"{argv[0]} exit {code}"


def run_verdict(text: str) -> str:
    """For a design text that loads: ``check --nominal --json`` gives the Python API's verdict and worst case."""
    from budget.check import check

    try:
        design = budget.loads(text, source=SOURCE)
    except BusBudgetError:
        return "not a design"
    try:
        report = check(design, nominal=True)
    except BusBudgetError:
        api = None
    else:
        api = report.to_json()
    with tempfile.TemporaryDirectory(prefix="bbfuzz-") as tmp:
        p = Path(tmp) / SOURCE
        p.write_text(text)
        code, out, err = run_main(["check", str(p), "--nominal", "--json", "--no-progress"])
    if api is None:
        if code != 2:
            raise Defect("api-refused-cli-did-not", f"exit {code}: {err[-300:]}")
        return "both refused"
    if code not in (0, 1):
        raise Defect("cli-refused-api-did-not", f"exit {code}: {err[-300:]}")
    doc = json.loads(out)
    if doc["verdict"] != api["verdict"] or doc["worst"] != api["worst"]:
        raise Defect("verdict-differs", f"cli {doc['verdict']} {doc['worst']} vs api {api['verdict']} {api['worst']}")
    if (code == 0) != report.passed:
        raise Defect("exit-code-vs-verdict", f"exit {code}, api passed={report.passed}")
    return f"same verdict ({api['verdict']})"


# ---------------------------------------------------------------------------
# the C API's Python face

HEADER = ROOT / "cexport" / "busbudget.h"


class _Recorder:
    """Stands in for the compiled module's ffi: real cffi objects, but def_extern records the exports."""

    def __init__(self, ffi):
        self._ffi = ffi
        self.exports = {}

    def __getattr__(self, name):
        return getattr(self._ffi, name)

    def def_extern(self, name, error):
        def register(fn):
            self.exports[name] = fn
            return fn
        return register


_BOUND = {}


def bind_exports():
    """(ffi, lib, exports): budget.capi bound as the embedded runtime binds it, to an in-line cffi FFI."""
    if not _BOUND:
        import cffi

        sys.path.insert(0, str(ROOT / "cexport"))
        try:
            from build import api_declarations
        finally:
            sys.path.pop(0)
        from budget import capi

        ffi = cffi.FFI()
        ffi.cdef(api_declarations(HEADER.read_text()))
        lib = ffi.dlopen(None)      # only the header's constants are used
        rec = _Recorder(ffi)
        capi.bind(rec, lib)
        codes = {getattr(lib, n): n for n in capi.STATUS_NAMES}
        _BOUND.update(ffi=ffi, lib=lib, exports=rec.exports, codes=codes)
    return _BOUND["ffi"], _BOUND["lib"], _BOUND["exports"]


C_DOUBLES = [0.0, -0.0, 1.0, -1.0, 50.0, 52.1, 3.3e-12, 1e-12, 1e-300, 5e-324, 1e300, 1.7976931348623157e308,
             math.inf, -math.inf, math.nan, 0.1, 10.0, 2e-9]
C_TEXTS = [b"lines.l.z0", b"segment.0.length", b"parts.dst.c_pin", b"parts.src.r_high", b"termination.0.r",
           b"edge.rise", b"bus.t_stop", b"nowhere", b"", b"lines.l", b"lines.l.z0.x", b"\xff\xfe", b"TX", b"RX",
           b"52 ohm", b"3 pF", b"1e308 ohm", b"nan ohm", b"ohm", b"9**9 ohm", b"-5 ohm", b"5 ns/km", b"10%",
           b"a" * 300, b"\x1b[31m"]


@st.composite
def capi_calls(draw):
    """A sequence of C calls: (name, arguments) with handle placeholders 'H' (open), 'C' (closed)."""
    seeds = st.sampled_from([t.encode() for t in SEED_TEXTS[:4]])
    calls = [("bb_open_text", (draw(st.one_of(seeds, seeds, seeds,
                                              design_texts().map(lambda s: s.encode("utf-8", "surrogatepass")),
                                              st.sampled_from([b"", b"\xff\xfe", b"[bus]\n"]))),))]
    handles = st.sampled_from(["H", "H", "H", "H", "C", 0, -1, 2 ** 31 - 1])
    sizes = st.sampled_from([0, 1, 2, 8, 64, 4096])
    texts = st.one_of(st.sampled_from(C_TEXTS), st.sampled_from(C_TEXTS), st.sampled_from(C_TEXTS), st.none())
    pointer = st.sampled_from([True, True, True, False])   # False: pass NULL
    for _ in range(draw(st.integers(1, 8))):
        name = draw(st.sampled_from(
            ["bb_set", "bb_set", "bb_set_text", "bb_set_text", "bb_get", "bb_param_count", "bb_param_name",
             "bb_tap_count", "bb_tap_name", "bb_check", "bb_check", "bb_out_of_box_count", "bb_out_of_box",
             "bb_receiver_margins", "bb_margin_table", "bb_waveform", "bb_batch", "bb_last_error", "bb_version",
             "bb_runtime_info", "bb_close", "bb_open_file"]))
        h = draw(handles)
        if name == "bb_set":
            args = (h, draw(texts), draw(st.sampled_from(C_DOUBLES) | st.floats()))
        elif name == "bb_set_text":
            args = (h, draw(texts), draw(texts))
        elif name == "bb_get":
            args = (h, draw(texts), draw(pointer))
        elif name in ("bb_param_count", "bb_tap_count", "bb_out_of_box_count", "bb_check"):
            args = (h, draw(pointer))
        elif name in ("bb_param_name", "bb_tap_name"):
            args = (h, draw(st.sampled_from([0, 1, 2, -1, 10 ** 6, 2 ** 31 - 1])), draw(sizes), draw(pointer))
        elif name == "bb_out_of_box":
            args = (h, draw(st.sampled_from([0, -1, 5])), draw(sizes), draw(pointer))
        elif name in ("bb_receiver_margins", "bb_margin_table"):
            args = (h, draw(st.sampled_from(["right", 0, 1, 2, 3, 8, 100])), draw(pointer))
        elif name == "bb_waveform":
            args = (h, draw(texts), draw(st.sampled_from([0, 1, 2, -1])), draw(texts),
                    draw(st.sampled_from([0, 1, 10, 100000])), draw(pointer))
        elif name == "bb_batch":
            n_paths = draw(st.integers(0, 3))
            n_var = draw(st.integers(0, 4))
            args = (h, [draw(texts) for _ in range(n_paths)],
                    [draw(st.sampled_from(C_DOUBLES)) for _ in range(n_paths * n_var)], n_var, draw(pointer))
        elif name in ("bb_last_error", "bb_version", "bb_runtime_info"):
            args = (draw(sizes), draw(pointer))
        elif name == "bb_open_file":
            args = (draw(st.sampled_from([str(SEED_FILES[0]).encode(), b"/nonexistent.toml", b"/", b"/dev/zero",
                                          b"", str(ROOT).encode(), None])),)
        else:   # bb_close
            args = (h,)
        calls.append((name, args))
    return calls


def run_capi(calls) -> list:
    """Run a call sequence through the bound exports; the status names, or Defect."""
    ffi, lib, ex = bind_exports()
    codes = _BOUND["codes"]
    NULL = ffi.NULL
    allowed = set(codes.values()) - {"BB_NOT_STARTED", "BB_ERR_INTERNAL"}
    opened, closed = [], []
    statuses = []

    def c_text(b):
        return NULL if b is None else ffi.new("char[]", b)

    def handle(h):
        if h == "H":
            return opened[-1] if opened else 0
        if h == "C":
            return closed[-1] if closed else -7
        return h

    try:
        for name, args in calls:
            if name == "bb_open_text":
                out = ffi.new("bb_handle *")
                st_ = ex[name](c_text(args[0]), out)
                if codes[st_] == "BB_OK":
                    opened.append(out[0])
            elif name == "bb_open_file":
                out = ffi.new("bb_handle *")
                st_ = ex[name](c_text(args[0]), out)
                if codes[st_] == "BB_OK":
                    opened.append(out[0])
            elif name == "bb_close":
                h = handle(args[0])
                st_ = ex[name](h)
                if codes[st_] == "BB_OK":
                    opened = [x for x in opened if x != h]
                    closed.append(h)
            elif name == "bb_set":
                st_ = ex[name](handle(args[0]), c_text(args[1]), args[2])
            elif name == "bb_set_text":
                st_ = ex[name](handle(args[0]), c_text(args[1]), c_text(args[2]))
            elif name == "bb_get":
                st_ = ex[name](handle(args[0]), c_text(args[1]), ffi.new("double *") if args[2] else NULL)
            elif name in ("bb_param_count", "bb_tap_count", "bb_out_of_box_count"):
                st_ = ex[name](handle(args[0]), ffi.new("int *") if args[1] else NULL)
            elif name == "bb_check":
                st_ = ex[name](handle(args[0]), ffi.new("bb_result *") if args[1] else NULL)
            elif name in ("bb_param_name", "bb_tap_name"):
                size = args[2]
                buf = ffi.new("char[]", max(size, 1)) if args[3] else NULL
                st_ = ex[name](handle(args[0]), args[1], buf, size)
            elif name == "bb_out_of_box":
                size = args[2]
                buf = ffi.new("char[]", max(size, 1)) if args[3] else NULL
                st_ = ex[name](handle(args[0]), args[1], buf, size, ffi.new("double *"), NULL, ffi.new("double *"))
            elif name in ("bb_receiver_margins", "bb_margin_table"):
                h = handle(args[0])
                count = args[1]
                if count == "right":
                    n = ffi.new("int *")
                    ex["bb_tap_count"](h, n)
                    count = n[0] if name == "bb_receiver_margins" else 2 * n[0] * n[0]
                buf = ffi.new("double[]", max(count, 1)) if args[2] else NULL
                st_ = ex[name](h, buf, count)
            elif name == "bb_waveform":
                cap = args[4]
                t = ffi.new("double[]", max(cap, 1)) if args[5] else NULL
                v = ffi.new("double[]", max(cap, 1)) if args[5] else NULL
                n = ffi.new("size_t *")
                st_ = ex[name](handle(args[0]), c_text(args[1]), args[2], c_text(args[3]), t, v, cap, n)
            elif name == "bb_batch":
                paths, vals, n_var, with_passed = args[1], args[2], args[3], args[4]
                keep = [c_text(p) for p in paths]
                arr = ffi.new("const char *[]", keep) if keep else ffi.new("const char *[]", 1)
                values = ffi.new("double[]", vals) if vals else ffi.new("double[]", 1)
                worst = ffi.new("double[]", max(n_var, 1))
                passed = ffi.new("int[]", max(n_var, 1)) if with_passed else NULL
                st_ = ex[name](handle(args[0]), len(paths), arr, n_var, values, worst, passed)
            elif name in ("bb_last_error", "bb_runtime_info"):
                size = args[0]
                buf = ffi.new("char[]", max(size, 1)) if args[1] else NULL
                st_ = ex[name](buf, size)
            elif name == "bb_version":
                size = args[0]
                buf = ffi.new("char[]", max(size, 1)) if args[1] else NULL
                st_ = ex[name](ffi.new("int *"), buf, size)
            else:
                raise AssertionError(name)
            status = codes.get(st_, f"undocumented {st_}")
            if status not in allowed:
                msg = ffi.new("char[]", 4096)
                ex["bb_last_error"](msg, 4096)
                raise Defect(status, f"{name}{args!r:.300}: {ffi.string(msg).decode('utf-8', 'replace')[:400]}")
            if status not in ("BB_OK", "BB_FAIL") and name != "bb_last_error":
                msg = ffi.new("char[]", 8192)
                ex["bb_last_error"](msg, 8192)
                if status != "BB_ERR_NULL" and not ffi.string(msg):
                    raise Defect("error-without-message", f"{name} -> {status}")
            statuses.append(f"{name} {status}")
    finally:
        for h in opened:
            ex["bb_close"](h)
    return statuses
