"""The kernel's two input structures (budget.kernels.inputs) as built by budget.netlist.flatten."""
from __future__ import annotations

import numpy as np
import pytest

import budget
from budget.edges import FALL, RISE
from budget.kernels.inputs import Topology, Values
from budget.netlist import flatten

# A driver at node a, 15 cm of 50 ohm / 6.7 ns/m line (TD = 1.005 ns) to node b, a
# receiver with 2 pF at b and a 50 ohm termination to 1.65 V at b.
SMALL = """
[bus]
name = "structure test bus"
dt = "10 ps"
t_stop = "5 ns"
[edge]
rise = "0.5 ns"
fall = "0.4 ns"
[parts.drv]
role = "driver"
v_high = "3.3 V"
v_low = "0 V"
r_high = "20 ohm"
r_low = "25 ohm"
c_pin = "0 pF"
[parts.rx]
role = "receiver"
c_pin = "2 pF"
vih = "2 V"
vil = "0.8 V"
{rx_extra}
[lines.l]
z0 = "50 ohm"
delay = "6.7 ns/m"
[[segment]]
from = "a"
to = "b"
line = "l"
length = "15 cm"
[[tap]]
name = "D"
node = "a"
part = "drv"
[[tap]]
name = "R"
node = "b"
part = "rx"
{tap_extra}
[[termination]]
node = "b"
type = "parallel"
r = "50 ohm"
v = "1.65 V"
{term_extra}
"""


def small(rx_extra="", tap_extra="", term_extra=""):
    return budget.loads(SMALL.format(rx_extra=rx_extra, tap_extra=tap_extra, term_extra=term_extra))


def test_topology_of_the_small_bus():
    net = flatten(small(), "D", RISE)
    topo = net.topology
    assert isinstance(topo, Topology) and net.node_names == ["a", "b"]
    assert topo.n_nodes == 2
    # no lumped series element: every node is its own cluster (1 x 1 matrices)
    np.testing.assert_array_equal(topo.cl_start, [0, 1, 2])
    np.testing.assert_array_equal(topo.cl_moff, [0, 1, 2])
    np.testing.assert_array_equal(topo.line_a, [0])
    np.testing.assert_array_equal(topo.line_b, [1])
    assert topo.res_a.size == topo.res_b.size == topo.ind_a.size == topo.ind_b.size == 0
    np.testing.assert_array_equal(topo.cap_a, [1])       # the receiver's 2 pF at b ...
    np.testing.assert_array_equal(topo.cap_b, [-1])      # ... to ground (the driver has c_pin 0)
    np.testing.assert_array_equal(topo.src_node, [1])    # the termination
    assert topo.drv_node == 0
    np.testing.assert_array_equal(topo.out_node, [0, 1])
    # DC: the line shorts a to b, one unknown; its current follows from the forest edge b <- a
    np.testing.assert_array_equal(topo.dc_map, [0, 0])
    assert (topo.n_dc, topo.dc_bw) == (1, 0)
    np.testing.assert_array_equal(topo.tree_kind, [0])
    np.testing.assert_array_equal(topo.tree_elem, [0])
    np.testing.assert_array_equal(topo.tree_child, [1])
    np.testing.assert_array_equal(topo.tree_parent, [0])
    # history ring: floor(TD / dt) = 100 whole steps + 4 for the cubic stencil
    np.testing.assert_array_equal(topo.ring_len, [104])


def test_values_of_the_small_bus():
    net = flatten(small(), "D", RISE)
    vals = net.values
    assert isinstance(vals, Values) and net.n_variants == 1
    assert vals.line_z0.tolist() == [[50.0]]
    assert vals.line_td[0, 0] == pytest.approx(0.15 * 6.7e-9, rel=1e-15, abs=0)
    assert vals.cap_c[0, 0] == pytest.approx(2e-12, rel=1e-15, abs=0)
    assert vals.src_r.tolist() == [[50.0]] and vals.src_v.tolist() == [[1.65]]
    assert vals.res_r.shape == vals.ind_l.shape == (0, 1)
    # rising edge: from the low state (0 V, 25 ohm) to the high state (3.3 V, 20 ohm)
    assert (vals.drv_v0[0], vals.drv_r0[0], vals.drv_v1[0], vals.drv_r1[0]) == (0.0, 25.0, 3.3, 20.0)
    assert vals.t_ramp[0] == pytest.approx(0.5e-9 / 0.8, rel=1e-15, abs=0)   # docs/references.md D3
    assert vals.dt == 10e-12 and vals.n_steps == 501                         # 5 ns / 10 ps + 1
    assert (net.dt, net.n_steps) == (vals.dt, vals.n_steps)


def test_falling_edge_swaps_the_driver_states_only():
    rise, fall = flatten(small(), "D", RISE), flatten(small(), "D", FALL)
    v = fall.values
    assert (v.drv_v0[0], v.drv_r0[0], v.drv_v1[0], v.drv_r1[0]) == (3.3, 20.0, 0.0, 25.0)
    assert v.t_ramp[0] == pytest.approx(0.4e-9 / 0.8, rel=1e-15, abs=0)
    for name in Topology._fields:
        np.testing.assert_array_equal(getattr(rise.topology, name), getattr(fall.topology, name), err_msg=name)


def test_series_resistor_and_package_make_one_cluster():
    # R's chain: b -- 1 cm stub -- 22 ohm -- pad -- 3 nH -- die: stub end, pad and die form one cluster
    d = small(rx_extra='l_pkg = "3 nH"', tap_extra='stub = { line = "l", length = "1 cm" }',
              term_extra='[[termination]]\ntap = "R"\ntype = "series"\nr = "22 ohm"')
    net = flatten(d, "D", RISE)
    topo = net.topology
    sizes = np.diff(topo.cl_start)
    assert sizes.sum() == topo.n_nodes and sorted(sizes.tolist()) == [1, 1, 3]
    np.testing.assert_array_equal(np.diff(topo.cl_moff), sizes ** 2)
    cluster = np.repeat(np.arange(sizes.size), sizes)
    # every lumped series element joins nodes of one cluster; the lines join different ones
    for a, b in [(topo.res_a, topo.res_b), (topo.ind_a, topo.ind_b), (topo.cap_a, topo.cap_b)]:
        for x, y in zip(a, b):
            assert y < 0 or cluster[x] == cluster[y]
    for x, y in zip(topo.line_a, topo.line_b):
        assert cluster[x] != cluster[y]
    die = net.node_names.index("R:die")
    assert topo.out_node[1] == die and cluster[die] == cluster[net.node_names.index("R:pad")]
    assert net.values.ind_l[0, 0] == pytest.approx(3e-9, rel=1e-15, abs=0)


def test_batches_keep_one_topology_and_stack_values_over_variants():
    d = small()
    z0 = np.array([45.0, 50.0, 55.0])
    batch = d.with_values({"lines.l.z0": z0, "parts.rx.c_pin": np.array([1e-12, 2e-12, 3e-12])})
    one, many = flatten(d, "D", RISE, envelope=budget.netlist.tolerance_envelope(batch)), flatten(batch, "D", RISE)
    for name in Topology._fields:
        np.testing.assert_array_equal(getattr(one.topology, name), getattr(many.topology, name), err_msg=name)
    assert many.n_variants == 3
    np.testing.assert_array_equal(many.values.line_z0, z0[None, :])
    np.testing.assert_array_equal(many.values.cap_c, [[1e-12, 2e-12, 3e-12]])
    for name in Values._fields:
        x = getattr(many.values, name)
        if isinstance(x, np.ndarray):
            assert x.shape[-1] == 3, name


@pytest.mark.parametrize("edge", [RISE, FALL])
def test_arrays_are_what_the_kernels_are_compiled_for(edge):
    # one compiled signature: int64 / float64, C order, writable (no broadcast views)
    d = budget.example("backplane")
    net = flatten(d, d.drivers[0], edge)
    for name, x in net.topology._asdict().items():
        if isinstance(x, np.ndarray):
            assert x.dtype == np.int64 and x.flags.c_contiguous and x.ndim == 1, name
        else:
            assert type(x) is int, name
    for name, x in net.values._asdict().items():
        if isinstance(x, np.ndarray):
            assert x.dtype == np.float64 and x.flags.c_contiguous and x.flags.writeable, name
            assert x.ndim == (1 if name.startswith(("drv_", "t_ramp")) else 2), name
    assert type(net.values.dt) is float and type(net.values.n_steps) is int
