"""Exobase finding and per-species escape fluxes for many thermospheres: exosieve against the
same model written with scipy (solve_ivp + brentq).

Run: python bench/bench_thermosphere.py [--cases N] [--peer-cases P] [--repeat R]

exosieve solves all N cases (default 1e4) in one call, single-threaded and on all cores. The
scipy peer loops over cases in Python; it runs on the first P cases (default 200, or all with
--peer-cases N) and its time per case is compared with exosieve's. The peer integrates
d ln n_i/dr for every species with solve_ivp (DOP853, rtol = atol = 1e-10) from the homopause
to 3000 km above it, scans the exobase criterion in the same steps and refines with brentq;
fluxes as in DESIGN 3.2/3.4. Goal: exosieve >= 100x faster per case.
"""

from __future__ import annotations

import argparse
import time

import numpy as np
from scipy import integrate, optimize

import exosieve
from exosieve.constants import K_B, M_EARTH, R_EARTH, G

SPECIES = ("N2", "O2", "O", "He", "H")
R_H = R_EARTH + 120e3
T_H = 360.0
SHAPE = 1.0 / 50e3


def make_cases(n: int, rng: np.random.Generator) -> dict[str, np.ndarray]:
    x_h = 10 ** rng.uniform(-7.0, -5.0, n)
    x_he = 10 ** rng.uniform(-6.0, -4.5, n)
    return {
        "exobase_temperature": rng.uniform(600.0, 1600.0, n),
        "homopause_density": 10 ** rng.uniform(17.0, 18.3, n),
        "N2": np.full(n, 0.75),
        "O2": np.full(n, 0.10),
        "O": 0.15 - x_h - x_he,
        "He": x_he,
        "H": x_h,
    }


# ---------------------------------------------------------------- the scipy peer


def peer_diffusion_parameter(a, b, temperature, fits):
    """b = n D: a measured A T^s fit where tabulated, else Chapman–Enskog (Neufeld 1972)."""
    fit = fits.get((a.name, b.name)) or fits.get((b.name, a.name))
    if fit is not None:
        return fit.A * temperature**fit.s
    sigma = 0.5 * (a.lj_diameter + b.lj_diameter)
    ts = temperature / np.sqrt(a.lj_well_depth * b.lj_well_depth)
    omega = (
        1.06036 / ts**0.15610
        + 0.19300 / np.exp(0.47635 * ts)
        + 1.03587 / np.exp(1.52996 * ts)
        + 1.76474 / np.exp(3.89411 * ts)
    )
    mu = a.mass * b.mass / (a.mass + b.mass)
    return 3.0 / (16.0 * sigma**2 * omega) * np.sqrt(2.0 * K_B * temperature / (np.pi * mu))


def peer_case(n_h, x, t_inf, props, fits, rtol=1e-10):
    """Exobase radius [m] and escape fluxes [m^-2 s^-1] of one thermosphere; the density
    profiles integrated with solve_ivp at relative and absolute tolerance `rtol` on ln n."""
    mass, sigma, alpha, objs = props
    M, r_h = M_EARTH, R_H

    def temperature(r):
        return t_inf - (t_inf - T_H) * np.exp(-SHAPE * (r - r_h))

    def slope(r):
        return SHAPE * (t_inf - T_H) * np.exp(-SHAPE * (r - r_h))

    def rhs(r, y):
        T = temperature(r)
        return -mass * G * M / (r * r * K_B * T) - (1.0 + alpha) * slope(r) / T

    top = r_h + 3.0e6
    present = x > 0
    sol = integrate.solve_ivp(
        rhs,
        (r_h, top),
        np.log(np.where(present, x, 1.0) * n_h),
        method="DOP853",
        rtol=rtol,
        atol=rtol,
        dense_output=True,
    )

    def log_n(r):
        return np.where(present, sol.sol(r), -np.inf)

    def crit(r):
        ln = log_n(r)
        top_ln = ln.max()
        w = np.exp(ln - top_ln)
        ns = w @ sigma
        m_mean = (w @ mass) / w.sum()
        h = K_B * temperature(r) * r * r / (G * M * m_mean)
        return -(top_ln + np.log(ns)) - np.log(h), w, ns

    r_lo = r_h
    f_lo, w, ns = crit(r_lo)
    if f_lo >= 0:
        return np.nan, np.full(len(mass), np.nan)
    while True:
        heaviest = mass[w * sigma >= 1e-3 * ns].max()
        T = temperature(r_lo)
        step = min(0.5 * K_B * T * r_lo**2 / (G * M * heaviest), 0.1 * r_lo, 0.5 * T / slope(r_lo))
        r_hi = min(r_lo + step, top)
        f_hi, w, ns = crit(r_hi)
        if f_hi >= 0:
            break
        if r_hi >= top:
            return np.nan, np.full(len(mass), np.nan)
        r_lo = r_hi
    r_e = optimize.brentq(lambda r: crit(r)[0], r_lo, r_hi, xtol=1e-13 * r_hi, rtol=1e-15)

    # Jeans flux at the exobase (DESIGN 3.2), then the coupled flux (DESIGN 3.4).
    T_e = temperature(r_e)
    n_e = np.exp(log_n(r_e))
    lam = G * M * mass / (K_B * T_e * r_e)
    v0 = np.sqrt(2.0 * K_B * T_e / mass)
    phi_j = n_e * v0 / (2.0 * np.sqrt(np.pi)) * (1.0 + lam) * np.exp(-lam)
    g_h = G * M / r_h**2
    flux = np.empty(len(mass))
    for i in range(len(mass)):
        others = [j for j in range(len(mass)) if j != i and x[j] > 0]
        rest = sum(x[j] for j in others)
        m_a = sum(x[j] / rest * mass[j] for j in others)
        inv_b = sum(
            x[j] / rest / peer_diffusion_parameter(objs[i], objs[j], T_H, fits) for j in others
        )
        beta = (m_a - mass[i]) * g_h / (K_B * T_H)
        z = r_e - r_h
        depth = z if beta == 0 else -np.expm1(-beta * z) / beta
        flux[i] = phi_j[i] / (1.0 + phi_j[i] * depth * inv_b / x[i])
    return r_e, flux


def run_peer(cases, count):
    objs = [exosieve.species(s) for s in SPECIES]
    props = (
        np.array([o.mass for o in objs]),
        np.array([o.cross_section for o in objs]),
        np.array([o.thermal_diffusion_factor for o in objs]),
        objs,
    )
    fits = {(p.species_a, p.species_b): p for p in exosieve.diffusion_pairs()}
    radius = np.empty(count)
    flux = np.empty((count, len(SPECIES)))
    for k in range(count):
        x = np.array([cases[s][k] for s in SPECIES])
        radius[k], flux[k] = peer_case(
            cases["homopause_density"][k], x, cases["exobase_temperature"][k], props, fits
        )
    return radius, flux


def run_ours(cases, threads):
    return exosieve.solve_thermospheres(
        M_EARTH,
        R_EARTH,
        R_H,
        cases["homopause_density"],
        {s: cases[s] for s in SPECIES},
        cases["exobase_temperature"],
        T_H,
        SHAPE,
        threads=threads,
    )


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--cases", type=int, default=10_000, help="thermospheres")
    parser.add_argument("--peer-cases", type=int, default=200, help="cases run by the peer")
    parser.add_argument("--repeat", type=int, default=3, help="timed repetitions (best kept)")
    opts = parser.parse_args()

    cases = make_cases(opts.cases, np.random.default_rng(1))
    peer_count = min(opts.peer_cases, opts.cases)

    timings = {}
    for threads in (1, 0):
        best = np.inf
        for _ in range(opts.repeat):
            start = time.perf_counter()
            ours = run_ours(cases, threads)
            best = min(best, time.perf_counter() - start)
        timings[threads] = best
    start = time.perf_counter()
    peer_radius, peer_flux = run_peer(cases, peer_count)
    t_peer = time.perf_counter() - start

    per_ours_1 = timings[1] / opts.cases
    per_ours_all = timings[0] / opts.cases
    per_peer = t_peer / peer_count
    found = ours.found[:peer_count]
    assert np.array_equal(found, np.isfinite(peer_radius)), "exobase found by one side only"
    dr = np.max(np.abs(ours.exobase_radius[:peer_count][found] - peer_radius[found]))
    ours_flux = np.stack([ours.escape_flux[s][:peer_count] for s in SPECIES], axis=1)
    light = [SPECIES.index(s) for s in ("O", "He", "H")]
    rel = np.abs(ours_flux[found][:, light] / peer_flux[found][:, light] - 1.0)

    print(
        f"exobase + escape fluxes of {len(SPECIES)} species, Bates thermospheres, "
        f"{opts.cases} cases ({int(ours.found.sum())} with an exobase)"
    )
    print(f"  exosieve, 1 thread   : {timings[1] * 1e3:9.1f} ms  ({per_ours_1 * 1e6:7.1f} us/case)")
    print(
        f"  exosieve, all threads: {timings[0] * 1e3:9.1f} ms  ({per_ours_all * 1e6:7.1f} us/case)"
    )
    print(
        f"  scipy peer, {peer_count} cases : {t_peer * 1e3:9.1f} ms  "
        f"({per_peer * 1e6:7.1f} us/case)"
    )
    print(
        f"  ratio per case, peer/exosieve: {per_peer / per_ours_1:.0f}x on 1 thread, "
        f"{per_peer / per_ours_all:.0f}x on all threads   (goal >= 100x)"
    )
    print(f"  largest exobase radius difference: {dr:.2e} m")
    print(f"  largest relative difference in the O, He, H fluxes: {rel.max():.1e}")


if __name__ == "__main__":
    main()
