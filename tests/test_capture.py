"""Captured waveforms: bench / oscilloscope CSV dialects read back to the engine's numbers;
every bad capture refused with the file, line and column named."""
from __future__ import annotations

import numpy as np
import pytest

import budget
from budget import capture as cap
from budget.capture import Capture, read_capture
from budget.errors import BusBudgetError, CaptureError


@pytest.fixture(scope="module")
def waves():
    """Engine pin waveforms of the bundled short bus, controller driving a rising edge."""
    return budget.simulate(budget.example("short-bus"), "CTRL", "rise")


def _write(path, text, encoding="utf-8"):
    path.write_bytes(text.encode(encoding))
    return path


def test_comma_si_dialect_reads_back_the_engine_waveforms(tmp_path, waves):
    rows = "\n".join(",".join(f"{x:.9e}" for x in (t, *v)) for t, v in zip(waves.t, waves.v))
    f = _write(tmp_path / "plain.csv", "t," + ",".join(waves.taps) + "\n" + rows + "\n")
    c = read_capture(f)
    assert c.names == waves.taps and c.time_name == "t"
    np.testing.assert_allclose(c.t, waves.t, rtol=1e-8, atol=1e-20)
    for k, tap in enumerate(waves.taps):
        np.testing.assert_allclose(c[tap], waves.v[:, k], rtol=1e-8, atol=1e-12)


def test_semicolon_decimal_comma_dialect_with_comment_lines_and_scaled_units(tmp_path, waves):
    lines = ["Fictional bench scope, unit 7", "Sample interval;see header", "",
             "Time (ns);MEM3 (mV);MEM1 [V]"]
    for t, v3, v1 in zip(waves.t, waves["MEM3"], waves["MEM1"]):
        lines.append(f"{t * 1e9:.6f};{v3 * 1e3:.4f};{v1:.7f}".replace(".", ","))
    c = read_capture(_write(tmp_path / "scope.csv", "\n".join(lines) + "\n"))
    assert c.names == ("MEM3", "MEM1")
    assert c.units == {"Time": "ns", "MEM3": "mV", "MEM1": "V"}
    assert any("decimal commas" in n for n in c.notes)
    np.testing.assert_allclose(c.t, waves.t, rtol=0, atol=0.51e-15)          # printed to 1e-6 ns
    np.testing.assert_allclose(c["MEM3"], waves["MEM3"], rtol=0, atol=0.51e-7)  # printed to 1e-4 mV
    np.testing.assert_allclose(c["MEM1"], waves["MEM1"], rtol=0, atol=0.51e-7)


def test_tab_dialect_with_a_units_line(tmp_path, waves):
    body = "\n".join(f"{t * 1e6:.10g}\t{v * 1e3:.10g}" for t, v in zip(waves.t, waves["MEM2"]))
    c = read_capture(_write(tmp_path / "tab.txt", "time\tMEM2\n[us]\t(mV)\n" + body + "\n"))
    assert c.names == ("MEM2",) and c.units == {"time": "us", "MEM2": "mV"}
    np.testing.assert_allclose(c.t, waves.t, rtol=1e-9, atol=1e-21)
    np.testing.assert_allclose(c["MEM2"], waves["MEM2"], rtol=1e-9, atol=1e-12)


def test_quoted_cells_crlf_trailing_delimiter_and_bare_units(tmp_path, waves):
    body = "".join(f"{t:.9e},{v:.9e},\r\n" for t, v in zip(waves.t, waves["MEM1"]))
    c = read_capture(_write(tmp_path / "q.csv", '"s","V",\r\n' + body))
    assert c.names == ("CH1",) and c.units == {"time": "s", "CH1": "V"}
    np.testing.assert_allclose(c["CH1"], waves["MEM1"], rtol=1e-8, atol=1e-12)


def test_latin1_micro_sign(tmp_path, waves):
    body = "".join(f"{t * 1e6:.9f};{v:.6f}\n".replace(".", ",") for t, v in zip(waves.t[:50], waves["MEM1"][:50]))
    c = read_capture(_write(tmp_path / "l1.csv", "Zeit (µs);Spannung (V)\n" + body, encoding="latin-1"))
    np.testing.assert_allclose(c.t, waves.t[:50], rtol=0, atol=0.51e-15)


def test_text_argument_and_arrays(waves):
    c = read_capture("t,A\n0,1\n1e-9,2\n")
    assert c.source == "<text>" and list(c["A"]) == [1.0, 2.0]
    a = Capture.from_arrays(waves.t, {"MEM3": waves["MEM3"]})
    assert a.names == ("MEM3",) and np.array_equal(a.t, waves.t) and a.t is not waves.t
    with pytest.raises(CaptureError, match="no channel 'X'"):
        a["X"]


# -- bad captures: one table --------------------------------------------------------------

_CH65 = "t," + ",".join(f"C{k}" for k in range(65)) + "\n" + "0," + ",".join("1" for _ in range(65)) + "\n"
BAD_CAPTURES = [
    # id, file text, expected text in the message, line (None: not named)
    ("empty", "", "empty", None),
    ("blank-lines-only", "\n \n\n", "empty", None),
    ("one-column", "Time (s)\n0\n1e-9\n", "only one column", None),
    ("header-only", "# bench\nt,CH1\n", "no data rows after the header (line 2)", None),
    ("no-header", "0,1\n1e-9,2\n", "no header line", None),
    ("one-sample", "t,CH1\n0,1\n", "need at least 2", None),
    ("time-goes-back", "t,CH1\n0,1\n2e-9,2\n1e-9,3\n", "goes back", 4),
    ("time-repeats", "t,CH1\n0,1\n1e-9,2\n1e-9,3\n", "repeats", 4),
    ("nan-cell", "t,CH1\n0,1\n1e-9,NaN\n", "'NaN' is not a finite number", 3),
    ("inf-cell", "t,CH1\n0,inf\n1e-9,1\n", "not a finite number", 2),
    ("empty-cell", "t,CH1,CH2\n0,1,2\n1e-9,,3\n", "empty cell", 3),
    ("text-in-number-column", "t,CH1\n0,1\n1e-9,high\n", "'high' is not a number", 3),
    ("underscore-number", "t,CH1\n0,1\n1e-9,1_0\n", "'1_0' is not a number", 3),
    ("ragged-row", "t,CH1\n0,1\n1e-9,2,3\n", "3 cells where the header has 2", 3),
    ("mixed-decimal-signs", "t;CH1\n0;1,5\n1e-9;2.5\n", "decimal commas and decimal points", 3),
    ("unknown-unit", "t,CH1 (zorks)\n0,1\n1e-9,2\n", "unknown unit 'zorks'", 1),
    ("current-channel", "t,Probe (A)\n0,1\n1e-9,2\n", "must be in a voltage", 1),
    ("impedance-channel", "t,Z (ohm)\n0,50\n1e-9,50\n", "must be in a voltage", 1),
    ("time-in-volts", "Time (V),CH1\n0,1\n1,2\n", "the time column must be in a time", 1),
    ("channel-in-seconds", "t,CH1 (ns)\n0,1\n1e-9,2\n", "is a time, but a channel", 1),
    ("two-units", "t,CH1 (mV) [V]\n0,1\n1e-9,2\n", "two units", 1),
    ("units-line-disagrees", "t (ns),CH1 (mV)\n(s),(V)\n0,1\n1,2\n", "units line says", 2),
    ("duplicate-names", "t,CH1,CH1\n0,1,2\n1e-9,2,3\n", "more than once", 1),
    ("too-many-channels", _CH65, "more than the 64 allowed", 1),
]


@pytest.mark.parametrize("text,needle,line", [b[1:] for b in BAD_CAPTURES], ids=[b[0] for b in BAD_CAPTURES])
def test_bad_captures_are_refused_naming_file_and_line(tmp_path, text, needle, line):
    f = _write(tmp_path / "bench.csv", text)
    with pytest.raises(CaptureError) as info:
        read_capture(f)
    err = info.value
    assert isinstance(err, BusBudgetError) and isinstance(err, ValueError)
    assert needle in str(err)
    assert str(err).startswith(str(f))
    assert err.line == line


def test_absurd_sizes_are_refused(tmp_path, monkeypatch):
    monkeypatch.setattr(cap, "MAX_ROWS", 10)
    f = _write(tmp_path / "long.csv", "t,CH1\n" + "".join(f"{i}e-9,1\n" for i in range(11)))
    with pytest.raises(CaptureError, match="more than the 10 allowed"):
        read_capture(f)
    monkeypatch.setattr(cap, "MAX_BYTES", 50)
    with pytest.raises(CaptureError, match="bytes, more than the 50 allowed"):
        read_capture(f)


def test_missing_file_and_directory(tmp_path):
    with pytest.raises(CaptureError, match="cannot read"):
        read_capture(tmp_path / "none.csv")
    with pytest.raises(CaptureError, match="directory"):
        read_capture(tmp_path)


BAD_ARRAYS = [
    ("length-mismatch", [0, 1, 2], {"A": [1, 2]}, "2 samples but time has 3"),
    ("nan-sample", [0, 1, 2], {"A": [1, np.nan, 2]}, "sample 1 is nan"),
    ("time-back", [0, 2, 1], {"A": [1, 2, 3]}, "goes back"),
    ("no-channels", [0, 1], {}, "at least one channel"),
    ("two-d-time", [[0, 1]], {"A": [1, 2]}, "1-D"),
    ("one-sample", [0], {"A": [1]}, "need at least 2"),
    ("nameless", [0, 1], {"": [1, 2]}, "non-empty strings"),
]


@pytest.mark.parametrize("t,ch,needle", [b[1:] for b in BAD_ARRAYS], ids=[b[0] for b in BAD_ARRAYS])
def test_bad_arrays_are_refused(t, ch, needle):
    with pytest.raises(CaptureError, match=needle):
        Capture.from_arrays(t, ch)


# -- judging a captured waveform with the simulation's kernels ------------------------------

@pytest.mark.parametrize("edge", ["rise", "fall"])
def test_judging_the_engine_waveform_gives_the_evaluation_kernels_result(edge):
    """The simulated pin waveform, judged as a capture, gives exactly the metrics and violation
    bits of the batched evaluation (the path of `check`) on the same time grid."""
    from budget.kernels import metrics as mk
    from budget.sweep import evaluate

    design = budget.example("short-bus")
    w = budget.simulate(design, "CTRL", edge)
    receivers, metrics, bits, head, levels = evaluate(design, "CTRL", edge, dt=w.dt, t_stop=float(w.t[-1]))
    for r, name in enumerate(receivers):
        j = cap.judge_waveform(design, w.t, w[name], name, edge, "CTRL")
        assert (j.v_lo, j.v_hi) == (levels[0, r, 0], levels[0, r, 1])
        got = np.array([np.nan if x is None else float(x) for x in j.metrics.as_dict().values()])
        want = metrics[0, r]
        order = [mk.METRIC_NAMES.index(k) for k in j.metrics.as_dict()]
        np.testing.assert_array_equal(got, want[order])
        assert j.bits == bits[0, r] and j.passed == (bits[0, r] == 0)
        assert j.headroom == head[0, r]


def test_judging_a_shifted_capture_moves_only_the_flight_times():
    design = budget.example("short-bus")
    w = budget.simulate(design, "CTRL", "rise")
    a = cap.judge_waveform(design, w.t, w["MEM3"], "MEM3", "rise", "CTRL")
    b = cap.judge_waveform(design, w.t + 3e-9, w["MEM3"], "MEM3", "rise", "CTRL", t_edge=3e-9)
    assert b.metrics.flight_min == pytest.approx(a.metrics.flight_min, abs=1e-15)
    assert b.metrics.margin == a.metrics.margin and b.bits == a.bits


JUDGE_BAD = [
    ("driver-as-receiver", dict(receiver="CTRL"), "cannot receive"),
    ("unknown-tap", dict(receiver="MEM9"), "unknown tap"),
    ("bad-edge", dict(edge="up"), "edge must be"),
    ("receiver-cannot-drive", dict(driver="MEM1"), "cannot drive"),
    ("levels-reversed", dict(v_lo=2.0, v_hi=0.0), "v_lo < v_hi"),
    ("starts-mid-edge", dict(start=200), "starts after the edge began"),
]


@pytest.mark.parametrize("change,needle", [b[1:] for b in JUDGE_BAD], ids=[b[0] for b in JUDGE_BAD])
def test_judge_waveform_bad_input(waves, change, needle):
    design = budget.example("short-bus")
    kw = dict(receiver="MEM3", edge="rise", driver="CTRL") | change
    start = kw.pop("start", 0)
    with pytest.raises(BusBudgetError, match=needle):
        cap.judge_waveform(design, waves.t[start:], waves["MEM3"][start:], **kw)


# -- property: any dialect reads back what was written ----------------------------------------

from hypothesis import given, strategies as st  # noqa: E402

_DIALECTS = [(",", False), (";", False), (";", True), ("\t", False), ("\t", True)]
_TIME_UNITS = {"": 1.0, "s": 1.0, "ms": 1e-3, "us": 1e-6, "ns": 1e-9, "ps": 1e-12}
_VOLT_UNITS = {"": 1.0, "V": 1.0, "mV": 1e-3, "uV": 1e-6, "kV": 1e3}


@given(steps=st.lists(st.floats(1e-12, 1e-9), min_size=2, max_size=40),
       n_ch=st.integers(1, 3), data=st.data(), dialect=st.sampled_from(_DIALECTS),
       tu=st.sampled_from(sorted(_TIME_UNITS)), vu=st.sampled_from(sorted(_VOLT_UNITS)),
       brackets=st.sampled_from(["()", "[]"]), comments=st.integers(0, 3))
def test_any_dialect_reads_back_the_written_numbers(steps, n_ch, data, dialect, tu, vu, brackets, comments):
    delim, dec_comma = dialect
    t = np.cumsum(steps) - 1e-9
    chans = {f"CH{k + 1}": np.array(data.draw(st.lists(st.floats(-50, 50), min_size=len(t), max_size=len(t))))
             for k in range(n_ch)}

    def cell(x, scale):
        s = repr(float(x / scale))
        return s.replace(".", ",") if dec_comma else s

    def head(name, unit):
        return f"{name} {brackets[0]}{unit}{brackets[1]}" if unit else name
    lines = [f"free text line {i}: settings" for i in range(comments)]
    lines.append(delim.join([head("Time", tu)] + [head(n, vu) for n in chans]))
    for i in range(len(t)):
        lines.append(delim.join([cell(t[i], _TIME_UNITS[tu])] + [cell(v[i], _VOLT_UNITS[vu]) for v in chans.values()]))
    c = read_capture("\n".join(lines) + "\n")
    assert c.names == tuple(chans)
    np.testing.assert_allclose(c.t, t, rtol=1e-14, atol=1e-30)
    for n, v in chans.items():
        np.testing.assert_allclose(c[n], v, rtol=1e-14, atol=1e-300)
