"""A small DC solver for what is not a plain string: resistors and diodes between nets held
by rails and pins (a bleeder across an LED, LEDs with their own resistors on a shared one).

Nodal analysis with Newton's method, batched over the corners (numpy, a (C, n, n) stack).
Diodes follow the SPICE law with RS as a resistor to an internal node; the junction step is
limited as SPICE limits it, so the iteration does not overflow.

    v, currents = solve_network(["a", "m"], {"vdd": (3.3, 0.0)}, [("vdd", "a", 100.0)],
                                [("a", "0", led)], temperature_K)
"""

from __future__ import annotations

import numpy as np

from drc.diode import saturation_current, thermal_voltage

GMIN = 1e-12           # siemens from every node to ground, as SPICE adds
MAX_ITERATIONS = 300


class NetworkError(Exception):
    pass


def solve_network(free_nets: list[str], held: dict[str, tuple], resistors: list[tuple],
                  diodes: list[tuple], temperature_K) -> tuple[dict[str, np.ndarray], list[np.ndarray]]:
    """Node voltages of the free nets and each diode's current, at every corner.

    held: net -> (voltage (C,) or float, source resistance ohm); ground "0" is held at 0.
    resistors: (net a, net b, ohm (C,) or float); diodes: (anode, cathode, DiodeParams).
    """
    t = np.atleast_1d(np.asarray(temperature_K, dtype=float))
    count = t.shape[0]
    nodes = list(free_nets)
    index = {n: k for k, n in enumerate(nodes)}
    elements = []                                  # (a, b, conductance (C,)) with indices/None
    fixed_v: dict[str, np.ndarray] = {"0": np.zeros(count)}
    sources = []                                   # (node index, V (C,), G) Norton sources
    for net, (volts, r_source) in held.items():
        v = np.broadcast_to(np.asarray(volts, dtype=float), (count,)).astype(float)
        if r_source and r_source > 0:
            k = len(nodes)
            nodes.append(f"{net}#pin")
            index[nodes[-1]] = k
            sources.append((k, v, 1.0 / r_source))
            fixed_v[net] = None                    # reached through its internal node
            index[net] = k
        else:
            fixed_v[net] = v
    junctions = []
    for a, b, ohm in resistors:
        g = 1.0 / np.broadcast_to(np.asarray(ohm, dtype=float), (count,))
        elements.append((a, b, g))
    for a, b, d in diodes:
        if d.RS > 0:
            k = len(nodes)
            mid = f"{a}->{b}#rs{k}"
            nodes.append(mid)
            index[mid] = k
            elements.append((a, mid, np.full(count, 1.0 / d.RS)))
            junctions.append((mid, b, d))
        else:
            junctions.append((a, b, d))
    n = len(nodes)
    is_t = [saturation_current(d, t) for _, _, d in junctions]
    nvt = [d.N * thermal_voltage(t) for _, _, d in junctions]
    vcrit = [nv * np.log(nv / (np.sqrt(2.0) * i)) for nv, i in zip(nvt, is_t)]

    def volt(v, net):
        if net in index and (net not in fixed_v or fixed_v[net] is None):
            return v[:, index[net]]
        return fixed_v[net]

    v = np.zeros((count, n))
    for k, volts, _ in sources:
        v[:, k] = volts
    for iteration in range(MAX_ITERATIONS):
        jac = np.zeros((count, n, n))
        res = np.zeros((count, n))
        jac[:, range(n), range(n)] += GMIN
        res += GMIN * v
        for k, volts, g in sources:
            jac[:, k, k] += g
            res[:, k] += g * (v[:, k] - volts)

        def stamp(a, b, current, conductance):
            ia = index.get(a) if (a in index and fixed_v.get(a, None) is None) else None
            ib = index.get(b) if (b in index and fixed_v.get(b, None) is None) else None
            if ia is not None:
                res[:, ia] += current
                jac[:, ia, ia] += conductance
            if ib is not None:
                res[:, ib] -= current
                jac[:, ib, ib] += conductance
            if ia is not None and ib is not None:
                jac[:, ia, ib] -= conductance
                jac[:, ib, ia] -= conductance

        for a, b, g in elements:
            stamp(a, b, g * (volt(v, a) - volt(v, b)), g)
        for j, (a, b, d) in enumerate(junctions):
            vj = volt(v, a) - volt(v, b)
            x = np.minimum(vj / nvt[j], 500.0)
            e = np.exp(x)
            stamp(a, b, is_t[j] * (e - 1.0), is_t[j] * e / nvt[j] + GMIN)
        try:
            step = np.linalg.solve(jac, -res[:, :, None])[:, :, 0]
        except np.linalg.LinAlgError:
            raise NetworkError("the network has no unique operating point") from None
        new = v + step
        # limit each junction's change (SPICE's junction limiting, simplified)
        scale = np.ones(count)
        for j, (a, b, d) in enumerate(junctions):
            old = volt(v, a) - volt(v, b)
            proposed = volt(new, a) - volt(new, b)
            big = (proposed > vcrit[j]) & (np.abs(proposed - old) > 2 * nvt[j])
            if np.any(big):
                with np.errstate(invalid="ignore", divide="ignore"):
                    target = np.where(old > 0,
                                      old + nvt[j] * np.log1p(np.maximum(proposed - old, 0) / nvt[j]),
                                      nvt[j] * np.log(np.maximum(proposed / nvt[j], 1.0)))
                    ratio = np.where(big & (np.abs(proposed - old) > 0),
                                     np.abs(target - old) / np.abs(proposed - old), 1.0)
                scale = np.minimum(scale, np.clip(np.nan_to_num(ratio, nan=1.0), 1e-3, 1.0))
        v = v + scale[:, None] * step
        if np.all(np.abs(scale[:, None] * step) < 1e-10 + 1e-9 * np.abs(v)) and np.all(scale == 1.0):
            break
    else:
        raise NetworkError("the operating point did not converge")
    voltages = {net: v[:, index[net]] for net in free_nets}
    currents = []
    for j, (a, b, d) in enumerate(junctions):
        vj = volt(v, a) - volt(v, b)
        currents.append(is_t[j] * np.expm1(np.minimum(vj / nvt[j], 500.0)))
    return voltages, currents
