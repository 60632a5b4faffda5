"""Work-precision of the evolution integrator: the error each method achieves against an exact
solution and what it costs per case, for exosieve and its peers, compared at equal error.

Run: bash bench/work_precision.sh [options]   (installs the peers into bench/.venv-peers first)
 or: python bench/bench_work_precision.py [--cases N] [--scipy-cases M] [--evolve-cases E]
         [--rtols 1e-4,1e-5,...] [--repeat R] [--skip NAME,...] [--cpu K]

The model. Invented Earth-like planets (seeded): 0.5-3 Earth masses, radius (M/M_earth)^0.27
Earth radii, exobase 300-1500 km up at a fixed radius; 0.6-1.1 solar-mass stars (L ~ M^4) at
0.3-2 au whose XUV output is saturated at 10^-3.5..10^-3 L_bol until 50-150 Myr and then decays
as (t/t_sat)^-beta, beta 1.0-1.5; exobase temperature T = T_ref (F_xuv/F_ref)^gamma (T_ref
800-1500 K, F_ref 4.6e-3 W m^-2, gamma 0.3-0.7) clamped to [300, 1800] K; species H, He, O, N2
whose exobase densities n_i = n_i0 N_i/N_i0 follow their inventories (density_scaling
"inventory"); ages 10 Myr - 10 Gyr, output at 50 log-spaced ages. The H and He inventories are
set so that each loses a log-uniform 0.03-30 e-folds over the run (so that N/N0 is spread over
(1e-3, 1) at the output ages); O and N2 come from a 0.1-10 bar column and barely escape.

The exact solution. For this model dN_i/dt = -4 pi r^2 Phi_J(n_i0 N_i/N_i0, T(t)), so
ln(N_i/N_i0)(t) = -(4 pi r^2 n_i0 / N_i0) * integral from t0 to t of v_i(T(s)) ds, with the Jeans
effusion velocity v = Phi_J/n = v0/(2 sqrt(pi)) (1 + lambda) exp(-lambda), v0 = sqrt(2 k T/m),
lambda = G M m/(k T r) (Jeans 1925; Chamberlain 1963). The integral is taken with
scipy.integrate.quad in ln t (relative tolerance 1e-13) between the output ages, split at the
kinks of T(t) (end of saturation, the crossings of the clamp values; T is constant, and the
integral exact, where clamped or saturated), and checked against mpmath at 30 digits on a few
cases. The formulas are written here from the papers, not taken from exosieve; G, k_B and the
species masses are exosieve's, after checking them against scipy.constants (CODATA) and
periodictable (IUPAC atomic weights), so that both sides solve the same model to the last digit.

The methods, each at rtol in --rtols (default 1e-4 ... 1e-10):
- exosieve: compare() from a loaded case table on one thread (table checks and result arrays
  included); the batch engine alone (_core.run_batch, the part of compare() that runs the cases);
  evolve() single runs on the first E cases (Python objects built beforehand).
- scipy.integrate.solve_ivp with LSODA, RK45 and DOP853 on a numpy right-hand side, first M cases.
- numbalsoda's lsoda with a numba cfunc right-hand side, in a numba loop over the cases.
- a numba Dormand-Prince 5(4) loop: Hairer's initial step and step-size controller (DOPRI5 with
  beta = 0.04), his 4th-order dense output for the output ages.
- diffrax Dopri5 and Tsit5 with a PIDController, vmapped over all cases, jit-compiled once (rtol
  is an argument) and timed after a warm-up call; CPU, 64-bit floats.
Peers integrate u_i = ln(N_i/N_i0) in Myr with atol = rtol (an absolute error of rtol in u is a
relative error of rtol in N), on the model reduced by hand to du_i/dt = -q_i sqrt(T) (1 + c_i/T)
exp(-c_i/T) (no dependence on u; see peer_parameters), and are told the kinks: scipy and
numbalsoda restart at each, the numba loop lands on each and restarts with a new initial step,
diffrax gets them as jump_ts. exosieve integrates ln N in seconds with its own error test, from
the general model (densities from the inventories, then Jeans fluxes), and finds the kinks
itself.

Measured: the largest |N/N0 - exact| over the cases a method ran, the species and output ages
where the exact N/N0 > 1e-3, and how many such values are off by more than 10 rtol (scipy and
evolve() run on the first cases only, and a maximum over fewer cases tends to be smaller); cost
per case = the best of --repeat timed batches / cases (wall clock; compilation and warm-up
excluded), the batches taken in rounds over all methods so that a burst of other work on the
machine slows one round of every method rather than every round of one. The whole process runs
pinned to one CPU (os.sched_setaffinity; the engine's worker thread and XLA's threads inherit
it), so every method has the same resources: one core. Speed at equal accuracy: for each target
error (1e-6, 1e-8) each method's cost is interpolated in log-log between the two runs of its
work-precision curve that bracket the target (the front of runs each more accurate than every
cheaper one); printed as peer cost / exosieve cost.
"""

from __future__ import annotations

import argparse
import math
import os
import sys
import time
import warnings
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

SPECIES = ("H", "He", "O", "N2")
LIGHT = ("H", "He")  # inventories set by a target loss
KEPT = 1e-3  # errors are measured where the exact N/N0 is above this
TARGETS = (1e-6, 1e-8)
N_TIMES = 50
DEFAULT_RTOLS = "1e-4,1e-5,1e-6,1e-7,1e-8,1e-9,1e-10"
F_REF = 4.6e-3  # W m^-2
T_MIN, T_MAX = 300.0, 1800.0  # K


def pin_to_one_cpu(cpu: int | None) -> int:
    """Pin this process to one CPU before any library starts threads; returns the CPU."""
    allowed = sorted(os.sched_getaffinity(0))
    chosen = allowed[-1] if cpu is None else cpu
    if chosen not in allowed:
        raise SystemExit(f"--cpu {cpu}: not one of this process's CPUs {allowed}")
    os.sched_setaffinity(0, {chosen})
    # Libraries that size thread pools from the environment: one thread each.
    for name in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS", "NUMBA_NUM_THREADS"):
        os.environ[name] = "1"
    os.environ["XLA_FLAGS"] = (
        os.environ.get("XLA_FLAGS", "")
        + " --xla_cpu_multi_thread_eigen=false intra_op_parallelism_threads=1"
    ).strip()
    return chosen


# ------------------------------------------------------------------------- constants, checked


@dataclass
class Constants:
    G: float  # m^3 kg^-1 s^-2
    K_B: float  # J K^-1
    MYR: float  # s
    mass: np.ndarray  # kg, per species
    M_EARTH: float
    R_EARTH: float
    M_SUN: float
    L_SUN: float
    AU: float
    notes: list[str] = field(default_factory=list)


def checked_constants() -> Constants:
    """exosieve's G, k_B and species masses, checked against scipy.constants (CODATA) and
    periodictable (IUPAC standard atomic weights); SystemExit if they disagree."""
    from scipy import constants as sc

    import exosieve
    from exosieve import constants as xc

    notes = []
    problems = []

    def check(name: str, ours: float, theirs: float, tol: float, source: str) -> None:
        rel = abs(ours - theirs) / abs(theirs)
        notes.append(f"{name} {rel:.1e} from {source} (allowed {tol:g})")
        if rel > tol:
            problems.append(f"{name}: exosieve {ours!r}, {source} {theirs!r} ({rel:.1e} apart)")

    # CODATA: G and the atomic mass constant differ between editions by < 1e-8 relative.
    check("G", xc.G, sc.G, 1e-8, "scipy.constants")
    check("k_B", xc.K_B, sc.k, 1e-15, "scipy.constants (exact)")
    check("Julian year", xc.YEAR, sc.Julian_year, 1e-15, "scipy.constants")
    check("u", xc.AMU, sc.physical_constants["atomic mass constant"][0], 1e-8, "scipy.constants")
    masses = np.array([exosieve.species(s).mass for s in SPECIES])
    try:
        import periodictable as pt
    except ImportError:
        notes.append("species masses not checked: periodictable is not installed")
    else:
        # Standard atomic weights are intervals (H: 1.00784-1.00811); 5e-4 covers the editions.
        for name, mass in zip(SPECIES, masses, strict=True):
            element = {"H": pt.H, "He": pt.He, "O": pt.O, "N2": pt.N}[name]
            atoms = 2 if name == "N2" else 1
            check(f"m({name})", mass, atoms * element.mass * sc.atomic_mass, 5e-4, "periodictable")
    if problems:
        raise SystemExit("constants disagree:\n  " + "\n  ".join(problems))
    return Constants(
        G=xc.G,
        K_B=xc.K_B,
        MYR=xc.MYR,
        mass=masses,
        M_EARTH=xc.M_EARTH,
        R_EARTH=xc.R_EARTH,
        M_SUN=xc.M_SUN,
        L_SUN=xc.L_SUN,
        AU=xc.AU,
        notes=notes,
    )


# ------------------------------------------------------------------------------ the cases


@dataclass
class Cases:
    """Invented planets in SI units; arrays over cases (and species)."""

    planet_mass: np.ndarray
    planet_radius: np.ndarray
    altitude: np.ndarray
    star_mass: np.ndarray
    star_luminosity: np.ndarray
    semi_major_axis: np.ndarray
    saturation_ratio: np.ndarray
    saturation_time: np.ndarray
    decay_index: np.ndarray
    t_ref: np.ndarray
    gamma: np.ndarray
    n_exo: np.ndarray  # total exobase density [m^-3]
    x: np.ndarray  # mole fractions [case, species]
    inventory: np.ndarray = field(default_factory=lambda: np.zeros((0, 4)))  # [case, species]

    def __len__(self) -> int:
        return len(self.planet_mass)

    @property
    def exobase_radius(self) -> np.ndarray:
        return self.planet_radius + self.altitude

    @property
    def densities(self) -> np.ndarray:
        return self.x * self.n_exo[:, None]


def make_cases(n: int, k: Constants, seed: int = 2026) -> Cases:
    rng = np.random.default_rng(seed)

    def log_uniform(lo: float, hi: float, size: Any = n) -> np.ndarray:
        return 10 ** rng.uniform(math.log10(lo), math.log10(hi), size)

    mass = log_uniform(0.5, 3.0)
    star = rng.uniform(0.6, 1.1, n)
    x_h, x_he = log_uniform(1e-3, 1e-1), log_uniform(1e-3, 1e-2)
    x = np.column_stack([x_h, x_he, np.full(n, 0.3), 0.7 - x_h - x_he])
    return Cases(
        planet_mass=mass * k.M_EARTH,
        planet_radius=mass**0.27 * k.R_EARTH,
        altitude=rng.uniform(300e3, 1500e3, n),
        star_mass=star * k.M_SUN,
        star_luminosity=star**4 * k.L_SUN,
        semi_major_axis=log_uniform(0.3, 2.0) * k.AU,
        saturation_ratio=log_uniform(10**-3.5, 1e-3),
        saturation_time=rng.uniform(50.0, 150.0, n) * k.MYR,
        decay_index=rng.uniform(1.0, 1.5, n),
        t_ref=rng.uniform(800.0, 1500.0, n),
        gamma=rng.uniform(0.3, 0.7, n),
        n_exo=log_uniform(1e12, 1e14),
        x=x,
    )


def set_inventories(cases: Cases, integrals: np.ndarray, k: Constants, seed: int = 7) -> None:
    """H and He: a log-uniform 0.03-30 e-folds lost over the run; O and N2: a 0.1-10 bar column
    shared by mole fraction (N = P 4 pi R^2 / (g m_mean), g = G M / R^2)."""
    rng = np.random.default_rng(seed)
    n = len(cases)
    r = cases.exobase_radius
    g = k.G * cases.planet_mass / cases.planet_radius**2
    column = 10 ** rng.uniform(4.0, 6.0, n) * 4 * np.pi * cases.planet_radius**2
    column /= g * (cases.x @ k.mass)
    inventory = cases.x * column[:, None]
    loss = 10 ** rng.uniform(math.log10(0.03), math.log10(30.0), (n, len(LIGHT)))
    for j, name in enumerate(LIGHT):
        i = SPECIES.index(name)
        total = 4 * np.pi * r**2 * cases.densities[:, i] * integrals[:, -1, i]
        inventory[:, i] = np.where(total > 0, total / loss[:, j], inventory[:, i])
    cases.inventory = inventory


# --------------------------------------------------------------------- the exact solution


def saturated_temperature(c: Cases) -> np.ndarray:
    """T_ref (F_sat/F_ref)^gamma before the clamp [K]."""
    flux = c.saturation_ratio * c.star_luminosity / (4 * np.pi * c.semi_major_axis**2)
    return c.t_ref * (flux / F_REF) ** c.gamma


def kinks(c: Cases, t0: float, t1: float) -> list[np.ndarray]:
    """Per case, the ages in (t0, t1) where T(t) has a kink [s]: the end of saturation, and
    where the decaying law crosses T_max and T_min (raw T = T_sat (t/t_sat)^(-beta gamma))."""
    t_hot = saturated_temperature(c)
    out = []
    for i in range(len(c)):
        ages = [c.saturation_time[i]]
        for bound in (T_MAX, T_MIN):
            if t_hot[i] > bound:
                exponent = 1.0 / (c.decay_index[i] * c.gamma[i])
                ages.append(c.saturation_time[i] * (t_hot[i] / bound) ** exponent)
        out.append(np.array(sorted(a for a in ages if t0 < a < t1)))
    return out


@dataclass
class History:
    """One case's exobase temperature against stellar age t [s], in the literal form of the
    model: L_xuv = R_sat L_bol (1, or (t/t_sat)^-beta after saturation), F = L_xuv/(4 pi a^2),
    T = T_ref (F/F_ref)^gamma clamped to [T_min, T_max]."""

    saturated_luminosity: float
    area: float  # 4 pi a^2
    t_sat: float
    beta: float
    t_ref: float
    gamma: float

    @classmethod
    def of(cls, c: Cases, i: int) -> History:
        return cls(
            float(c.saturation_ratio[i] * c.star_luminosity[i]),
            float(4 * math.pi * c.semi_major_axis[i] ** 2),
            float(c.saturation_time[i]),
            float(c.decay_index[i]),
            float(c.t_ref[i]),
            float(c.gamma[i]),
        )

    def unclamped(self, t: float) -> float:
        l_xuv = self.saturated_luminosity
        if t > self.t_sat:
            l_xuv *= (t / self.t_sat) ** -self.beta
        return self.t_ref * (l_xuv / self.area / F_REF) ** self.gamma

    def __call__(self, t: float) -> float:
        return min(max(self.unclamped(t), T_MIN), T_MAX)

    def constant_at(self, t: float) -> bool:
        """Whether T is constant around t (saturated, or held at a clamp)."""
        return t <= self.t_sat or not (T_MIN < self.unclamped(t) < T_MAX)


def effusion_velocity(temperature: float, mass: float, gm_over_r: float, k_b: float) -> float:
    """Jeans effusion velocity Phi_J/n = v0/(2 sqrt(pi)) (1 + lambda) exp(-lambda) [m s^-1],
    v0 = sqrt(2 k T/m), lambda = G M m/(k T r) (Jeans 1925; Chamberlain 1963)."""
    lam = gm_over_r * mass / (k_b * temperature)
    v0 = math.sqrt(2 * k_b * temperature / mass)
    return v0 / (2 * math.sqrt(math.pi)) * (1 + lam) * math.exp(-lam)


def exact_integrals(
    c: Cases, k: Constants, grid: np.ndarray, breaks: list[np.ndarray]
) -> tuple[np.ndarray, np.ndarray, int]:
    """integral from grid[0] to grid[j] of v_i(T(t)) dt [m] for every case, output age and
    species, by scipy.integrate.quad in ln t between output ages and kinks; also the sum of
    quad's error estimates [m] per case and species, and the number of quad warnings."""
    out = np.zeros((len(c), len(grid), len(SPECIES)))
    estimates = np.zeros((len(c), len(SPECIES)))
    warned = 0
    for i in range(len(c)):
        history = History.of(c, i)
        gm_over_r = k.G * float(c.planet_mass[i]) / float(c.exobase_radius[i])
        edges = np.union1d(grid, breaks[i])
        at = np.searchsorted(edges, grid)
        for s, mass in enumerate(k.mass):
            pieces, estimates[i, s], count = species_pieces(
                history, float(mass), gm_over_r, k.K_B, edges
            )
            out[i, :, s] = np.cumsum(pieces)[at]
            warned += count
    return out, estimates, warned


def species_pieces(
    history: History, mass: float, gm_over_r: float, k_b: float, edges: np.ndarray
) -> tuple[np.ndarray, float, int]:
    """The integral of v(T(t)) over each piece between consecutive edges [m] (element 0 is 0),
    the sum of quad's error estimates [m], and the number of quad warnings.

    Each piece is asked for 1e-13 relative, or 1e-15 of the species' whole-run integral
    (bounded from above on the same pieces) where that is larger: a heavy species' integrand can
    fall to ~1e-300 m s^-1, where 1e-13 relative is neither reachable nor of any consequence."""
    from scipy import integrate

    def velocity(t: float) -> float:
        return effusion_velocity(history(t), mass, gm_over_r, k_b)

    def in_log_time(x: float) -> float:
        t = math.exp(x)
        return velocity(t) * t

    ends = [velocity(t) for t in edges]  # v(T(t)) is monotonic on each piece
    scale = sum(max(ends[j - 1], ends[j]) * (edges[j] - edges[j - 1]) for j in range(1, len(edges)))
    pieces = np.zeros(len(edges))
    estimate, warned = 0.0, 0
    for j in range(1, len(edges)):
        a, b = edges[j - 1], edges[j]
        middle = math.sqrt(a * b)
        if history.constant_at(middle):  # T constant on (a, b): exact
            pieces[j] = velocity(middle) * (b - a)
            continue
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            pieces[j], error = integrate.quad(
                in_log_time, math.log(a), math.log(b), epsabs=1e-15 * scale, epsrel=1e-13, limit=200
            )
        warned += len(caught)
        estimate += error
    return pieces, estimate, warned


def mpmath_check(
    c: Cases,
    k: Constants,
    grid: np.ndarray,
    breaks: list[np.ndarray],
    ours: np.ndarray,
    per_particle: np.ndarray,
    count: int,
) -> float | None:
    """Largest difference of ln(N/N0) at the end of the run, from the whole-run integrals,
    against mpmath at 30 digits, over the first `count` cases and every species."""
    try:
        import mpmath as mp
    except ImportError:
        return None
    mp.mp.dps = 30
    worst = 0.0
    for i in range(min(count, len(c))):
        points = [mp.log(mp.mpf(t)) for t in np.union1d(grid[[0, -1]], breaks[i])]
        for s, mass in enumerate(k.mass):
            total = mp.quad(mpmath_integrand(mp, c, k, i, float(mass)), points)
            worst = max(worst, float(abs(mp.mpf(ours[i, -1, s]) - total)) * per_particle[i, s])
    return worst


def mpmath_integrand(mp: Any, c: Cases, k: Constants, i: int, mass: float) -> Any:
    """v(T(t)) t as a function of x = ln t, in mpmath numbers."""
    lum = mp.mpf(c.saturation_ratio[i]) * mp.mpf(c.star_luminosity[i])
    area = 4 * mp.pi * mp.mpf(c.semi_major_axis[i]) ** 2
    t_sat, beta = mp.mpf(c.saturation_time[i]), mp.mpf(c.decay_index[i])
    t_ref, gamma = mp.mpf(c.t_ref[i]), mp.mpf(c.gamma[i])
    gm_over_r = mp.mpf(k.G) * mp.mpf(c.planet_mass[i]) / mp.mpf(c.exobase_radius[i])
    k_b, m = mp.mpf(k.K_B), mp.mpf(mass)

    def f(x: Any) -> Any:
        t = mp.exp(x)
        l_xuv = lum if t <= t_sat else lum * (t / t_sat) ** -beta
        temp = min(max(t_ref * (l_xuv / area / F_REF) ** gamma, T_MIN), T_MAX)
        lam = gm_over_r * m / (k_b * temp)
        v0 = mp.sqrt(2 * k_b * temp / m)
        return v0 / (2 * mp.sqrt(mp.pi)) * (1 + lam) * mp.exp(-lam) * t

    return f


# ------------------------------------------------------------------------------- the peers


def peer_parameters(c: Cases, k: Constants) -> np.ndarray:
    """Per case: t_sat [Myr], beta gamma, T_sat [K], T_min, T_max, then per species
    q_i = Myr 4 pi r^2 n_i0/N_i0 sqrt(2 k/m_i)/(2 sqrt(pi)) [Myr^-1 K^-1/2] and
    c_i = G M m_i/(k r) [K], so that du_i/dtau = -q_i sqrt(T) (1 + c_i/T) exp(-c_i/T)."""
    r = c.exobase_radius
    per_particle = 4 * np.pi * r[:, None] ** 2 * c.densities / c.inventory
    q = k.MYR * per_particle * np.sqrt(2 * k.K_B / k.mass) / (2 * np.sqrt(np.pi))
    lam_t = k.G * c.planet_mass[:, None] * k.mass / (k.K_B * r[:, None])
    n = len(c)
    head = np.column_stack(
        [
            c.saturation_time / k.MYR,
            c.decay_index * c.gamma,
            saturated_temperature(c),
            np.full(n, T_MIN),
            np.full(n, T_MAX),
        ]
    )
    return np.ascontiguousarray(np.hstack([head, q, lam_t]))


def segments(grid: np.ndarray, breaks: np.ndarray) -> np.ndarray:
    """Edges of the pieces each peer integrates in one go: start, kinks, end."""
    return np.concatenate([grid[:1], breaks, grid[-1:]])


def scipy_run(
    method: str, p: np.ndarray, edges: list[np.ndarray], grid: np.ndarray, rtol: float
) -> tuple[np.ndarray, np.ndarray]:
    """solve_ivp on each case, restarting at each kink: u [case, age, species], evaluations."""
    out = np.full((len(p), len(grid), len(SPECIES)), np.nan)
    nfev = np.zeros(len(p), dtype=np.int64)
    for i in range(len(p)):
        nfev[i] = scipy_case(method, p[i], edges[i], grid, rtol, out[i])
    return out, nfev


def scipy_case(
    method: str, p: np.ndarray, edges: np.ndarray, grid: np.ndarray, rtol: float, out: np.ndarray
) -> int:
    from scipy import integrate

    t_sat, slope, t_hot, t_lo, t_hi = (float(v) for v in p[:5])
    q, lam_t = p[5:9], p[9:13]

    def rhs(t: float, _u: np.ndarray) -> np.ndarray:
        raw = t_hot if t <= t_sat else t_hot * (t / t_sat) ** -slope
        temp = min(max(raw, t_lo), t_hi)
        lam = lam_t / temp
        return -q * math.sqrt(temp) * (1.0 + lam) * np.exp(-lam)

    u = np.zeros(len(SPECIES))
    out[0] = u
    nfev = 0
    for a, b in zip(edges[:-1], edges[1:], strict=True):
        inside = np.flatnonzero((grid > a) & (grid <= b))
        t_eval = grid[inside]
        if not t_eval.size or t_eval[-1] != b:
            t_eval = np.append(t_eval, b)  # the state at the kink, to restart from
        sol = integrate.solve_ivp(
            rhs, (a, b), u, method=method, rtol=rtol, atol=rtol, t_eval=t_eval
        )
        nfev += sol.nfev
        if not sol.success:
            out[inside] = np.nan
            break
        out[inside] = sol.y[:, : len(inside)].T
        u = sol.y[:, -1]
    return nfev


def build_numba_peers():
    """The numba Dormand-Prince 5(4) loop and the numbalsoda driver (compiled on first use)."""
    import numba
    from numba import njit
    from numba_dopri5 import WORK_ROWS, make_dopri5

    @njit(cache=False)
    def rhs(t, _y, p, out):  # du_i/dt does not depend on u (see peer_parameters)
        raw = p[2] if t <= p[0] else p[2] * (t / p[0]) ** (-p[1])
        temp = min(max(raw, p[3]), p[4])
        root = math.sqrt(temp)
        for s in range(4):
            lam = p[9 + s] / temp
            out[s] = -p[5 + s] * root * (1.0 + lam) * math.exp(-lam)

    dopri5_case = make_dopri5(rhs, 4)

    @njit(cache=False)
    def dopri5_all(p, edges, counts, grid, rtol, out, nfev, steps):
        work = np.zeros((WORK_ROWS, 4))  # state, stages and dense-output coefficients, reused
        for i in range(p.shape[0]):
            nfev[i], steps[i] = dopri5_case(
                p[i], edges[i, : counts[i]], grid, rtol, rtol, out[i], work
            )

    lsoda_all = None
    try:
        from numbalsoda import lsoda, lsoda_sig
    except ImportError:
        pass
    else:

        @numba.cfunc(lsoda_sig)
        def lsoda_rhs(t, u, du, p):
            rhs(t, u, p, du)  # the same compiled model as the Dormand-Prince loop

        address = lsoda_rhs.address

        @njit(cache=False)
        def lsoda_all(p, edges, counts, grid, rtol, out, ok):
            for i in range(p.shape[0]):
                u = np.zeros(4)
                out[i, 0, :] = 0.0
                ok[i] = True
                e = edges[i, : counts[i]]
                for piece in range(e.size - 1):
                    a, b = e[piece], e[piece + 1]
                    first = np.searchsorted(grid, a, side="right")
                    stop = np.searchsorted(grid, b, side="right")
                    inner = grid[first:stop]
                    extra = 0 if (inner.size > 0 and inner[-1] == b) else 1
                    t_eval = np.empty(1 + inner.size + extra)
                    t_eval[0] = a
                    t_eval[1 : 1 + inner.size] = inner
                    if extra:
                        t_eval[-1] = b
                    sol, success = lsoda(address, u, t_eval, p[i], rtol, rtol, 500000)
                    if not success:
                        ok[i] = False
                        break
                    out[i, first:stop, :] = sol[1 : 1 + inner.size, :]
                    u = sol[-1, :].copy()

    return dopri5_all, lsoda_all


def build_diffrax(solver_name: str, grid: np.ndarray):
    """A jit-compiled, vmapped diffrax solve: (params, jump times, rtol) -> (u, steps, ok)."""
    import jax

    jax.config.update("jax_enable_x64", True)
    import diffrax
    import jax.numpy as jnp

    solver = {"Dopri5": diffrax.Dopri5, "Tsit5": diffrax.Tsit5}[solver_name]()
    ts = jnp.asarray(grid)

    def field_(t, _u, p):
        raw = jnp.where(t <= p[0], p[2], p[2] * (t / p[0]) ** (-p[1]))
        temp = jnp.clip(raw, p[3], p[4])
        lam = p[9:13] / temp
        return -p[5:9] * jnp.sqrt(temp) * (1.0 + lam) * jnp.exp(-lam)

    term = diffrax.ODETerm(field_)

    def one(p, jumps, rtol):
        controller = diffrax.PIDController(rtol=rtol, atol=rtol, jump_ts=jumps)
        sol = diffrax.diffeqsolve(
            term,
            solver,
            t0=ts[0],
            t1=ts[-1],
            dt0=None,
            y0=jnp.zeros(4),
            args=p,
            saveat=diffrax.SaveAt(ts=ts),
            stepsize_controller=controller,
            max_steps=100_000,
            throw=False,
            adjoint=diffrax.ForwardMode(),
        )
        return sol.ys, sol.stats["num_accepted_steps"], sol.result == diffrax.RESULTS.successful

    return jax.jit(jax.vmap(one, in_axes=(0, 0, None)))


# ---------------------------------------------------------------------------- bookkeeping


@dataclass
class Run:
    method: str
    rtol: float
    cases: int
    cost: float  # s per case
    error: float  # max |N/N0 - exact| where exact > KEPT
    over: int  # such values off by more than 10 rtol
    values: int  # such values
    failed: int  # cases that failed or gave non-finite values
    steps: float | None  # median accepted steps per case


def error_of(u: np.ndarray, exact_u: np.ndarray, rtol: float) -> tuple[float, int, int, int]:
    """(max error of N/N0, values off by > 10 rtol, values compared, failed cases)."""
    exact = np.exp(exact_u)
    with np.errstate(over="ignore", invalid="ignore"):
        got = np.exp(u)
    mask = exact > KEPT
    mask[:, 0, :] = False  # the start is given, not computed
    bad = ~np.isfinite(got) & mask
    failed = int(np.any(bad.reshape(len(u), -1), axis=1).sum())
    diff = np.abs(got - exact)[mask & ~bad]
    if diff.size == 0:
        return math.nan, 0, 0, failed
    return float(diff.max()), int((diff > 10 * rtol).sum()), int(mask.sum()), failed


@dataclass
class Job:
    """One method at one tolerance: a timed call and the untimed reading of its result."""

    method: str
    rtol: float
    call: Callable[[], Any]
    extract: Callable[[Any], tuple[np.ndarray, Any]]  # -> (u [case, age, species], steps)
    rounds: int
    best: float = math.inf
    u: np.ndarray | None = None
    steps: Any = None


def exosieve_jobs(
    cases: Cases,
    grid: np.ndarray,
    t0: float,
    t1: float,
    rtols: list[float],
    args: argparse.Namespace,
    skip: set[str],
    notes: list[str],
) -> list[Job]:
    import exosieve
    from exosieve.catalogue import load_cases

    table = load_cases(exosieve_table(cases, t0, t1))
    exosieve.compare(table, t_start=t0, t_end=t1, times=grid, rtol=1e-6, threads=1)  # warm up

    def from_compare(result: Any) -> tuple[np.ndarray, Any]:
        if not np.allclose(result.times, grid, rtol=1e-15, atol=0.0):
            raise SystemExit("compare() returned other output ages than asked for")
        order = [result.species.index(s) for s in SPECIES]
        with np.errstate(divide="ignore"):
            return np.log(result["retained_fraction"][:, :, order]), result["steps"]

    jobs = [
        Job(
            "exosieve compare()",
            rtol,
            lambda r=rtol: exosieve.compare(
                table, t_start=t0, t_end=t1, times=grid, rtol=r, threads=1
            ),
            from_compare,
            args.repeat,
        )
        for rtol in rtols
    ]
    engine = engine_runner(table, grid, t0, t1)
    if engine is None:
        notes.append("exosieve engine alone: not measured (the private batch API changed)")
    else:

        def from_engine(out: Any) -> tuple[np.ndarray, Any]:
            fractions, steps, species = out
            order = [species.index(s) for s in SPECIES]
            with np.errstate(divide="ignore"):
                return np.log(fractions[:, :, order]), steps

        jobs += [
            Job("exosieve engine", rtol, lambda r=rtol: engine(r), from_engine, args.repeat)
            for rtol in rtols
        ]
    if "evolve" not in skip and args.evolve_cases > 0:
        count = min(args.evolve_cases, len(cases))
        objects = evolve_inputs(cases, count)

        def from_evolve(results: Any) -> tuple[np.ndarray, Any]:
            u = [np.log(r.inventory.values / cases.inventory[i]) for i, r in enumerate(results)]
            return np.stack(u), [r.steps for r in results]

        def run_evolve(rtol: float) -> Any:
            return [
                exosieve.evolve(planet, exo, inv, (t0, t1), t_eval=grid, rtol=rtol)
                for planet, exo, inv in objects
            ]

        jobs += [
            Job("exosieve evolve()", rtol, lambda r=rtol: run_evolve(r), from_evolve, args.repeat)
            for rtol in rtols
        ]
    return jobs


def padded(edges: list[np.ndarray]) -> tuple[np.ndarray, np.ndarray]:
    """Edges of every case in one array (padded with the end age) and their counts."""
    width = max(len(e) for e in edges)
    array = np.array([np.pad(e, (0, width - len(e)), constant_values=e[-1]) for e in edges])
    return array, np.array([len(e) for e in edges], dtype=np.int64)


def numba_jobs(
    p: np.ndarray,
    edges: list[np.ndarray],
    grid: np.ndarray,
    rtols: list[float],
    args: argparse.Namespace,
    skip: set[str],
    notes: list[str],
) -> list[Job]:
    try:
        dopri5_all, lsoda_all = build_numba_peers()
    except ImportError as err:
        notes.append(f"numba peers: not run ({err})")
        return []
    edge_array, counts = padded(edges)
    n = len(p)
    jobs = []
    if "numba" not in skip:
        out = np.zeros((n, len(grid), 4))
        nfev, steps = np.zeros(n, dtype=np.int64), np.zeros(n, dtype=np.int64)
        dopri5_all(p[:2], edge_array[:2], counts[:2], grid, 1e-6, out[:2], nfev, steps)  # compile
        jobs += [
            Job(
                "numba DP5(4) loop",
                rtol,
                lambda r=rtol: dopri5_all(p, edge_array, counts, grid, r, out, nfev, steps),
                lambda _: (out.copy(), steps.copy()),
                args.repeat,
            )
            for rtol in rtols
        ]
    if lsoda_all is None:
        notes.append("numbalsoda: not run (not installed)")
    elif "numbalsoda" not in skip:
        lsoda_out = np.zeros((n, len(grid), 4))
        ok = np.zeros(n, dtype=np.bool_)
        lsoda_all(p[:2], edge_array[:2], counts[:2], grid, 1e-6, lsoda_out[:2], ok)  # compile

        def from_lsoda(_: Any) -> tuple[np.ndarray, Any]:
            u = lsoda_out.copy()
            u[~ok] = np.nan
            return u, None

        jobs += [
            Job(
                "numbalsoda lsoda",
                rtol,
                lambda r=rtol: lsoda_all(p, edge_array, counts, grid, r, lsoda_out, ok),
                from_lsoda,
                args.repeat,
            )
            for rtol in rtols
        ]
    return jobs


def diffrax_jobs(
    p: np.ndarray,
    edges: list[np.ndarray],
    grid: np.ndarray,
    rtols: list[float],
    args: argparse.Namespace,
    notes: list[str],
) -> list[Job]:
    try:
        import diffrax
        import jax
    except ImportError as err:
        notes.append(f"diffrax: not run ({err})")
        return []
    # The kinks of each case, padded with an age past the end, where a jump changes nothing.
    width = max(len(e) for e in edges) - 2
    jumps = np.array(
        [np.pad(e[1:-1], (0, width - len(e) + 2), constant_values=2 * e[-1]) for e in edges]
    )

    def from_diffrax(out: Any) -> tuple[np.ndarray, Any]:
        ys, steps, ok = out
        u = np.array(ys)
        u[~np.array(ok)] = np.nan
        return u, np.array(steps)

    jobs = []
    for name in ("Dopri5", "Tsit5"):
        solve = build_diffrax(name, grid)
        start = time.perf_counter()
        jax.block_until_ready(solve(p, jumps, 1e-6))  # compile once (rtol is an argument)
        notes.append(
            f"diffrax {name}: jit compile and first call {time.perf_counter() - start:.1f} s "
            f"(jax {jax.__version__}, diffrax {diffrax.__version__}, {jax.devices()[0].platform})"
        )
        jobs += [
            Job(
                f"diffrax {name} (vmap)",
                rtol,
                lambda r=rtol, solve=solve: jax.block_until_ready(solve(p, jumps, r)),
                from_diffrax,
                args.repeat,
            )
            for rtol in rtols
        ]
    return jobs


def cost_at(runs: list[Run], target: float) -> tuple[float, str] | None:
    """Cost per case [s] at a target error: log-log interpolation on the work-precision front
    (runs ordered by cost, each more accurate than every cheaper one). ("<=", cost) when the
    cheapest run already reaches the target; None when no run does."""
    front: list[Run] = []
    for r in sorted(
        (r for r in runs if r.failed == 0 and np.isfinite(r.error)), key=lambda r: r.cost
    ):
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


# -------------------------------------------------------------------------------------- main


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--cases", type=int, default=2000, help="cases of the fast methods")
    parser.add_argument("--scipy-cases", type=int, default=50, help="first cases for solve_ivp")
    parser.add_argument("--evolve-cases", type=int, default=200, help="first cases for evolve()")
    parser.add_argument("--rtols", default=DEFAULT_RTOLS, help="comma-separated tolerances")
    parser.add_argument("--repeat", type=int, default=3, help="timed batches (best kept)")
    parser.add_argument("--skip", default="", help="methods to leave out, e.g. scipy,diffrax")
    parser.add_argument("--cpu", type=int, default=None, help="CPU to pin to (default: last)")
    args = parser.parse_args()
    rtols = [float(x) for x in args.rtols.split(",") if x]
    skip = {s.strip().lower() for s in args.skip.split(",") if s.strip()}
    cpu = pin_to_one_cpu(args.cpu)
    wall = time.perf_counter()
    start_load = os.getloadavg()

    import exosieve

    k = checked_constants()
    t0, t1 = 10 * k.MYR, 10e3 * k.MYR
    grid = np.geomspace(t0, t1, N_TIMES)
    grid[0], grid[-1] = t0, t1
    build = os.environ.get("EXOSIEVE_BUILD_INFO")
    source = (
        Path(build).read_text().strip().replace("\n", "; ")
        if build and Path(build).exists()
        else "source not recorded (run through bench/work_precision.sh to record it)"
    )
    print(f"exosieve {exosieve.__version__} from {Path(exosieve.__file__).parent}")
    print(f"  built from: {source}")
    print(
        f"pinned to CPU {cpu} of {os.cpu_count()} (os.sched_setaffinity): every method runs on "
        f"one core; wall-clock time, the best of {args.repeat} rounds over all methods (scipy: "
        f"{min(args.repeat, 2)}); Python {sys.version.split()[0]}, numpy {np.__version__}"
    )
    print("constants: " + "; ".join(k.notes))

    # The cases and the exact solution.
    cases = make_cases(args.cases, k)
    breaks = kinks(cases, t0, t1)
    start = time.perf_counter()
    integrals, estimates, quad_warnings = exact_integrals(cases, k, grid, breaks)
    ref_seconds = time.perf_counter() - start
    set_inventories(cases, integrals, k)
    per_particle = (
        4 * np.pi * cases.exobase_radius[:, None] ** 2 * cases.densities / cases.inventory
    )
    exact_u = -per_particle[:, None, :] * integrals  # ln(N/N0) [case, time, species]
    bound = float((per_particle * estimates).max())  # on |error of ln(N/N0)|, hence of N/N0
    mp_diff = mpmath_check(cases, k, grid, breaks, integrals, per_particle, 3)
    kept = np.exp(exact_u[:, 1:, :]) > KEPT
    n_kinks = np.array([len(b) for b in breaks])
    print(
        f"cases: {len(cases)} invented planets x {len(SPECIES)} species, 10 Myr - 10 Gyr, "
        f"{N_TIMES} output ages; kinks of T(t) inside the run per case: "
        + ", ".join(f"{v} in {int((n_kinks == v).sum())}" for v in np.unique(n_kinks))
        + f"; values compared (exact N/N0 > {KEPT:g}, after the start): {int(kept.sum())} "
        f"(H {int(kept[..., 0].sum())}, He {int(kept[..., 1].sum())}, O {int(kept[..., 2].sum())},"
        f" N2 {int(kept[..., 3].sum())})"
    )
    mp_text = "mpmath not installed" if mp_diff is None else f"{mp_diff:.1e}"
    print(
        f"exact solution: scipy quad in ln t, epsrel 1e-13, split at output ages and kinks "
        f"({ref_seconds:.1f} s): quad's error estimates add up to at most {bound:.1e} in "
        f"ln(N/N0) (so in N/N0), {quad_warnings} quad warnings; ln(N/N0) at the end of the first "
        f"3 cases against mpmath (30 digits): largest difference {mp_text}"
    )

    jobs: list[Job] = []
    notes: list[str] = []
    jobs += exosieve_jobs(cases, grid, t0, t1, rtols, args, skip, notes)
    p = peer_parameters(cases, k)
    grid_myr = grid / k.MYR
    edges = [segments(grid_myr, b / k.MYR) for b in breaks]
    if not {"numba", "numbalsoda"} <= skip:
        jobs += numba_jobs(p, edges, grid_myr, rtols, args, skip, notes)
    if "diffrax" not in skip:
        jobs += diffrax_jobs(p, edges, grid_myr, rtols, args, notes)
    if "scipy" not in skip and args.scipy_cases > 0:
        count = min(args.scipy_cases, len(cases))
        for method in ("LSODA", "RK45", "DOP853"):
            for rtol in rtols:
                jobs.append(
                    Job(
                        f"scipy {method}",
                        rtol,
                        lambda m=method, r=rtol: scipy_run(
                            m, p[:count], edges[:count], grid_myr, r
                        ),
                        lambda out: (out[0], None),
                        rounds=min(args.repeat, 2),
                    )
                )

    # Rounds over every job, best time of each kept: a burst of other work on the machine
    # then slows one round of every method rather than every round of one.
    for turn in range(max((job.rounds for job in jobs), default=0)):
        for job in jobs:
            if turn >= job.rounds:
                continue
            try:
                start = time.perf_counter()
                out = job.call()
                job.best = min(job.best, time.perf_counter() - start)
                job.u, job.steps = job.extract(out)
            except Exception as err:  # noqa: BLE001 - report it, measure the others
                notes.append(f"{job.method} at rtol {job.rtol:g} failed: {err!r}")
                job.rounds, job.u = 0, None
    runs = []
    for job in jobs:
        if job.u is None:
            continue
        n = len(job.u)
        error, over, values, failed = error_of(job.u, exact_u[:n], job.rtol)
        steps = None if job.steps is None else float(np.median(job.steps))
        runs.append(Run(job.method, job.rtol, n, job.best / n, error, over, values, failed, steps))
    end_load = os.getloadavg()
    notes.append(
        f"load average (1 min) at the start {start_load[0]:.2f}, at the end {end_load[0]:.2f} on "
        f"{os.cpu_count()} cores: with other work on the machine, per-case figures rise"
    )
    report(runs, notes, time.perf_counter() - wall)


def exosieve_table(c: Cases, t0: float, t1: float) -> Any:
    """The cases as an exosieve case table (a DataFrame with SI headers)."""
    import pandas as pd

    n = len(c)
    frame: dict[str, Any] = {
        "case": [f"planet {i}" for i in range(n)],
        "planet_mass [kg]": c.planet_mass,
        "planet_radius [m]": c.planet_radius,
        "exobase_altitude [m]": c.altitude,
        "exobase_density [m-3]": c.n_exo,
        "density_scaling": ["inventory"] * n,
        "exobase_composition": ["bulk"] * n,
        "semi_major_axis [m]": c.semi_major_axis,
        "star_mass [kg]": c.star_mass,
        "star_luminosity [W]": c.star_luminosity,
        "xuv_saturation_ratio [1]": c.saturation_ratio,
        "xuv_saturation_time [s]": c.saturation_time,
        "xuv_decay_index [1]": c.decay_index,
        "temperature_reference [K]": c.t_ref,
        "temperature_reference_flux [W m-2]": np.full(n, F_REF),
        "temperature_exponent [1]": c.gamma,
        "temperature_min [K]": np.full(n, T_MIN),
        "temperature_max [K]": np.full(n, T_MAX),
        "age_start [s]": np.full(n, t0),
        "age_end [s]": np.full(n, t1),
    }
    for s, name in enumerate(SPECIES):
        frame[f"x_{name}"] = c.x[:, s]
        frame[f"inventory_{name} [particles]"] = c.inventory[:, s]
    return pd.DataFrame(frame)


def engine_runner(table: Any, grid: np.ndarray, t0: float, t1: float) -> Any:
    """The batch engine alone (what compare() runs after checking the table), or None."""
    try:
        from exosieve import _core
        from exosieve.batch_options import _core_options, _engine_options

        core_table = table.to_core(first_key=0, rows=slice(0, len(table)))
        species = list(table.species)

        def run(rtol: float) -> tuple[np.ndarray, np.ndarray, list[str]]:
            options = _engine_options(species, grid, t0, t1, rtol=rtol)
            chunks: list[dict[str, Any]] = []
            _core.run_batch(
                core_table, 0, len(table), _core_options(options, 1, 256), chunks.append, None
            )
            fractions = np.concatenate([c["retained_fraction"] for c in chunks])
            steps = np.concatenate([c["steps"] for c in chunks])
            return fractions, steps, species

        run(1e-6)  # warm up, and prove the API is what this expects
        return run
    except Exception:  # noqa: BLE001 - a private API: measure what is there
        return None


def evolve_inputs(c: Cases, count: int) -> list[tuple[Any, Any, dict[str, float]]]:
    """exosieve.evolve arguments of the first `count` cases (built before timing)."""
    import exosieve

    out = []
    for i in range(count):
        star = exosieve.Star(
            c.star_mass[i],
            c.star_luminosity[i],
            saturation_ratio=c.saturation_ratio[i],
            saturation_time=c.saturation_time[i],
            decay_index=c.decay_index[i],
        )
        planet = exosieve.Planet(c.planet_mass[i], c.planet_radius[i], c.semi_major_axis[i], star)
        law = exosieve.XuvTemperature(c.t_ref[i], F_REF, c.gamma[i], T_MIN, T_MAX)
        densities = {s: float(c.densities[i, j]) for j, s in enumerate(SPECIES)}
        exo = exosieve.PrescribedExobase(c.exobase_radius[i], law, densities, "inventory")
        out.append((planet, exo, {s: float(c.inventory[i, j]) for j, s in enumerate(SPECIES)}))
    return out


def report(runs: list[Run], notes: list[str], seconds: float) -> None:
    print()
    print(
        f"{'method':<26}{'rtol':>7}{'cases':>7}{'max |dN/N0|':>13}{'err/rtol':>10}"
        f"{'>10 rtol':>14}{'us/case':>10}{'steps':>7}"
    )
    last = None
    for r in runs:
        if last is not None and r.method != last:
            print()
        last = r.method
        failed = f"  ({r.failed} failed)" if r.failed else ""
        steps = "" if r.steps is None else f"{r.steps:.0f}"
        over = f"{r.over}/{r.values}"
        print(
            f"{r.method:<26}{r.rtol:>7.0e}{r.cases:>7d}{r.error:>13.2e}{r.error / r.rtol:>10.1f}"
            f"{over:>14}{r.cost * 1e6:>10.1f}{steps:>7}{failed}"
        )
    print(
        "\nmax |dN/N0|: largest error of N/N0 against the exact quadrature over the cases, the "
        f"species and the output ages where the exact N/N0 > {KEPT:g}; >10 rtol: how many of "
        "those values are off by more than 10 rtol; us/case: best batch / cases, on one core; "
        "steps: median accepted steps per case."
    )
    methods = list(dict.fromkeys(r.method for r in runs))
    ours = [m for m in methods if m.startswith("exosieve") and "evolve" not in m]
    for target in TARGETS:
        costs = {m: cost_at([r for r in runs if r.method == m], target) for m in methods}
        print(
            f"\nat an achieved max error of {target:g}: cost per case, interpolated in log-log on "
            "each method's work-precision curve, and as a multiple of exosieve's "
            "(> 1: exosieve is faster)"
        )
        print(f"  {'method':<26}{'us/case':>12}" + "".join(f"{'/ ' + m:>28}" for m in ours))
        for m in methods:
            c = costs[m]
            if c is None:
                best = min(
                    (r.error for r in runs if r.method == m and r.failed == 0), default=math.nan
                )
                print(f"  {m:<26}{'not reached':>12}   (its smallest error: {best:.1e})")
                continue
            mark = "<=" if c[1] == "<=" else ""
            line = f"  {m:<26}{mark:>3}{c[0] * 1e6:>9.2f}"
            for mine in ours:
                own = costs[mine]
                if own is None:
                    line += f"{'-':>28}"
                    continue
                bound = {("<=", "~"): "<=", ("~", "<="): ">=", ("<=", "<="): "?"}.get(
                    (c[1], own[1]), ""
                )
                line += f"{bound:>22}{c[0] / own[0]:>6.2f}"
            print(line)
        for mine in ours:
            own = costs[mine]
            peers = [(costs[m], m) for m in methods if not m.startswith("exosieve") and costs[m]]
            if own is None or not peers:
                continue
            (cost, _), fastest = min(peers)
            print(
                f"  fastest peer at {target:g}: {fastest}, {cost * 1e6:.1f} us per case; "
                f"{mine} takes {own[0] / cost:.2f}x its time"
            )
    print(
        "\n<=: the method's loosest run already reaches the target, so its cost there is at most "
        "the figure (a ratio marked <= or >= is a bound in that direction; ? where both are)."
    )
    for note in notes:
        print(f"note: {note}")
    print(f"whole benchmark: {seconds:.0f} s")


if __name__ == "__main__":
    main()
