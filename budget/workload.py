"""How much work a check will do, estimated before any simulation runs.

The cost of one simulation is its time steps x the nodes of its flattened
netlist (the time loop does O(nodes) work per step, DEVELOPERS.md "How the
physics is computed"), so a check costs about

    work = sum over edges of (variants x drivers) x steps(edge) x nodes(edge)   [node-steps]

with the time step and window the engine will use (chosen from the whole
tolerance box, :func:`budget.sweep.plan`) and the node count of the real
netlist (:func:`budget.netlist.flatten` of the nominal design, which every
variant shares).  :func:`budget.check.check` refuses a plan above
:data:`budget.limits.MAX_WORK` before the first simulation, unless the caller
allows long runs (``max_work=None``, ``check --allow-long``).

The estimate counts work, not seconds: seconds depend on the machine and its
load.  DEVELOPERS.md and docs/cli.md quote the node-steps per second measured
on the project's 2-core machine, to translate the limit into minutes there.
"""
from __future__ import annotations

from dataclasses import dataclass

from .edges import EDGES
from .model import Design


@dataclass(frozen=True)
class WorkEstimate:
    """Work of one check, estimated up front.

    variants : int      variants of the design (nominal, corners, samples, search candidates)
    drivers : int       drivers per variant
    steps : dict        edge -> time steps of one simulation
    nodes : dict        edge -> nodes of the flattened netlist
    node_steps : float  the work [node-steps]: sum over edges of variants x drivers x steps x nodes
    """
    variants: int
    drivers: int
    steps: dict
    nodes: dict
    node_steps: float

    @property
    def simulations(self) -> int:
        """Simulations of the check: variants x drivers x edges."""
        return self.variants * self.drivers * len(self.steps)

    def describe(self) -> str:
        """One line for messages: the estimate and where it comes from."""
        per = ", ".join(f"{e} {self.steps[e]:,} steps x {self.nodes[e]:,} nodes" for e in self.steps)
        return (f"{self.simulations:,} simulations ({self.variants:,} variants x {self.drivers} drivers x "
                f"{len(self.steps)} edges; {per}) = {self.node_steps:.3g} node-steps")


def estimate_work(design: Design, n_variants: int, *, largest_step: bool = False) -> WorkEstimate:
    """Estimated work [node-steps] of evaluating ``n_variants`` variants of ``design`` for every driver and edge.

    Uses the step, window and netlist the sweep will use for the design's tolerance
    box (the values a check evaluates all lie inside it); flattening the nominal
    design once per edge is cheap next to a single simulation.

    largest_step : bool
        Use the largest step the accuracy estimate would try
        (:func:`budget.line_model.choose_dt`) instead of the step it chooses.  The
        chosen step is never larger, so this is a lower bound of the work, found
        without a single simulation (the accuracy estimate simulates the envelope
        design at a few steps, which on a large bus is itself long work).
    """
    from .line_model import choose_dt
    from .netlist import flatten
    from .sweep import plan

    drivers = design.drivers
    if largest_step:
        env, _, tss = plan(design, {}, EDGES, dt=1.0)      # envelope and window (dt given: no estimate runs)
        dts = {e: choose_dt(env, e) for e in EDGES}
    else:
        env, dts, tss = plan(design, {}, EDGES)
    steps, nodes = {}, {}
    for e in EDGES:
        if drivers:
            net = flatten(design, drivers[0], e, dt=dts[e], t_stop=tss[e], envelope=env)
            steps[e], nodes[e] = int(net.n_steps), int(net.n_nodes)
        else:
            steps[e], nodes[e] = 0, 0
    work = float(sum(n_variants * len(drivers) * steps[e] * nodes[e] for e in EDGES))
    return WorkEstimate(variants=int(n_variants), drivers=len(drivers), steps=steps, nodes=nodes, node_steps=work)


__all__ = ["WorkEstimate", "estimate_work"]
