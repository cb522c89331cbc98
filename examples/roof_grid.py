"""A small double-layer roof grid over a fictional covered market, built in Python.

An invented demo scenario: a 6 x 4 bay square-on-square grid, 2.0 m bays and
1.5 m deep, steel tubes, pinned at the top-chord perimeter; dead load plus a
uniform snow load of 0.8 kN/m² on plan, taken as nodal loads on the top nodes.

Run:  python examples/roof_grid.py
Results must be checked by a qualified engineer; local codes and licensed
practice govern.
"""

from __future__ import annotations

import numpy as np

import spaceframe as sf


def build(nx: int = 6, ny: int = 4, bay: float = 2.0, depth: float = 1.5) -> sf.Model:
    """The roof grid model (SI units)."""
    m = sf.Model()
    ix, iy = np.meshgrid(np.arange(nx + 1), np.arange(ny + 1), indexing="ij")
    top = m.add_nodes(np.c_[ix.ravel() * bay, iy.ravel() * bay, np.zeros(ix.size)])
    bx, by = np.meshgrid(np.arange(nx), np.arange(ny), indexing="ij")
    bot = m.add_nodes(
        np.c_[(bx.ravel() + 0.5) * bay, (by.ravel() + 0.5) * bay, np.full(bx.size, -depth)]
    )
    t = top.reshape(nx + 1, ny + 1)
    b = bot.reshape(nx, ny)
    steel = {"E": 210e9, "density": 7850.0, "alpha": 12e-6}  # EN 1993-1-1 §3.2.6
    chords = np.concatenate([np.c_[t[:-1, :].ravel(), t[1:, :].ravel()],
                             np.c_[t[:, :-1].ravel(), t[:, 1:].ravel()]])
    m.add_members(chords, area=1.14e-3, group="top chords", **steel)  # ~CHS 76.1x5
    bottom = np.concatenate([np.c_[b[:-1, :].ravel(), b[1:, :].ravel()],
                             np.c_[b[:, :-1].ravel(), b[:, 1:].ravel()]])
    m.add_members(bottom, area=1.14e-3, group="bottom chords", **steel)
    corners = [t[:-1, :-1], t[1:, :-1], t[:-1, 1:], t[1:, 1:]]
    diag = np.concatenate([np.c_[b.ravel(), c.ravel()] for c in corners])
    m.add_members(diag, area=6.5e-4, group="diagonals", **steel)  # ~CHS 48.3x4.5
    edge = np.unique(np.concatenate([t[0], t[-1], t[:, 0], t[:, -1]]))
    m.add_support(edge)
    m.add_self_weight("dead", factor=1.15)  # +15 % for node balls and bolts
    # Snow 0.8 kN/m² on plan, shared by the top nodes by plan tributary area.
    trib = np.full((nx + 1, ny + 1), bay * bay)
    trib[[0, -1], :] /= 2
    trib[:, [0, -1]] /= 2
    m.add_load("snow", top, np.c_[np.zeros((top.size, 2)), -0.8e3 * trib.ravel()])
    m.add_combination("ULS", {"dead": 1.35, "snow": 1.5})
    m.add_combination("SLS", {"dead": 1.0, "snow": 1.0})
    return m


def main() -> None:
    model = build()
    results = model.solve()
    print(f"{model.n_nodes} nodes, {model.n_members} members, solver {results.solver}")
    for name, r in results.items():
        node, umax = r.max_displacement()
        it, tmax = r.max_tension()
        ic, cmax = r.max_compression()
        rz = r.reaction_total[2]
        fz = r.applied_total[2]
        print(
            f"{name:>6}: max |u| {umax * 1e3:7.2f} mm at node {node}; "
            f"max tension {tmax / 1e3:7.1f} kN (member {it}); "
            f"max compression {cmax / 1e3:7.1f} kN (member {ic}); "
            f"reactions z {rz / 1e3:8.1f} kN vs loads {fz / 1e3:8.1f} kN; "
            f"residual {r.residual:.1e}"
        )
    print("Results must be checked by a qualified engineer; local codes and licensed "
          "practice govern.")


if __name__ == "__main__":
    main()
