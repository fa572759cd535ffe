"""Synthetic turbine networks of any size, for benchmarks and solver tests.

The network is a condensing turbine without reheat: a throttle valve, then a
chain of stage groups from 160 bar to 7 kPa with a fixed-fraction bleed at
every second node, and at regular intervals a split into two parallel
branches of two groups each that merge again (as a double-flow section does).
The last group exhausts to the condenser through an annulus.  Every number is
invented; the data only exercise the solver.
"""

from __future__ import annotations

__all__ = ["synthetic_model_data"]


def synthetic_model_data(n_groups: int, parallel_every: int = 6) -> dict:
    """Model-file data (as read from TOML) of a synthetic network.

    Parameters
    ----------
    n_groups : number of stage groups (at least 3) [-]
    parallel_every : a parallel section (four groups in two branches) replaces
        two chain groups at every this many chain positions [-]

    Returns
    -------
    dict
        Data for :func:`simulator.model.build_model`.
    """
    if n_groups < 3:
        raise ValueError("a synthetic network needs at least 3 stage groups")
    # Lay out the main chain: a parallel section spans two chain steps and holds
    # four groups (two per branch); a plain step holds one group.
    plan: list[str] = []  # "g" plain step, "p" first step of a parallel section
    count = 0
    while count < n_groups:
        left = n_groups - count
        if len(plan) % parallel_every == parallel_every - 1 and left >= 5:
            plan += ["p", "-"]
            count += 4
        else:
            plan.append("g")
            count += 1
    steps = len(plan)
    p_first, p_last = 160e5, 7e3
    ratio = (p_last / p_first) ** (1.0 / steps)
    node_p = [p_first * ratio ** k for k in range(steps + 1)]
    nodes = {"throttle": f"{166e5 / 1e5:.6g} bar"}
    names = [f"n{k}" for k in range(steps + 1)]
    names[-1] = "condenser"
    for k, n in enumerate(names):
        nodes[n] = f"{node_p[k]:.9g} Pa"
    groups = []
    extractions = []
    k = 0
    while k < steps:
        a, b = names[k], names[k + 1]
        if plan[k] == "p":
            c = names[k + 2]
            for br in ("a", "b"):
                mid = f"{a}_{br}"
                nodes[mid] = f"{node_p[k + 1]:.9g} Pa"
                groups.append({"name": f"G{k}{br}1", "from": a, "to": mid, "efficiency": 0.86})
                groups.append({"name": f"G{k}{br}2", "from": mid, "to": c, "efficiency": 0.86})
            # the chain node inside the section is not used: drop it
            del nodes[b]
            k += 2
            continue
        groups.append({"name": f"G{k}", "from": a, "to": b, "efficiency": 0.86})
        k += 1
    groups[-1].update({"annulus_area": "14 m^2", "loss_curve": "c"})
    used = {g["from"] for g in groups}
    bleed_nodes = [n for n in names[1:-1] if n in nodes and n in used][::2]
    total = 0.0
    for j, n in enumerate(bleed_nodes):
        f = min(0.01, 0.3 / max(len(bleed_nodes), 1))
        total += f
        extractions.append({"name": f"X{j}", "node": n, "design_flow": f"{f * 250.0:.6g} kg/s",
                            "control": "fraction"})
    return {
        "about": {"name": f"synthetic network of {n_groups} stage groups (invented)"},
        "throttle": {"node": "throttle", "pressure": "166 bar", "temperature": "538 degC",
                     "flow": "250 kg/s"},
        "throttle_valve": {"to": names[0]},
        "nodes": nodes,
        "exhaust": {"nodes": ["condenser"], "loss_curves": {"c": {
            "annulus_velocity": ["50 m/s", "150 m/s", "250 m/s", "350 m/s"],
            "loss": ["100 kJ/kg", "20 kJ/kg", "30 kJ/kg", "70 kJ/kg"]}}},
        "stage_group": groups,
        "extraction": extractions,
        "generator": {"rating": "300 MW", "mechanical_loss": "1 MW", "fixed_loss": "1 MW",
                      "load_loss": "2 MW"},
    }
