"""Measured values: --set / --values parsing, application, pinning in tolerance analyses, CLI errors."""
from __future__ import annotations

import json

import numpy as np
import pytest

import budget
from budget import measured as ms
from budget.analyses import out_of_box, varied_paths
from budget.cli import main
from budget.errors import BusBudgetError, DesignError


@pytest.fixture(scope="module")
def design():
    return budget.example("short-bus")


def write(tmp_path, name, text):
    p = tmp_path / name
    p.write_text(text)
    return p


def test_toml_csv_and_set_give_si_floats_and_set_overrides(design, tmp_path):
    toml = write(tmp_path, "v.toml", '"lines.route.z0" = "47.6 ohm"\n[parts.hub_ctrl]\nr_high = 19.5\n')
    csv = write(tmp_path, "v.csv", "# unit 7\npath,value,note\ntermination.0.r,22.3 ohm,in circuit\n"
                                    "tap.MEM1.stub.length,5 mm,\n")
    d, m = ms.load_with_values(design, files=[toml, csv], settings=['lines.route.z0="48.1 ohm"'])
    assert m.values == {"parts.hub_ctrl.r_high": 19.5, "termination.0.r": 22.3,
                        "tap.MEM1.stub.length": pytest.approx(5e-3), "lines.route.z0": 48.1}
    assert d.params["lines.route.z0"] == 48.1 and d.lines["route"].z0 == 48.1
    assert d.taps[1].stub.length == pytest.approx(5e-3)
    assert any("overrides" in n and "v.toml:1" in n for n in m.notes)
    doc = {e["path"]: e for e in m.to_json(d)}
    assert doc["termination.0.r"]["origin"].endswith("v.csv:3") and doc["termination.0.r"]["unit"] == "ohm"
    assert doc["parts.hub_ctrl.r_high"]["origin"].endswith("v.toml:3")


def test_values_outside_the_box_are_flagged_not_refused(design):
    d, m = ms.load_with_values(design, settings=["lines.route.z0=60 ohm"])
    assert out_of_box(d) == [{"path": "lines.route.z0", "value": 60.0, "min": pytest.approx(40.5),
                              "max": pytest.approx(49.5)}]


def test_pin_holds_measured_values_and_keeps_the_others_varying(design):
    d, m = ms.load_with_values(design, settings=["lines.route.z0=47 ohm"])
    p = ms.pin(d, m)
    assert p.tolerances["lines.route.z0"] == (47.0, 47.0)
    assert "lines.route.z0" not in varied_paths(p)
    assert set(varied_paths(p)) == set(varied_paths(design)) - {"lines.route.z0"}
    rep = budget.check(p)
    for label, v in rep.variants.items():
        assert v["values"].get("lines.route.z0", 47.0) == 47.0, label


INVALID = [
    # id, files {name: text}, settings, exception text that must appear
    ("unknown-path", {}, ["lines.trunk.z0=50 ohm"], "--set: lines.trunk.z0: the design has no numeric value"),
    ("wrong-dimension", {}, ["lines.route.z0=3 V"], "is not a resistance"),
    ("no-equals", {}, ["lines.route.z0"], "expected PATH=VALUE"),
    ("no-path", {}, ["=3 ohm"], "no path before"),
    ("empty-value", {}, ["lines.route.z0="], "no value after"),
    ("not-a-quantity", {}, ["lines.route.z0=fifty"], "cannot read 'fifty'"),
    ("non-physical-from-file", {"v.csv": "path,value\nlines.route.z0,-3 ohm\n"}, [], "v.csv: line 2: lines.route.z0:"),
    ("csv-bad-header", {"v.csv": "name,value\nlines.route.z0,50\n"}, [], "line 1: the header must start with 'path,value'"),
    ("csv-missing-value", {"v.csv": "path,value\nlines.route.z0\n"}, [], "line 2: expected 'path,value'"),
    ("csv-empty-value", {"v.csv": "path,value\nlines.route.z0,\n"}, [], "line 2: lines.route.z0: empty value"),
    ("csv-only-header", {"v.csv": "path,value\n"}, [], "no values after the header"),
    ("csv-empty", {"v.csv": "# nothing\n"}, [], "empty"),
    ("csv-twice", {"v.csv": "path,value\nlines.route.z0,50\nlines.route.z0,51\n"}, [], "line 3: lines.route.z0: given twice"),
    ("csv-wrong-unit-line", {"v.csv": "path,value\n\ntermination.0.r,2 pF\n"}, [], "v.csv: line 3: termination.0.r"),
    ("toml-invalid", {"v.toml": "lines.route.z0 = \n"}, [], "not valid TOML"),
    ("toml-boolean", {"v.toml": '"lines.route.z0" = true\n'}, [], "line 1: lines.route.z0: expected a quantity"),
    ("toml-empty", {"v.toml": "# nothing\n"}, [], "no values"),
    ("missing-file", {}, [], "cannot read"),
]


@pytest.mark.parametrize("files,settings,needle", [c[1:] for c in INVALID], ids=[c[0] for c in INVALID])
def test_invalid_measured_values(design, tmp_path, files, settings, needle):
    paths = [write(tmp_path, n, t) for n, t in files.items()] or ([tmp_path / "absent.csv"] if not settings
                                                                   else [])
    with pytest.raises(DesignError) as err:
        ms.load_with_values(design, files=paths, settings=settings)
    assert isinstance(err.value, (ValueError, BusBudgetError))
    assert needle in str(err.value)


def test_cli_check_with_values_lists_measured_and_out_of_box(tmp_path, capsys):
    v = write(tmp_path, "v.toml", '"lines.route.z0" = "60 ohm"\n')
    rc = main(["check", "example:short-bus", "--nominal", "--values", str(v), "--json"])
    doc = json.loads(capsys.readouterr().out)
    assert rc in (0, 1)
    assert doc["measured"][0]["path"] == "lines.route.z0" and doc["measured"][0]["value"] == 60.0
    assert doc["out_of_box"][0]["path"] == "lines.route.z0"
    box = doc["tolerances"]["lines.route.z0"]
    assert (box["min"], box["max"]) == (pytest.approx(40.5), pytest.approx(49.5))
    # the same check from Python with with_values gives the same results
    d = budget.example("short-bus").with_values({"lines.route.z0": 60.0})
    ref = budget.check(d, nominal=True).to_json()
    assert [r["margin_high"] for r in doc["results"]] == [r["margin_high"] for r in ref["results"]]


def test_cli_check_text_says_measured_values_are_held(capsys):
    rc = main(["check", "example:short-bus", "--set", "lines.route.z0=47 ohm"])
    out = capsys.readouterr().out
    assert rc == 0
    assert "lines.route.z0 = 47 ohm  (--set)" in out and "held at their measured value" in out
    assert "all 16 tolerance corners" in out   # five toleranced values less the measured one: 2**4


def test_cli_waves_applies_measured_values(tmp_path):
    a, b = tmp_path / "a.csv", tmp_path / "b.csv"
    assert main(["waves", "example:short-bus", "--driver", "CTRL", "--edge", "rise", "--csv", str(a)]) == 0
    assert main(["waves", "example:short-bus", "--driver", "CTRL", "--edge", "rise", "--csv", str(b),
                 "--set", "lines.route.z0=60 ohm"]) == 0
    va, vb = (np.loadtxt(p, delimiter=",", skiprows=1) for p in (a, b))
    d = budget.example("short-bus").with_values({"lines.route.z0": 60.0})
    w = budget.simulate(d, "CTRL", "rise")
    np.testing.assert_allclose(vb[:, 1:], w.v, atol=1e-8)
    assert va.shape != vb.shape or np.max(np.abs(va[:, 1:] - vb[:, 1:])) > 0.01


@pytest.mark.parametrize("args,needle", [
    (["--set", "lines.route.z0=3 V"], "--set: lines.route.z0: '3 V' is not a resistance"),
    (["--values", "VALUES"], "line 2: no.such.path: the design has no numeric value"),
    (["--log", "LOG"], "--log and --serial must be given together"),
    (["--serial", "SN1"], "--log and --serial must be given together"),
], ids=["set-wrong-unit", "values-unknown-path", "log-without-serial", "serial-without-log"])
def test_cli_measured_and_log_errors_exit_2(tmp_path, capsys, args, needle):
    v = write(tmp_path, "v.csv", "path,value\nno.such.path,1\n")
    log = tmp_path / "log.jsonl"
    args = [str(v) if a == "VALUES" else str(log) if a == "LOG" else a for a in args]
    rc = main(["check", "example:short-bus", "--nominal", *args])
    cap = capsys.readouterr()
    assert rc == 2 and needle in cap.err and cap.out == ""
    assert not log.exists()


from hypothesis import given, strategies as st  # noqa: E402

PREFIXES = [("", 1.0), ("m", 1e-3), ("k", 1e3)]


@given(z=st.floats(min_value=20.0, max_value=120.0), prefix=st.sampled_from(PREFIXES),
       form=st.sampled_from(["set", "csv", "toml"]))
def test_any_unit_spelling_gives_the_same_si_value(design, tmp_path_factory, z, prefix, form):
    """'47.6 ohm', '0.0476 kohm', '47600 mohm' and the plain SI number are one value, whichever way given."""
    p, scale = prefix
    text = f"{z / scale!r} {p}ohm"
    if form == "set":
        _, m = ms.load_with_values(design, settings=[f"lines.route.z0={text}"])
    else:
        d = tmp_path_factory.mktemp("v")
        path = d / f"v.{form}"
        path.write_text(f"path,value\nlines.route.z0,{text}\n" if form == "csv" else f'"lines.route.z0" = "{text}"\n')
        _, m = ms.load_with_values(design, files=[path])
    assert m.values["lines.route.z0"] == pytest.approx(z, rel=1e-12)
