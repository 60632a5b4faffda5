"""Inventory evolution of one four-species, XUV-driven case over 10 Myr - 10 Gyr: exosieve
against scipy.integrate.solve_ivp on the same model written in numpy, at equal tolerance.

Run: python bench/bench_evolution.py [--rtol 1e-8] [--repeat 20] [--with-rk45-linear]

The case (invented system): a Sun-like star (IAU nominal mass and luminosity, the library's
XUV history defaults), an Earth-mass planet at 1 au, an exobase 500 km up whose densities follow
the inventories, exobase temperature T = 1000 K (F_xuv / 0.0046 W m^-2)^0.5 clamped to
[200, 5000] K; H, He, O, N2. H and He are lost within 1e4 and 200 years of the start, O and N2
last for Gyr: rates that differ by many orders of magnitude.

Peers (same equations, numpy right-hand side): solve_ivp with LSODA, BDF and Radau on N (the
natural form, stiff solvers), with RK45 and DOP853 on ln N (exosieve's formulation), and with
--with-rk45-linear RK45 on N (scipy's default; takes minutes: it is stiff in N). Tolerances: rtol
on every species; atol = rtol * 1e-3 * N_i0 particles in N (exosieve's default for a depletion
fraction of 1e-3), atol = rtol in ln N (the same relative accuracy).

Agreement: max |ln N - ln N_ref| where N > 1e-6 N_i0, against DOP853 on ln N at rtol 1e-13,
at exosieve's output times. Timing: best of --repeat calls (exosieve: the full Python call,
result objects included; peers: best of min(--repeat, 3)). Goal: exosieve >= 200x per case.
"""

from __future__ import annotations

import argparse
import math
import time

import numpy as np
from scipy import integrate

import exosieve
from exosieve import constants as c

NAMES = ("H", "He", "O", "N2")
N0 = {"H": 3e40, "He": 1e38, "O": 1e42, "N2": 1e42}
N_EXO = {"H": 1e11, "He": 1e12, "O": 1e13, "N2": 1e13}
F_REF = 0.0046
SPAN = (10 * c.MYR, 10 * c.GYR)


def make_case():
    star = exosieve.Star(c.M_SUN, c.L_SUN)
    planet = exosieve.Planet(c.M_EARTH, c.R_EARTH, c.AU, star)
    r_exo = c.R_EARTH + 500e3
    temperature = exosieve.XuvTemperature(1000.0, F_REF, 0.5, 200.0, 5000.0)
    exobase = exosieve.PrescribedExobase(r_exo, temperature, N_EXO)
    return star, planet, r_exo, exobase


def numpy_model(star, planet, r_exo):
    """Right-hand sides d ln N/dt and dN/dt of the same model in numpy."""
    m = np.array([exosieve.species(s).mass for s in NAMES])
    per_particle = np.array([N_EXO[s] / N0[s] for s in NAMES])  # n_i0 / N_i0
    t_sat = star.saturation_time
    l_sat = star.saturation_ratio * star.luminosity
    beta = star.decay_index
    area = 4 * np.pi * r_exo**2
    gm = c.G * planet.mass

    def loss_per_particle(t):
        L = l_sat if t <= t_sat else l_sat * (t / t_sat) ** -beta
        F = L / (4 * np.pi * c.AU**2)
        T = min(5000.0, max(200.0, 1000.0 * (F / F_REF) ** 0.5))
        lam = gm * m / (c.K_B * T * r_exo)
        v0 = np.sqrt(2 * c.K_B * T / m)
        return area * per_particle * v0 / (2 * np.sqrt(np.pi)) * (1 + lam) * np.exp(-lam)

    def rhs_log(t, y):
        return -loss_per_particle(t)

    def rhs_linear(t, n):
        return -loss_per_particle(t) * n

    return rhs_log, rhs_linear


def best_time(call, repeat):
    best = math.inf
    out = None
    for _ in range(repeat):
        start = time.perf_counter()
        out = call()
        best = min(best, time.perf_counter() - start)
    return best, out


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rtol", type=float, default=1e-8)
    parser.add_argument("--repeat", type=int, default=20)
    parser.add_argument("--with-rk45-linear", action="store_true")
    args = parser.parse_args()
    rtol = args.rtol

    star, planet, r_exo, exobase = make_case()
    rhs_log, rhs_linear = numpy_model(star, planet, r_exo)
    y0 = np.log([N0[s] for s in NAMES])
    n0 = np.exp(y0)

    t_x, result = best_time(
        lambda: exosieve.evolve(planet, exobase, N0, SPAN, rtol=rtol), args.repeat
    )
    times = result.time
    reference = integrate.solve_ivp(
        rhs_log, SPAN, y0, method="DOP853", rtol=1e-13, atol=1e-13, t_eval=times
    )
    y_ref = reference.y.T
    kept = y_ref - y0 > math.log(1e-6)

    def disagreement(log_n):
        return float(np.max(np.abs(log_n - y_ref)[kept]))

    with np.errstate(divide="ignore"):
        x_error = disagreement(np.log(result.inventory.values))
    print(f"case: {', '.join(NAMES)}; t = 10 Myr .. 10 Gyr; rtol = {rtol:g}")
    print(
        "depletion times [yr]: "
        + ", ".join(
            f"{s} {'-' if t is None else f'{t / c.YEAR - 1e7:.4g} after start'}"
            for s, t in result.depletion_time.items()
        )
    )
    print(
        f"{'method':<28}{'time [ms]':>11}{'steps':>8}{'rhs evals':>11}"
        f"{'max |d ln N|':>14}{'exosieve x':>12}"
    )
    print(
        f"{'exosieve (dopri5, ln N)':<28}{t_x * 1e3:>11.3f}{result.steps:>8d}"
        f"{result.rhs_evaluations:>11d}{x_error:>14.2e}{'1':>12}"
    )

    peers = [
        ("LSODA, N", "LSODA", rhs_linear, n0, rtol * 1e-3 * n0, True),
        ("BDF, N", "BDF", rhs_linear, n0, rtol * 1e-3 * n0, True),
        ("Radau, N", "Radau", rhs_linear, n0, rtol * 1e-3 * n0, True),
        ("RK45, ln N", "RK45", rhs_log, y0, rtol, False),
        ("DOP853, ln N", "DOP853", rhs_log, y0, rtol, False),
    ]
    if args.with_rk45_linear:
        peers.append(("RK45, N (scipy default)", "RK45", rhs_linear, n0, rtol * 1e-3 * n0, True))
    best: dict[bool, tuple[str, float]] = {}
    for label, method, rhs, start, atol, linear in peers:
        repeat = 1 if label.startswith("RK45, N") else min(args.repeat, 3)

        def solve(rhs=rhs, start=start, method=method, atol=atol):
            return integrate.solve_ivp(
                rhs, SPAN, start, method=method, rtol=rtol, atol=atol, dense_output=True
            )

        t_p, sol = best_time(solve, repeat)
        values = sol.sol(times).T
        with np.errstate(divide="ignore", invalid="ignore"):
            log_n = np.log(np.maximum(values, 1e-300)) if linear else values
        error = disagreement(log_n)
        ratio = t_p / t_x
        print(
            f"{label:<28}{t_p * 1e3:>11.3f}{len(sol.t) - 1:>8d}{sol.nfev:>11d}"
            f"{error:>14.2e}{ratio:>12.0f}"
        )
        if sol.success and error < 100 * rtol and (linear not in best or t_p < best[linear][1]):
            best[linear] = (label, t_p)
    for linear, form in ((True, "N (the model as written)"), (False, "ln N (exosieve's form)")):
        if linear in best:
            label, t_p = best[linear]
            ratio = t_p / t_x
            verdict = "met" if ratio >= 200 else "not met"
            print(
                f"fastest peer on {form} within 100 rtol of the reference: {label}, "
                f"{ratio:.0f}x slower than exosieve (goal >= 200x: {verdict})"
            )


if __name__ == "__main__":
    main()
