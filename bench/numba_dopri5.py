"""The benchmarks' compiled peer: an adaptive Dormand-Prince 5(4) loop compiled with numba, as
a performance-minded scientist would write it for a model of their own.

make_dopri5(rhs, n) compiles the loop around a numba-jitted right-hand side
rhs(t, y, p, out) of n components (p: the case's parameters). The method: Dormand & Prince
(1980) 5(4) coefficients, Hairer's initial step (HINIT), step-size controller (DOPRI5 with
beta = 0.04) and fourth-order dense output for the output ages (Hairer, Norsett & Wanner,
Solving ODEs I, 2nd ed., 1993). Benchmark-only: numba is installed by bench/work_precision.sh
into its own environment, never into the project's dependencies.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from typing import Any

# Dormand & Prince (1980) 5(4) and Hairer's dense output (DOPRI5).
C2, C3, C4, C5 = 0.2, 0.3, 0.8, 8.0 / 9.0
A21 = 0.2
A31, A32 = 3.0 / 40.0, 9.0 / 40.0
A41, A42, A43 = 44.0 / 45.0, -56.0 / 15.0, 32.0 / 9.0
A51, A52, A53, A54 = 19372.0 / 6561.0, -25360.0 / 2187.0, 64448.0 / 6561.0, -212.0 / 729.0
A61, A62, A63 = 9017.0 / 3168.0, -355.0 / 33.0, 46732.0 / 5247.0
A64, A65 = 49.0 / 176.0, -5103.0 / 18656.0
A71, A73, A74 = 35.0 / 384.0, 500.0 / 1113.0, 125.0 / 192.0
A75, A76 = -2187.0 / 6784.0, 11.0 / 84.0
E1, E3, E4 = 71.0 / 57600.0, -71.0 / 16695.0, 71.0 / 1920.0
E5, E6, E7 = -17253.0 / 339200.0, 22.0 / 525.0, -1.0 / 40.0
D1, D3 = -12715105075.0 / 11282082432.0, 87487479700.0 / 32700410799.0
D4, D5 = -10690763975.0 / 1880347072.0, 701980252875.0 / 199316789632.0
D6, D7 = -1453857185.0 / 822651844.0, 69997945.0 / 29380423.0
SAFE, FAC1, FAC2, BETA = 0.9, 0.2, 10.0, 0.04
EXPO1 = 0.2 - BETA * 0.75
WORK_ROWS = 15  # state, stage state, new state, 7 stages, 5 dense-output coefficients


def make_dopri5(rhs: Callable[..., None], n: int) -> Any:
    """The compiled dopri5_case(p, edges, grid, rtol, atol, out, work) -> (rhs calls, accepted
    steps) for `rhs`. It integrates y (n components, y = 0 at edges[0]) piece by piece between
    the edges (kinks of the model: it lands on each and restarts with a new initial step) and
    writes y at grid[g] into out[g] (grid[0] = edges[0]; out[0] = 0). work: (WORK_ROWS, n)."""
    from numba import njit

    @njit(cache=False)
    def initial_step(t, y, f0, p, rtol, atol, hmax, y1, f1):
        """Hairer's HINIT for order 5."""
        dnf, dny = 0.0, 0.0
        for s in range(n):
            sk = atol + rtol * abs(y[s])
            dnf += (f0[s] / sk) ** 2
            dny += (y[s] / sk) ** 2
        h = 1e-6 if (dnf <= 1e-10 or dny <= 1e-10) else math.sqrt(dny / dnf) * 0.01
        h = min(h, hmax)
        for s in range(n):
            y1[s] = y[s] + h * f0[s]
        rhs(t + h, y1, p, f1)
        der2 = 0.0
        for s in range(n):
            sk = atol + rtol * abs(y[s])
            der2 += ((f1[s] - f0[s]) / sk) ** 2
        der2 = math.sqrt(der2) / h
        der12 = max(abs(der2), math.sqrt(dnf))
        h1 = max(1e-6, abs(h) * 1e-3) if der12 <= 1e-15 else (0.01 / der12) ** 0.2
        return min(100.0 * abs(h), h1, hmax)

    @njit(cache=False)
    def dopri5_case(p, edges, grid, rtol, atol, out, work):
        y, y1, ys = work[0], work[1], work[2]
        k1, k2, k3, k4, k5, k6, k7 = work[3], work[4], work[5], work[6], work[7], work[8], work[9]
        r1, r2, r3, r4, r5 = work[10], work[11], work[12], work[13], work[14]
        y[:] = 0.0
        out[0, :] = 0.0
        g = 1
        nfev, accepted = 0, 0
        for piece in range(edges.size - 1):
            t, t_end = edges[piece], edges[piece + 1]
            rhs(t, y, p, k1)
            h = initial_step(t, y, k1, p, rtol, atol, t_end - t, y1, k2)
            nfev += 2
            facold = 1e-4
            reject = False
            while t < t_end:
                last = t + 1.01 * h >= t_end
                if last:
                    h = t_end - t
                for s in range(n):
                    ys[s] = y[s] + h * A21 * k1[s]
                rhs(t + C2 * h, ys, p, k2)
                for s in range(n):
                    ys[s] = y[s] + h * (A31 * k1[s] + A32 * k2[s])
                rhs(t + C3 * h, ys, p, k3)
                for s in range(n):
                    ys[s] = y[s] + h * (A41 * k1[s] + A42 * k2[s] + A43 * k3[s])
                rhs(t + C4 * h, ys, p, k4)
                for s in range(n):
                    ys[s] = y[s] + h * (A51 * k1[s] + A52 * k2[s] + A53 * k3[s] + A54 * k4[s])
                rhs(t + C5 * h, ys, p, k5)
                for s in range(n):
                    ys[s] = y[s] + h * (
                        A61 * k1[s] + A62 * k2[s] + A63 * k3[s] + A64 * k4[s] + A65 * k5[s]
                    )
                t_new = t_end if last else t + h
                rhs(t_new, ys, p, k6)
                for s in range(n):
                    y1[s] = y[s] + h * (
                        A71 * k1[s] + A73 * k3[s] + A74 * k4[s] + A75 * k5[s] + A76 * k6[s]
                    )
                rhs(t_new, y1, p, k7)
                nfev += 6
                err = 0.0
                for s in range(n):
                    sk = atol + rtol * max(abs(y[s]), abs(y1[s]))
                    es = h * (
                        E1 * k1[s] + E3 * k3[s] + E4 * k4[s] + E5 * k5[s] + E6 * k6[s] + E7 * k7[s]
                    )
                    err += (es / sk) ** 2
                err = math.sqrt(err / n)
                fac11 = err**EXPO1
                fac = fac11 / facold**BETA
                fac = max(1.0 / FAC2, min(1.0 / FAC1, fac / SAFE))
                h_new = h / fac
                if err <= 1.0:
                    facold = max(err, 1e-4)
                    accepted += 1
                    if g < grid.size and grid[g] <= t_new:
                        for s in range(n):
                            diff = y1[s] - y[s]
                            bspl = h * k1[s] - diff
                            r1[s] = y[s]
                            r2[s] = diff
                            r3[s] = bspl
                            r4[s] = diff - h * k7[s] - bspl
                            r5[s] = h * (
                                D1 * k1[s]
                                + D3 * k3[s]
                                + D4 * k4[s]
                                + D5 * k5[s]
                                + D6 * k6[s]
                                + D7 * k7[s]
                            )
                        while g < grid.size and grid[g] <= t_new:
                            theta = (grid[g] - t) / h
                            theta1 = 1.0 - theta
                            for s in range(n):
                                out[g, s] = r1[s] + theta * (
                                    r2[s] + theta1 * (r3[s] + theta * (r4[s] + theta1 * r5[s]))
                                )
                            g += 1
                    for s in range(n):
                        y[s] = y1[s]
                        k1[s] = k7[s]
                    t = t_new
                    if reject:
                        h_new = min(h_new, h)
                    reject = False
                    h = h_new
                else:
                    h = h / min(1.0 / FAC1, fac11 / SAFE)
                    reject = True
        return nfev, accepted

    return dopri5_case
