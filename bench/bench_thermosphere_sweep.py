"""Thermosphere sweep: the per-case cost of exosieve.compare() against scipy and numba peers of
the same model, compared at equal achieved accuracy (work-precision).

Run: python bench/bench_thermosphere_sweep.py [--cases N] [--peer-cases P]
         [--rtols 1e-4,...] [--peer-rtols 1e-3,...] [--peer-methods RK45,DOP853] [--cpu K]
         [--skip-numba]
 or: bash bench/work_precision.sh --thermosphere [the same options]   (with the numba peer)

The model (invented Earth-like planets, seeded): an Earth mass and radius 1 au from a Sun-like
star whose XUV output is saturated at 10^-3.5 L_bol until 100 Myr, then decays as (t/t_sat)^-1.23;
5 species N2, O2, O, He, H well mixed below a homopause 120 km up (density 10^17-10^18.3 m^-3,
H and He log-uniform shares); a Bates (1959) temperature profile from 360 K at the homopause
(shape 1/50 km^-1) to T_inf = T_ref (F_xuv/F_ref)^gamma (T_ref 750-1000 K, gamma 0.3-0.45,
F_ref the flux at 4.5 Gyr) clamped to [500, 1800] K; diffusive equilibrium above the homopause
with the species' thermal-diffusion factors; the exobase where the mean free path equals the
scale height; each species' escape the coupled diffusion-Jeans flux (DESIGN 3.4, measured
binary-diffusion fits first, else Chapman-Enskog); the homopause shares following the
inventories, x_i = x_i0 (N_i/N_i0) / sum_j x_j0 (N_j/N_j0); a 1 bar column; ages 10 Myr-10 Gyr,
output at 7 log-spaced ages.

exosieve: compare() on a DataFrame of thermosphere rows (the case-table columns), one thread,
the exobase found by the core at every right-hand-side evaluation. The peer: scipy's solve_ivp
over time in u = ln(N/N0) (atol = rtol: an absolute error in u is a relative error in N; in ln N
itself, rtol |ln N| ~ 100 rtol would dominate the error test), restarted at
the kinks of T(t) (end of saturation, clamp crossings, computed in closed form); at every
right-hand-side call the thermosphere of bench_thermosphere.peer_case (solve_ivp DOP853 for the
density profiles at 1e-3 of the outer rtol, floored at 1e-12, capped at 1e-8; the exobase
bracketed by steps, then brentq). Both integrate the same rate law.

The compiled peer (where numba is installed: bench/work_precision.sh --thermosphere runs this
file in the benchmarks' own environment): the same model and rate law in numba (see
build_numba_peer: the densities in closed form but for one quadrature, the exobase by Newton
from the previous call's), integrated by numba_dopri5's Dormand-Prince loop, on all N cases at
each of --rtols, the best of --repeat runs.

Accuracy: the largest relative error of N/N0 over the cases, species and output ages where the
reference N/N0 > 1e-3; the reference is exosieve at rtol 1e-12 (and the peer's tightest run
against it shows how far the two codes' models agree). Cost per case: wall clock on one CPU
(the process pinned to it), exosieve the best of --repeat runs over N cases, the peer one run
over P cases. Equal accuracy: each side's cost is interpolated log-log on its work-precision
front (runs ordered by cost, each more accurate than every cheaper one) at target errors both
sides reach; the ratio peer / exosieve is printed beside its goal (>= 100x). Benchmarks are not
tests: nothing here asserts a speed.
"""

from __future__ import annotations

import argparse
import math
import os
import sys
import time
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
from scipy import integrate

sys.path.insert(0, str(Path(__file__).resolve().parent))
from bench_thermosphere import (  # noqa: E402
    R_H,
    SHAPE,
    SPECIES,
    T_H,
    peer_case,
    peer_diffusion_parameter,
)

import exosieve  # noqa: E402
from exosieve.constants import AU, GYR, K_B, L_SUN, M_EARTH, MYR, R_EARTH, G  # noqa: E402

T_START, T_END = 10 * MYR, 10 * GYR
AGES = np.geomspace(T_START, T_END, 8)[1:]  # output ages after the start [s]
KEPT = 1e-3  # errors are measured where the reference N/N0 is above this
XUV = {"ratio": 10**-3.5, "time": 100 * MYR, "index": 1.23}
T_MIN, T_MAX = 500.0, 1800.0
PRESSURE = 1e5  # [Pa]


@dataclass
class Case:
    homopause_density: float  # [m^-3]
    x: np.ndarray  # homopause (well-mixed) mole fractions, SPECIES order
    t_ref: float  # [K]
    gamma: float  # [1]


def make_cases(n: int, seed: int = 11) -> list[Case]:
    rng = np.random.default_rng(seed)
    out = []
    for _ in range(n):
        x_h = 10 ** rng.uniform(-6.5, -5.0)
        x_he = 10 ** rng.uniform(-6.0, -4.5)
        x = np.array([0.75, 0.10, 0.15 - x_h - x_he, x_he, x_h])
        out.append(
            Case(10 ** rng.uniform(17.0, 18.3), x, rng.uniform(750, 1000), rng.uniform(0.3, 0.45))
        )
    return out


# ------------------------------------------------------------------------------- the star


def saturated_flux() -> float:
    """XUV flux at the planet while saturated [W m^-2]."""
    return XUV["ratio"] * L_SUN / (4 * math.pi * AU**2)


def xuv_flux(t: float) -> float:
    f = saturated_flux()
    return f if t <= XUV["time"] else f * (t / XUV["time"]) ** -XUV["index"]


F_REF = xuv_flux(4.5 * GYR)


def exobase_temperature(t: float, case: Case) -> float:
    return min(T_MAX, max(T_MIN, case.t_ref * (xuv_flux(t) / F_REF) ** case.gamma))


def kinks(case: Case) -> list[float]:
    """Ages in (T_START, T_END) where T(t) has a kink: end of saturation, clamp crossings."""
    out = [XUV["time"]]
    for clamp in (T_MIN, T_MAX):
        flux = F_REF * (clamp / case.t_ref) ** (1.0 / case.gamma)
        if flux < saturated_flux():
            out.append(XUV["time"] * (saturated_flux() / flux) ** (1.0 / XUV["index"]))
    return sorted(t for t in out if T_START < t < T_END)


# ---------------------------------------------------------------------------- exosieve side


def frame(cases: list[Case]) -> Any:
    import pandas as pd

    n = len(cases)
    data: dict[str, Any] = {
        "case": [f"case {k}" for k in range(n)],
        "planet_mass [M_earth]": [1.0] * n,
        "planet_radius [R_earth]": [1.0] * n,
        "homopause_altitude [km]": [(R_H - R_EARTH) / 1e3] * n,
        "homopause_density [m-3]": [c.homopause_density for c in cases],
        "homopause_temperature [K]": [T_H] * n,
        "bates_shape [km-1]": [SHAPE * 1e3] * n,
        "diffusion_limited [1]": [1.0] * n,
        "diffusion_source": ["measured"] * n,
        "temperature_reference [K]": [c.t_ref for c in cases],
        "temperature_reference_flux [W m-2]": [F_REF] * n,
        "temperature_exponent [1]": [c.gamma for c in cases],
        "temperature_min [K]": [T_MIN] * n,
        "temperature_max [K]": [T_MAX] * n,
        "semi_major_axis [au]": [1.0] * n,
        "star_mass [M_sun]": [1.0] * n,
        "star_luminosity [L_sun]": [1.0] * n,
        "xuv_saturation_ratio [1]": [XUV["ratio"]] * n,
        "xuv_saturation_time [s]": [XUV["time"]] * n,
        "xuv_decay_index [1]": [XUV["index"]] * n,
        "surface_pressure [bar]": [PRESSURE / 1e5] * n,
    }
    for j, s in enumerate(SPECIES):
        data[f"x_{s}"] = [c.x[j] for c in cases]
    return pd.DataFrame(data)


def run_exosieve(table: Any, rtol: float) -> tuple[np.ndarray, Any]:
    """N/N0 [case x age x species] in SPECIES order, and the comparison."""
    result = exosieve.compare(
        table, times=AGES, t_start=T_START, t_end=T_END, rtol=rtol, threads=1, progress=False
    )
    errors = [e for e in result["error"] if e]
    if errors:
        raise RuntimeError(f"exosieve: {len(errors)} cases failed, first: {errors[0]}")
    order = [list(result.species).index(s) for s in SPECIES]
    return np.asarray(result["retained_fraction"])[:, :, order], result


# ------------------------------------------------------------------------------ scipy peer


def peer_props() -> tuple[Any, Any]:
    objs = [exosieve.species(s) for s in SPECIES]
    props = (
        np.array([o.mass for o in objs]),
        np.array([o.cross_section for o in objs]),
        np.array([o.thermal_diffusion_factor for o in objs]),
        objs,
    )
    fits = {(p.species_a, p.species_b): p for p in exosieve.diffusion_pairs()}
    return props, fits


def initial_inventories(case: Case, mass: np.ndarray) -> np.ndarray:
    """N_i0 [particles] of the 1 bar column: N = P 4 pi R^2 / (g m_mean), g = G M / R^2, shared
    by the x_i."""
    total = PRESSURE * 4 * math.pi * R_EARTH**2 / (G * M_EARTH / R_EARTH**2 * (case.x @ mass))
    return total * case.x


def peer_run(case: Case, rtol: float, method: str, props: Any, fits: Any) -> tuple[np.ndarray, int]:
    """N/N0 [age x species] and the number of right-hand-side calls."""
    y0 = np.log(initial_inventories(case, props[0]))
    inner = min(1e-8, max(1e-12, 1e-3 * rtol))
    calls = 0

    def rhs(t: float, y: np.ndarray) -> np.ndarray:
        nonlocal calls
        calls += 1
        # ln x_i; a trace below 1e-30 is solved at 1e-30 and its flux scaled back (a trace's
        # density and coupled flux are linear in its share, and it does not move the exobase).
        lx = np.log(case.x) + y
        top = lx.max()
        lx -= top + np.log(np.exp(lx - top).sum())
        used = np.maximum(lx, math.log(1e-30))
        r_e, flux = peer_case(
            case.homopause_density,
            np.exp(used),
            exobase_temperature(t, case),
            props,
            fits,
            rtol=inner,
        )
        if not np.isfinite(r_e):
            raise RuntimeError(f"peer: no exobase at t = {t:.4g} s")
        with np.errstate(divide="ignore"):
            log_rate = np.log(4 * math.pi * r_e**2 * flux) + (lx - used)
        return -np.exp(log_rate - (y0 + y))

    edges = [T_START, *kinks(case), T_END]
    y = np.zeros(len(SPECIES))  # u = ln(N/N0): an absolute error in u is a relative one in N
    out = np.empty((len(AGES), len(SPECIES)))
    for a, b in zip(edges[:-1], edges[1:], strict=True):
        inside = (AGES > a) & (AGES <= b)
        ages = AGES[inside]
        grid = ages if ages.size and ages[-1] == b else np.append(ages, b)  # ends at b
        sol = integrate.solve_ivp(rhs, (a, b), y, method=method, rtol=rtol, atol=rtol, t_eval=grid)
        if sol.status != 0:
            raise RuntimeError(f"peer: {sol.message}")
        out[inside] = np.exp(sol.y[:, : ages.size].T)
        y = sol.y[:, -1]
    return out, calls


# ------------------------------------------------------------------------------ numba peer


def build_numba_peer(props: Any, fits: Any) -> Any:
    """The same model and rate law compiled with numba, integrated by the Dormand-Prince loop of
    numba_dopri5 (Hairer's controller and dense output), or None without numba.

    The thermosphere in closed form where it has one: d ln n_i/dr = -m_i G M/(r^2 k T) -
    (1 + alpha_i) T'/T integrates to ln n_i(r) = ln(x_i n_h) - m_i A(r) - (1 + alpha_i)
    ln(T(r)/T_h), with A(r) = integral from r_h to r of G M/(r'^2 k T(r')) dr' (the one
    quadrature left, Gauss-Legendre with 8 points over each step of the exobase search; a step
    is at most half a scale height of the heaviest species and half the temperature's scale, over
    which the integrand is smooth: 1e-16 relative). The exobase (n sigma H = 1) is bracketed by
    the same steps as the scipy peer's, then found by Newton's method on ln(n sigma H) kept inside
    the bracket (bisection where a Newton step leaves it), to 1e-13 of the radius."""
    try:
        from numba import njit
        from numba_dopri5 import WORK_ROWS, make_dopri5
    except ImportError:
        return None
    mass, sigma, alpha, objs = props
    k = len(SPECIES)
    # Diffusion parameters b_ij at the homopause temperature, fixed for every case.
    inv_b = np.zeros((k, k))
    for i in range(k):
        for j in range(k):
            if i != j:
                inv_b[i, j] = 1.0 / peer_diffusion_parameter(objs[i], objs[j], T_H, fits)
    big_m, r_h, g_h = M_EARTH, R_H, G * M_EARTH / R_H**2
    nodes, weights = np.polynomial.legendre.leggauss(8)
    f_sat, t_sat, index = saturated_flux(), XUV["time"], XUV["index"]
    log_floor = math.log(1e-30)
    two_sqrt_pi = 2.0 * math.sqrt(math.pi)

    @njit(cache=False)
    def temperature(r, t_inf):
        return t_inf - (t_inf - T_H) * math.exp(-SHAPE * (r - r_h))

    @njit(cache=False)
    def a_integral(a, b, t_inf):  # integral of G M/(r^2 k T(r)) over [a, b]
        mid, half = 0.5 * (a + b), 0.5 * (b - a)
        total = 0.0
        for q in range(nodes.size):
            r = mid + half * nodes[q]
            total += weights[q] / (r * r * temperature(r, t_inf))
        return G * big_m / K_B * half * total

    @njit(cache=False)
    def criterion(r, area, t_inf, x, n_h, ln, w):
        """-ln(n sigma H) at r (A(r) = area; < 0 below the exobase) and its derivative in r;
        fills ln n_i and w_i = n_i / max n."""
        T = temperature(r, t_inf)
        slope = SHAPE * (t_inf - T_H) * math.exp(-SHAPE * (r - r_h))
        top = -np.inf
        for i in range(k):
            ln[i] = math.log(x[i] * n_h) - mass[i] * area - (1.0 + alpha[i]) * math.log(T / T_H)
            top = max(top, ln[i])
        ns = ws = wm = 0.0
        d_ns = d_ws = d_wm = 0.0
        for i in range(k):
            w[i] = math.exp(ln[i] - top)
            d = -mass[i] * G * big_m / (r * r * K_B * T) - (1.0 + alpha[i]) * slope / T
            ns += w[i] * sigma[i]
            ws += w[i]
            wm += w[i] * mass[i]
            d_ns += w[i] * sigma[i] * d
            d_ws += w[i] * d
            d_wm += w[i] * mass[i] * d
        m_mean = wm / ws
        h = K_B * T * r * r / (G * big_m * m_mean)
        value = top + math.log(ns) + math.log(h)
        d_log_m = d_wm / wm - d_ws / ws
        return -value, -(d_ns / ns + slope / T + 2.0 / r - d_log_m), ns

    @njit(cache=False)
    def search_step(r, t_inf, w, ns):
        """Half a scale height of the heaviest species that matters, at most 0.1 r and half the
        temperature's scale (the scipy peer's steps)."""
        heaviest = 0.0
        for i in range(k):
            if w[i] * sigma[i] >= 1e-3 * ns:
                heaviest = max(heaviest, mass[i])
        T = temperature(r, t_inf)
        slope = SHAPE * (t_inf - T_H) * math.exp(-SHAPE * (r - r_h))
        return min(0.5 * K_B * T * r * r / (G * big_m * heaviest), 0.1 * r, 0.5 * T / slope)

    @njit(cache=False)
    def rhs(t, u, p, out):
        # p: T_ref, gamma, n_h, ln x_i0 (k), ln N_i0 (k), the last exobase radius [m] or 0.
        flux_xuv = f_sat if t <= t_sat else f_sat * (t / t_sat) ** (-index)
        t_inf = min(T_MAX, max(T_MIN, p[0] * (flux_xuv / F_REF) ** p[1]))
        n_h = p[2]
        lx = np.empty(k)
        top = -np.inf
        for i in range(k):
            lx[i] = p[3 + i] + u[i]
            top = max(top, lx[i])
        total = 0.0
        for i in range(k):
            total += math.exp(lx[i] - top)
        norm = top + math.log(total)
        x = np.empty(k)
        used = np.empty(k)
        for i in range(k):
            lx[i] -= norm
            used[i] = max(lx[i], log_floor)  # as the scipy peer: traces solved at 1e-30
            x[i] = math.exp(used[i])
        ln = np.empty(k)
        w = np.empty(k)
        # Bracket the exobase by steps from the previous call's exobase (p[3 + 2k], 0 at a
        # case's start: the homopause), outward or inward as the sign asks.
        r_lo, area_lo = r_h, 0.0
        r_prev = p[3 + 2 * k]
        if r_prev > r_h:
            panels = int(math.ceil((r_prev - r_h) / 2.0e4))  # of at most 20 km
            width = (r_prev - r_h) / panels
            for q in range(panels):
                area_lo += a_integral(r_h + q * width, r_h + (q + 1) * width, t_inf)
            r_lo = r_prev
        f_lo, _, ns = criterion(r_lo, area_lo, t_inf, x, n_h, ln, w)
        top_r = r_h + 3.0e6
        r_hi, area_hi, f_hi = r_lo, area_lo, f_lo
        while f_lo >= 0.0:  # above the exobase: inward
            if r_lo <= r_h:
                for i in range(k):
                    out[i] = np.nan
                return
            r_hi, area_hi, f_hi = r_lo, area_lo, f_lo
            r_lo = max(r_h, r_hi - search_step(r_hi, t_inf, w, ns))
            area_lo = area_hi - a_integral(r_lo, r_hi, t_inf)
            f_lo, _, ns = criterion(r_lo, area_lo, t_inf, x, n_h, ln, w)
        while f_hi < 0.0:  # below it: outward
            if r_hi >= top_r:
                for i in range(k):
                    out[i] = np.nan
                return
            r_lo, area_lo, f_lo = r_hi, area_hi, f_hi
            r_hi = min(r_lo + search_step(r_lo, t_inf, w, ns), top_r)
            area_hi = area_lo + a_integral(r_lo, r_hi, t_inf)
            f_hi, _, ns = criterion(r_hi, area_hi, t_inf, x, n_h, ln, w)
        # Newton inside [r_lo, r_hi] (f < 0 at r_lo, >= 0 at r_hi), bisection as the fallback.
        a, b = r_lo, r_hi
        r = r_lo - f_lo * (r_hi - r_lo) / (f_hi - f_lo)
        for _ in range(100):
            area = area_lo + a_integral(r_lo, r, t_inf)
            f, df, _ = criterion(r, area, t_inf, x, n_h, ln, w)
            if f < 0.0:
                a = r
            else:
                b = r
            step_r = f / df if df != 0.0 else 0.0
            r_new = r - step_r
            if not (a < r_new < b):
                r_new = 0.5 * (a + b)
            if abs(r_new - r) <= 1e-13 * r:
                r = r_new
                break
            r = r_new
        area = area_lo + a_integral(r_lo, r, t_inf)
        criterion(r, area, t_inf, x, n_h, ln, w)
        p[3 + 2 * k] = r
        T_e = temperature(r, t_inf)
        z = r - r_h
        for i in range(k):
            lam = G * big_m * mass[i] / (K_B * T_e * r)
            v0 = math.sqrt(2.0 * K_B * T_e / mass[i])
            phi_j = math.exp(ln[i]) * v0 / two_sqrt_pi * (1.0 + lam) * math.exp(-lam)
            rest = m_a = inv = 0.0
            for j in range(k):
                if j != i:
                    rest += x[j]
            for j in range(k):
                if j != i:
                    m_a += x[j] / rest * mass[j]
                    inv += x[j] / rest * inv_b[i, j]
            beta = (m_a - mass[i]) * g_h / (K_B * T_H)
            depth = z if beta == 0.0 else -math.expm1(-beta * z) / beta
            flux = phi_j / (1.0 + phi_j * depth * inv / x[i])
            log_rate = math.log(4.0 * math.pi * r * r * flux) + (lx[i] - used[i])
            out[i] = -math.exp(log_rate - (p[3 + k + i] + u[i]))

    dopri5_case = make_dopri5(rhs, k)

    @njit(cache=False)
    def run_all(p, edges, counts, grid, rtol, out, nfev, steps):
        work = np.zeros((WORK_ROWS, k))
        for c in range(p.shape[0]):
            nfev[c], steps[c] = dopri5_case(
                p[c], edges[c, : counts[c]], grid, rtol, rtol, out[c], work
            )

    def run(cases: list[Case], rtol: float) -> tuple[np.ndarray, np.ndarray]:
        """N/N0 [case x age x species] and the rhs calls per case."""
        p = np.zeros((len(cases), 4 + 2 * k))
        edges_list = []
        for c, case in enumerate(cases):
            p[c, :3] = case.t_ref, case.gamma, case.homopause_density
            p[c, 3 : 3 + k] = np.log(case.x)
            p[c, 3 + k : 3 + 2 * k] = np.log(initial_inventories(case, mass))
            edges_list.append(np.array([T_START, *kinks(case), T_END]))
        width = max(e.size for e in edges_list)
        edges = np.array(
            [np.pad(e, (0, width - e.size), constant_values=e[-1]) for e in edges_list]
        )
        counts = np.array([e.size for e in edges_list], dtype=np.int64)
        grid = np.concatenate([[T_START], AGES])
        out = np.empty((len(cases), grid.size, k))
        nfev = np.zeros(len(cases), dtype=np.int64)
        steps = np.zeros(len(cases), dtype=np.int64)
        run_all(p, edges, counts, grid, rtol, out, nfev, steps)
        return np.exp(out[:, 1:, :]), nfev

    return run


# ------------------------------------------------------------------------------ comparison


@dataclass
class Run:
    name: str
    rtol: float
    error: float  # largest relative error of N/N0
    cost: float  # [s] per case


def timed_runs(
    name: str,
    call: Any,
    rtols: list[float],
    repeat: int,
    reference: np.ndarray,
    count: int,
) -> list[Run]:
    """At each rtol, the best of `repeat` calls of call(rtol) -> (N/N0 of `count` cases, a note)
    as cost per case, with its error against the reference; each printed."""
    runs = []
    for rtol in rtols:
        best = math.inf
        for _ in range(repeat):
            start = time.perf_counter()
            got, note = call(rtol)
            best = min(best, time.perf_counter() - start)
        runs.append(Run(name, rtol, relative_error(got, reference), best / count))
        r = runs[-1]
        print(
            f"  {name:12s} rtol {rtol:7.0e}: error {r.error:8.2e}  "
            f"{r.cost * 1e6:9.1f} us/case{note}"
        )
    return runs


def relative_error(got: np.ndarray, ref: np.ndarray) -> float:
    mask = ref > KEPT
    return float(np.max(np.abs(got[mask] / ref[mask] - 1.0)))


def cost_at(runs: list[Run], target: float) -> tuple[float, str] | None:
    """Cost per case [s] at a target error, interpolated log-log on the work-precision front;
    ("<=") when the cheapest run already reaches it, None when no run does."""
    front: list[Run] = []
    for r in sorted((r for r in runs if np.isfinite(r.error)), key=lambda r: r.cost):
        if not front or r.error < front[-1].error:
            front.append(r)
    for j, r in enumerate(front):
        if r.error <= target:
            if j == 0:
                return r.cost, "<="
            lo = front[j - 1]
            x0, x1 = math.log(lo.error), math.log(max(r.error, 1e-300))
            y0, y1 = math.log(lo.cost), math.log(r.cost)
            w = (math.log(target) - x0) / (x1 - x0)
            return math.exp(y0 + w * (y1 - y0)), "~"
    return None


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--cases", type=int, default=200, help="cases run by exosieve")
    parser.add_argument("--peer-cases", type=int, default=10, help="cases run by the peer")
    parser.add_argument("--rtols", default="1e-4,1e-5,1e-6,1e-7,1e-8,1e-9,1e-10")
    parser.add_argument("--peer-rtols", default="1e-3,1e-4,1e-5,1e-6,1e-7")
    parser.add_argument("--peer-methods", default="RK45,DOP853")
    parser.add_argument("--repeat", type=int, default=3, help="timed exosieve runs (best kept)")
    parser.add_argument("--cpu", type=int, default=None, help="CPU to pin to (default: first)")
    parser.add_argument("--skip-numba", action="store_true", help="leave out the numba peer")
    opts = parser.parse_args()
    cpus = sorted(os.sched_getaffinity(0))
    cpu = cpus[0] if opts.cpu is None else opts.cpu
    os.sched_setaffinity(0, {cpu})
    print(f"load average at the start: {os.getloadavg()}; pinned to CPU {cpu}")

    cases = make_cases(opts.cases)
    table = frame(cases)
    reference, result = run_exosieve(table, 1e-12)
    mask = reference > KEPT
    print(
        f"{len(cases)} thermosphere cases, {len(SPECIES)} species, ages 10 Myr - 10 Gyr; "
        f"{int(mask.sum())} of {mask.size} reference N/N0 values above {KEPT:g}; median "
        f"{int(np.median(result['steps']))} accepted steps per case at rtol 1e-12"
    )
    rtols = [float(v) for v in opts.rtols.split(",")]

    def exosieve_run(rtol: float) -> tuple[np.ndarray, str]:
        return run_exosieve(table, rtol)[0], ""

    ours = timed_runs("exosieve", exosieve_run, rtols, opts.repeat, reference, len(cases))

    props, fits = peer_props()
    count = min(opts.peer_cases, len(cases))
    peers: dict[str, list[Run]] = {}
    for method in opts.peer_methods.split(","):
        peers[method] = []
        for rtol in (float(v) for v in opts.peer_rtols.split(",")):
            got = np.empty((count, len(AGES), len(SPECIES)))
            calls = 0
            start = time.perf_counter()
            for k in range(count):
                got[k], n_calls = peer_run(cases[k], rtol, method, props, fits)
                calls += n_calls
            cost = (time.perf_counter() - start) / count
            err = relative_error(got, reference[:count])
            peers[method].append(Run(f"scipy {method}", rtol, err, cost))
            print(
                f"  scipy {method:6s} rtol {rtol:7.0e}: error {err:8.2e}  "
                f"{cost * 1e6:11.0f} us/case  ({calls / count:.0f} rhs calls per case)"
            )
    compiled: list[Run] = []
    numba_run = None if opts.skip_numba else build_numba_peer(props, fits)
    if numba_run is None:
        print("  numba peer: not run (numba is not installed, or --skip-numba)")
    else:
        numba_run(cases[:2], 1e-6)  # compile before timing

        def compiled_run(rtol: float) -> tuple[np.ndarray, str]:
            got, nfev = numba_run(cases, rtol)
            return got, f"  ({np.median(nfev):.0f} rhs calls per case)"

        compiled = timed_runs("numba", compiled_run, rtols, opts.repeat, reference, len(cases))
    # Targets both sides reach: decades between the largest of the smallest errors and the
    # smallest of the largest ones.
    everyone = [*ours, *(r for runs in peers.values() for r in runs), *compiled]
    lo = max(min(r.error for r in ours), min(r.error for r in everyone if r.name != "exosieve"))
    hi = min(max(r.error for r in ours), max(r.error for r in everyone if r.name != "exosieve"))
    targets = [10.0**e for e in range(math.ceil(math.log10(lo)), math.floor(math.log10(hi)) + 1)]
    print(
        "per-case cost at equal achieved accuracy (max relative error of N/N0); goals: >= 100x "
        "scipy, >= 2x the compiled peer"
    )
    for target in targets:
        mine = cost_at(ours, target)
        line = f"  error {target:7.0e}: exosieve "
        line += f"{mine[1]}{mine[0] * 1e6:.1f} us" if mine else "not reached"
        for method, runs in peers.items():
            theirs = cost_at(runs, target)
            if theirs and mine:
                line += (
                    f"; scipy {method} {theirs[1]}{theirs[0] * 1e3:.0f} ms: "
                    f"ratio {theirs[0] / mine[0]:.0f}x (goal >= 100x)"
                )
            else:
                line += f"; scipy {method} not reached"
        if compiled:
            theirs = cost_at(compiled, target)
            if theirs and mine:
                line += (
                    f"; numba {theirs[1]}{theirs[0] * 1e6:.0f} us: "
                    f"ratio {theirs[0] / mine[0]:.2f}x (goal >= 2x)"
                )
            else:
                line += "; numba not reached"
        print(line)
    print(f"load average at the end: {os.getloadavg()}")


if __name__ == "__main__":
    main()
