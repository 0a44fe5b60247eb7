"""Parts from IBIS files: the design's ``ibis = {file, component, model, corner}`` and what it resolves to.

A part with ``ibis`` takes its buffer (I-V tables, switching, clamps), its die capacitance
(C_comp), its package (R_pkg, L_pkg, C_pkg of [Package], or the [Pin] row's R_pin, L_pin,
C_pin when ``pin`` is given) and its thresholds (Vinl, Vinh) from the IBIS model; the part
table may override ``c_pin`` (replaces C_comp), ``l_pkg`` (replaces the package L; R and C
of the package then still come from the file), ``vih``, ``vil``, ``v_max``, ``v_min``,
``v_meas``, ``r_in`` and ``ref_load``.  The linear driver keys (``v_high``, ``v_low``,
``r_high``, ``r_low``) are refused: the buffer is the model.

``corner``: "typ", "min" or "max", the standard's typ/min/max columns taken together
(min = slow-weak, max = fast-strong); as a design value ``parts.NAME.ibis.corner`` it is
-1 (min), 0 (typ) or +1 (max), so ``[tolerances] "parts.NAME.ibis.corner" = ["min", "max"]``
puts the slow-weak and fast-strong sets at the ends of the tolerance box.

For the design's rules and reports the part's ``v_high``/``v_low`` are the pull-up and
pull-down rails and ``r_high``/``r_low`` the buffer's small-signal output resistance at its
rail (1 / slope of the I-V table at zero volts), all at the nominal corner: values derived
from the model, not parameters of the design (``with_values`` and ``[tolerances]`` do not
reach them).
"""
from __future__ import annotations

import hashlib
import os
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .errors import DesignError
from .ibis import CORNERS, IbisComponent, IbisError, IbisModel, read
from .ibis_corner import CORNER_VALUE, corner_value  # noqa: F401  (re-exported)
from .ibis_devices import METHODS

IBIS_KEYS = ("file", "component", "model", "corner", "pin", "switching")
OVERRIDABLE = ("c_pin", "l_pkg", "vih", "vil", "v_max", "v_min", "v_meas", "r_in")


@dataclass(frozen=True)
class IbisRef:
    """What a design says: file (relative to the design file), component, model, corner, optional pin, switching."""
    file: str
    component: str | None = None
    model: str | None = None
    corner: str | float = "typ"
    pin: str | None = None
    switching: str = "auto"


@dataclass(frozen=True, eq=False)
class IbisPart:
    """A resolved IBIS part: the file's identity and the model, component and package it names."""
    path: str = field(compare=False)
    sha256: str = ""
    component: str | None = None
    model_name: str = ""
    pin: str | None = None
    switching: str = "auto"
    model: IbisModel = field(repr=False, compare=False, default=None)
    package: dict = field(repr=False, compare=False, default=None)      # "r", "l", "c" -> (typ, min, max) [ohm, H, F]

    def _key(self):
        return ("IbisPart", self.sha256, self.component, self.model_name, self.pin, self.switching)

    def __eq__(self, other):
        return isinstance(other, IbisPart) and self._key() == other._key()

    def __hash__(self):
        return hash(self._key())

    def package_at(self, which: str, corner: str) -> float:
        return self.package[which][CORNERS.index(corner)]


_CACHE: dict = {}


def _load(path: Path, source: str, table: str):
    try:
        st = os.stat(path)
        key = (str(path), st.st_mtime_ns, st.st_size)
    except OSError:
        key = None
    if key is not None and key in _CACHE:
        return _CACHE[key]
    try:
        f = read(path)
    except IbisError as exc:
        raise DesignError(f"IBIS file: {exc}", source=source, table=table, key="ibis.file") from None
    data = Path(path).read_bytes()
    out = (f, hashlib.sha256(data).hexdigest())
    if key is not None:
        if len(_CACHE) > 32:
            _CACHE.clear()
        _CACHE[key] = out
    return out


def resolve(ref: IbisRef, source: str, table: str) -> IbisPart:
    """Read the file ``ref`` names (relative to the design file ``source``) and pick its model and package."""
    def err(msg, key):
        return DesignError(msg, source=source, table=table, key=f"ibis.{key}")
    if not isinstance(ref, IbisRef):
        raise DesignError(f"expected an IbisRef, got {type(ref).__name__}", source=source, table=table, key="ibis")
    for k in ("file", "component", "model", "pin", "switching"):
        v = getattr(ref, k)
        if v is not None and (not isinstance(v, str) or not v.strip()):
            raise err(f"expected a non-empty string, got {v!r}", k)
    if ref.file is None:
        raise err("missing key", "file")
    if ref.switching not in METHODS:
        raise err(f"{ref.switching!r} is not one of: {', '.join(METHODS)}", "switching")
    path = Path(ref.file)
    if not path.is_absolute():
        base = Path(source).parent if source and not source.startswith("<") else Path(".")
        path = base / path
    f, sha = _load(path, source, table)
    comp: IbisComponent | None = None
    if ref.component is not None:
        if ref.component not in f.components:
            raise err(f"no [Component] {ref.component!r} in {path}; it has: {', '.join(f.components) or 'none'}",
                      "component")
        comp = f.components[ref.component]
    elif len(f.components) == 1:
        comp = next(iter(f.components.values()))
    elif len(f.components) > 1:
        raise err(f"{path} has {len(f.components)} components ({', '.join(f.components)}): name one", "component")
    model_name = ref.model
    rlc = None
    if ref.pin is not None:
        if comp is None or ref.pin not in comp.pins:
            raise err(f"no pin {ref.pin!r} in [Pin] of component {comp.name if comp else '?'}", "pin")
        _, pin_model, rlc = comp.pins[ref.pin]
        if model_name is None:
            model_name = pin_model
        elif model_name != pin_model:
            raise err(f"pin {ref.pin!r} uses model {pin_model!r}, not {model_name!r}", "model")
    if model_name is None:
        raise err("missing key (or give a pin, whose [Pin] row names the model)", "model")
    if model_name not in f.models:
        raise err(f"no [Model] {model_name!r} in {path}; it has: {', '.join(f.models) or 'none'}", "model")
    model = f.models[model_name]
    if model.model_type.lower() in ("terminator", "series", "series_switch"):
        raise err(f"model {model_name!r} is of Model_type {model.model_type}, not a buffer a bus taps", "model")
    package = {}
    for k, attr in (("r", "r_pkg"), ("l", "l_pkg"), ("c", "c_pkg")):
        t = getattr(comp, attr) if comp is not None else None
        vals = (t.typ, t.min, t.max) if t is not None else (0.0, 0.0, 0.0)
        if rlc is not None and rlc["rlc".index(k)] is not None:
            vals = (rlc["rlc".index(k)],) * 3     # [Pin] values override [Package] (one value for all corners)
        package[k] = vals
    if min(package["r"]) == 0 < max(package["r"]) or min(package["l"]) == 0 < max(package["l"]):
        raise err("package R or L is zero at some corners and not at others; busbudget needs it present at all "
                  "corners or none", "component")
    if model.can_drive and ref.switching != "auto":
        from .ibis_devices import switching
        for e in ("rise", "fall"):
            try:
                switching(model, e, "typ", ref.switching, source=str(path))
            except IbisError as exc:
                raise err(str(exc), "switching") from None
    return IbisPart(path=str(path), sha256=sha, component=comp.name if comp else None, model_name=model_name,
                    pin=ref.pin, switching=ref.switching, model=model, package=package)


def role_of(model: IbisModel) -> str:
    if model.can_drive and model.can_receive:
        return "transceiver"
    return "driver" if model.can_drive else "receiver"


def derived_values(part: IbisPart, corner: str) -> dict:
    """Informational linear values of the part at ``corner`` (see the module docstring): key -> SI float."""
    m = part.model
    out = {"c_pin": m.c_comp.at(corner), "l_pkg": part.package_at("l", corner)}
    if m.vinl is not None:
        out["vil"] = m.vinl
    if m.vinh is not None:
        out["vih"] = m.vinh
    if m.can_drive:
        # open drain / open source: the missing side's level is the supply rail (the bus pulls it there)
        supply = m.voltage_range.at(corner) if m.voltage_range is not None else None
        out["v_high"] = m.rail("pullup", corner) if m.pullup is not None else (
            supply if supply is not None else m.rail("pulldown", corner))
        out["v_low"] = m.rail("pulldown", corner) if m.pulldown is not None else 0.0
        for key, tab in (("r_high", m.pullup), ("r_low", m.pulldown)):
            r = np.inf
            if tab is not None:
                slope = abs(float(np.interp(0.0, tab.x, np.gradient(tab.at(corner), tab.x))))
                r = 1.0 / slope if slope > 0 else np.inf
            out[key] = r if np.isfinite(r) else 1e12
        if out["v_high"] <= out["v_low"]:     # open drain / open source: one rail; the swing comes from the bus
            out["v_high"] = max(out["v_high"], out["v_low"]) + 1e-3
    return out

