"""Baseline for the benchmarks: dynamic relaxation with kinetic damping.

A textbook implementation, vectorized with numpy, of the method as written
by Barnes 1999, "Form finding and analysis of tension structures by dynamic
relaxation", Int. J. Space Structures 14(2) (from memory): every free DOF
gets a fictitious mass from the stiffness it sees, the nodes are moved by
the explicit central-difference update of the out-of-balance force, and at
each peak of the total kinetic energy the velocities are set to zero and
the nodes put back to the (interpolated) peak position.

    v_{t+dt/2} = v_{t-dt/2} + dt R_t / m,     x_{t+dt} = x_t + dt v_{t+dt/2}
    m_i = (dt^2 / 2) sum_e (EA/L0 + |T|/L)    (stability: lambda = 2 / dt^2)

At a kinetic-energy peak the position a step and a half back is a good
estimate of the peak: ``x <- x - 1.5 dt v + dt^2 R / (2 m)`` with R the
last residual (Barnes 1999).  Masses are recomputed at every peak.

It solves straight tension-only bars (the saddle-net benchmark) to the same
relative residual as cablefe's Newton driver, ``||r|| <= tol * reference``
with reference = max(||f_ext||, ||sum of |element forces| per DOF||) over
the free DOFs.  Run from ``bench_nets.py``; not part of the package.
"""
from __future__ import annotations

import time

import numpy as np


def solve_bars(model, factors, tolerance: float = 1e-8, time_limit: float = 600.0,
               max_steps: int = 10_000_000) -> dict:
    """Dynamic relaxation of a model made of bars only, at load factor 1.

    Parameters
    ----------
    model : cablefe.model.Model
        Geometry, supports, bar properties and loads (nodal vector) are read
        from it; the element forces are computed here.
    factors : mapping
        Load case factors.
    tolerance : float
        Relative residual to reach.
    time_limit : float
        Wall time after which the run stops unconverged, s.

    Returns
    -------
    dict
        ``converged``, ``steps``, ``resets``, ``seconds``, ``residual``
        (relative) and ``positions`` (nn, 3) m.
    """
    t = model.families["bar"]
    if len(t) == 0 or any(len(model.families[f]) for f in ("cable", "beam")):
        raise ValueError("the baseline handles models made of bars only")
    loads = model.combined_loads(factors)
    i, j = t.nodes[:, 0], t.nodes[:, 1]
    L0 = t.props["unstressed_length"]
    EA = t.props["EA"]
    tension_only = t.props["tension_only"]
    nn = len(model.node_ids)
    free = ~model.restrained[model.dof[:, :3]]               # (nn, 3)
    f_ext = loads.nodal[model.dof[:, :3]]                     # (nn, 3)
    x = model.coordinates.copy()
    dt = 1.0

    def forces(x):
        d = x[j] - x[i]
        L = np.sqrt(np.einsum("ni,ni->n", d, d))
        N = EA * (L - L0) / L0
        N = np.where(tension_only & (N < 0.0), 0.0, N)
        fe = (N / L)[:, None] * d                             # force on node j from the bar
        f_int = np.empty((nn, 3))
        mag = np.empty((nn, 3))
        for c in range(3):
            f_int[:, c] = (np.bincount(j, fe[:, c], nn) - np.bincount(i, fe[:, c], nn))
            mag[:, c] = np.bincount(j, np.abs(fe[:, c]), nn) + np.bincount(i, np.abs(fe[:, c]), nn)
        return f_int, mag, N, L

    def masses(N, L):
        k = EA / L0 + np.abs(N) / L
        s = np.bincount(i, k, nn) + np.bincount(j, k, nn)
        return np.maximum(0.5 * dt * dt * s, 1e-300)[:, None]

    start = time.perf_counter()
    f_int, mag, N, L = forces(x)
    m = masses(N, L)
    v = np.zeros((nn, 3))
    ke_old = 0.0
    steps = resets = 0
    ref_ext = float(np.linalg.norm(f_ext[free]))
    ratio = np.inf
    converged = False
    while steps < max_steps:
        R = np.where(free, f_ext - f_int, 0.0)
        ref = max(ref_ext, float(np.linalg.norm(mag[free])), np.finfo(float).tiny)
        ratio = float(np.linalg.norm(R[free])) / ref
        if ratio <= tolerance:
            converged = True
            break
        if steps % 1000 == 0 and time.perf_counter() - start > time_limit:
            break
        v += dt * R / m
        ke = float(np.einsum("ni,ni->", m * v, v))
        if ke < ke_old:
            # kinetic-energy peak passed: back to the estimated peak, restart at rest
            x += dt * v - 1.5 * dt * v + 0.5 * dt * dt * R / m
            v[:] = 0.0
            ke_old = 0.0
            resets += 1
            f_int, mag, N, L = forces(x)
            m = masses(N, L)
            steps += 1
            continue
        ke_old = ke
        x += dt * v
        f_int, mag, N, L = forces(x)
        steps += 1
    return {"converged": converged, "steps": steps, "resets": resets,
            "seconds": time.perf_counter() - start, "residual": ratio, "positions": x}
