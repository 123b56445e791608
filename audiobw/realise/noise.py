"""Each stage's own noise at its output by modified nodal analysis (ideal op-amp).

Every resistor adds a current noise 4kT/R (A²/Hz) across its nodes (Johnson–Nyquist),
the op-amp a voltage e_n in series with its + input and a current i_n at each input.
One adjoint solve per frequency, Aᵀx = e_out, gives the transfer from every source
to the output at once: a current injected from b into a reaches the output as
x[a] − x[b], the op-amp's e_n as x[constraint row], the input voltage as x[source row].
"""

from __future__ import annotations

import numpy as np

BOLTZMANN = 1.380649e-23  # J/K, exact in the 2019 SI


def adjoint(stage, freq_hz, parts: dict | None = None):
    """(node index map, x) with x of shape (F, n): output sensitivities to each injection."""
    elems, (plus, minus) = stage.netlist
    v = stage.parts if parts is None else parts
    nodes = ["in", "a", "b", "m", "out"]
    used = sorted(({n for _, a, b in elems for n in (a, b)} | {plus, minus, "out"}) - {"gnd"}, key=nodes.index)
    idx = {n: i for i, n in enumerate(used)}
    n = len(used) + 2  # + input source row + op-amp row
    src, opr = len(used), len(used) + 1
    s = 2j * np.pi * np.asarray(freq_hz, float)
    a = np.zeros((s.size, n, n), complex)
    for name, p, q in elems:
        y = (1.0 / v[name]) * np.ones_like(s) if name[0] == "R" else s * v[name]
        for i, j, sign in ((p, p, 1), (q, q, 1), (p, q, -1), (q, p, -1)):
            if i != "gnd" and j != "gnd":
                a[:, idx[i], idx[j]] += sign * y
    a[:, src, idx["in"]] = 1.0
    a[:, idx["in"], src] = 1.0
    a[:, idx["out"], opr] = -1.0  # op-amp output current
    if plus != "gnd":
        a[:, opr, idx[plus]] = 1.0
    if minus != "gnd":
        a[:, opr, idx[minus]] = -1.0
    e = np.zeros((s.size, n, 1), complex)
    e[:, idx["out"], 0] = 1.0
    x = np.linalg.solve(np.transpose(a, (0, 2, 1)), e)[..., 0]
    return idx, x, src, opr


def transfer(stage, freq_hz, parts=None) -> np.ndarray:
    """Input-to-output response by nodal analysis (checks the closed form)."""
    _, x, src, _ = adjoint(stage, freq_hz, parts)
    return x[:, src]


def stage_noise_density(stage, freq_hz, *, en_v_hz: float, in_a_hz: float, temperature_k: float = 290.0):
    """Output noise density of one stage, V²/Hz, per contributor name."""
    elems, (plus, minus) = stage.netlist
    idx, x, _, opr = adjoint(stage, freq_hz)
    at = lambda node: 0.0 if node == "gnd" else x[:, idx[node]]  # noqa: E731
    out = {}
    for name, p, q in elems:
        if name[0] == "R":
            out[name] = 4 * BOLTZMANN * temperature_k / stage.parts[name] * np.abs(at(p) - at(q)) ** 2
    out["op-amp e_n"] = en_v_hz**2 * np.abs(x[:, opr]) ** 2
    out["op-amp i_n"] = in_a_hz**2 * (np.abs(at(plus)) ** 2 + np.abs(at(minus)) ** 2)
    return out


def cascade_noise_density(stages, freq_hz, *, en_v_hz, in_a_hz, temperature_k=290.0):
    """Total output noise density of a cascade, V²/Hz, and each stage's share (dict)."""
    f = np.asarray(freq_hz, float)
    total = np.zeros(f.size)
    per_stage = []
    for i, st in enumerate(stages):
        after = np.ones(f.size)
        for later in stages[i + 1 :]:
            after = after * np.abs(later.response(f)) ** 2
        parts = stage_noise_density(st, f, en_v_hz=en_v_hz, in_a_hz=in_a_hz, temperature_k=temperature_k)
        d = sum(parts.values()) * after
        per_stage.append({k: v * after for k, v in parts.items()})
        total = total + d
    return total, per_stage
