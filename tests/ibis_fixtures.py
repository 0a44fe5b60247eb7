"""IBIS texts and design files for the engine tests (fictional parts; helpers, not tests)."""
from __future__ import annotations

import re
from pathlib import Path

from budget import ibis

SHIPPED = Path(ibis.__file__).parent / "examples" / "ibis" / "tansy_tsx33.ibs"


def straight_line_ibis(r_up=26.0, r_down=22.0, vcc=3.3, c_comp="4p", l_pkg="4n", dt_ramp="0.75n") -> str:
    """An I/O model whose I-V tables are straight lines through the rails (resistors) and a [Ramp]."""
    pd = "\n".join(f"{v:.3f} {v / r_down:.17g} NA NA" for v in (-5.0, 0.0, 10.0))
    pu = "\n".join(f"{v:.3f} {-v / r_up:.17g} NA NA" for v in (-5.0, 0.0, 10.0))
    return f"""[IBIS Ver] 5.1
[Component] LIN1
[Manufacturer] Nobody (fictional)
[Package]
R_pkg 0 0 0
L_pkg {l_pkg} NA NA
C_pkg 0 0 0
[Model] lin_io
Model_type I/O
Vinl = 0.8
Vinh = 2.0
C_comp {c_comp} NA NA
[Voltage Range] {vcc} NA NA
[Pulldown]
{pd}
[Pullup]
{pu}
[Ramp]
dV/dt_r 1.98/{dt_ramp} NA NA
dV/dt_f 1.98/{dt_ramp} NA NA
[Model] lin_in
Model_type Input
Vinl = 0.8
Vinh = 2.0
C_comp 3p NA NA
[End]
"""


def shipped_variant(*, c_comp_zero=False, no_package=False, l_pkg=None, ramp_dt=None) -> str:
    """The shipped TSX33 file with its package or C_comp removed, or a faster [Ramp] (for the reference tests)."""
    text = SHIPPED.read_text()
    if no_package or l_pkg is not None:
        text = re.sub(r"R_pkg .*", "R_pkg            0  0  0", text)
        text = re.sub(r"C_pkg .*", "C_pkg            0  0  0", text)
        text = re.sub(r"L_pkg .*", f"L_pkg            {l_pkg or 0}  NA  NA", text)
    if c_comp_zero:
        text = re.sub(r"C_comp .*", "C_comp           0  0  0", text)
    if ramp_dt is not None:
        text = re.sub(r"dV/dt_r .*", f"dV/dt_r  1.2/{ramp_dt}  NA  NA", text)
        text = re.sub(r"dV/dt_f .*", f"dV/dt_f  1.2/{ramp_dt}  NA  NA", text)
    return text


def design_text(ibs: str, *, driver_model="tsx33_io", receiver_model="tsx33_in", segments=(("n0", "n1", "10 cm"),),
                taps=(("U1", "n0", "drv", None), ("U2", "n1", "rcv", None)), extra="", switching="auto",
                drv_extra="", rise="1 ns") -> str:
    """A design file with an IBIS driver part ``drv`` and an IBIS receiver part ``rcv`` on a 50-ohm trunk."""
    out = [f"""[bus]
name = "ibis test bus"
[edge]
rise = "{rise}"
fall = "{rise}"
[parts.drv]
ibis = {{ file = "{ibs}", model = "{driver_model}", switching = "{switching}" }}
{drv_extra}
[parts.rcv]
ibis = {{ file = "{ibs}", model = "{receiver_model}" }}
[lines.trunk]
z0 = "50 ohm"
delay = "6.7 ns/m"
"""]
    for a, b, length in segments:
        out.append(f'[[segment]]\nfrom = "{a}"\nto = "{b}"\nline = "trunk"\nlength = "{length}"\n')
    for name, node, part, stub in taps:
        out.append(f'[[tap]]\nname = "{name}"\nnode = "{node}"\npart = "{part}"\n')
        if stub:
            out.append(f'stub = {{ line = "trunk", length = "{stub}" }}\n')
    out.append(extra)
    return "\n".join(out)
