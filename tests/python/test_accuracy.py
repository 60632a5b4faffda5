"""Global accuracy of ``evolve`` against exact quadratures.

With a prescribed exobase whose densities follow each inventory (``n_i = n_i0 N_i/N_i0``) and no
source, ``dN_i/dt = -4 pi r^2 n_i0 (N_i/N_i0) v_eff(T(t))`` with the Jeans effusion velocity
``v_eff = Phi_J/n = v0/(2 sqrt(pi)) (1 + lambda) exp(-lambda)`` (Jeans 1925; Chamberlain 1963).
So ``ln(N_i/N_i0) = -(4 pi r^2 n_i0/N_i0) * integral of v_eff(T(t)) dt``: a worked analytic
solution up to a quadrature, evaluated here with scipy.integrate.quad (QUADPACK) with the
history's kinks as breakpoints and with physical constants from scipy.constants. The engine
shares none of this code.

The promise checked (README, "Accuracy"): at every output time, for every species above the
depletion fraction, ``|N/N0 - exact| <= 10 (rtol * exact + atol/N0)`` with the default
``atol = rtol * depletion_fraction * N0``; and without a source no output ever rises.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, field

import numpy as np
import pytest
from scipy import constants as sc
from scipy.integrate import IntegrationWarning, quad

import exosieve
from exosieve import constants as c

SPECIES = ["H", "D", "He", "3He", "H2", "HD", "C", "N", "O", "CH4", "H2O", "Ne", "N2"]
RTOLS = [1e-4, 1e-5, 1e-6, 1e-7, 1e-8, 1e-9, 1e-10]
DEPLETION = 1e-3  # evolve's default depletion_fraction
CASES_PER_KIND = 10


@dataclass
class Case:
    """One random model and its exact retained fractions."""

    kind: str
    planet: exosieve.Planet
    exobase: exosieve.PrescribedExobase
    inventory: dict[str, float]
    t_span: tuple[float, float]
    t_eval: np.ndarray
    exact: dict[str, np.ndarray] = field(default_factory=dict)
    reference_error: float = 0.0  # largest QUADPACK error estimate of an ln(N/N0) [1]


def _xuv_history(rng: np.random.Generator):
    """A clamped XUV power law on a saturated-then-decaying star, as a function of age [s]."""
    star = exosieve.Star(
        c.M_SUN * rng.uniform(0.6, 1.2),
        c.L_SUN * rng.uniform(0.3, 2.0),
        saturation_ratio=10 ** rng.uniform(-4, -3),
        saturation_time=rng.uniform(50, 300) * c.MYR,
        decay_index=rng.uniform(0.8, 1.6),
    )
    a = c.AU * rng.uniform(0.3, 2.0)
    f_ref = star.xuv_luminosity(4.5 * c.GYR) / (4 * np.pi * a * a)
    t_ref, gamma = rng.uniform(500, 1500), rng.uniform(0.2, 1.0)
    t_min, t_max = rng.uniform(200, 500), rng.uniform(1200, 3000)
    law = exosieve.XuvTemperature(t_ref, f_ref, gamma, t_min, t_max)
    l_sat, t_sat, beta = (
        star.saturation_ratio * star.luminosity,
        star.saturation_time,
        star.decay_index,
    )

    def temperature(t: float) -> float:
        lx = l_sat * (1.0 if t <= t_sat else (t / t_sat) ** -beta)
        return min(max(t_ref * (lx / (4 * np.pi * a * a) / f_ref) ** gamma, t_min), t_max)

    kinks = [t_sat]
    for clamp in (t_min, t_max):  # where the decaying flux takes T across a clamp
        lx = f_ref * (clamp / t_ref) ** (1 / gamma) * 4 * np.pi * a * a
        kinks.append(t_sat * (lx / l_sat) ** (-1 / beta))
    return star, a, law, temperature, kinks


def _make_case(kind: str, rng: np.random.Generator) -> Case:
    mass = c.M_EARTH * 10 ** rng.uniform(-1, 0.5)
    radius = c.R_EARTH * (mass / c.M_EARTH) ** 0.27
    r_exo = radius + rng.uniform(200e3, 1500e3)
    t0 = 10 ** rng.uniform(0, 2) * c.MYR
    t1 = 10 * c.GYR
    if kind == "xuv":
        star, a, history, temperature, kinks = _xuv_history(rng)
        planet = exosieve.Planet(mass, radius, a, star)
    else:
        planet = exosieve.Planet(mass, radius)
        if kind == "ramp":  # linear from start to end
            times = np.array([t0, t1])
            temps = rng.uniform(300, 3000, 2)
        else:  # table with steep falls and rises between random knots
            times = np.sort(
                np.concatenate([[t0, t1], 10 ** rng.uniform(np.log10(t0), np.log10(t1), 6)])
            )
            times = times[(times >= t0) & (times <= t1)]
            temps = rng.uniform(300, 3000, times.size)
        history = exosieve.TabulatedTemperature(times, temps)

        def temperature(t: float, times=times, temps=temps) -> float:
            return float(np.interp(t, times, temps))

        kinks = list(times)
    names = list(rng.choice(SPECIES, size=rng.integers(1, 9), replace=False))
    densities = {s: 10 ** rng.uniform(8, 14) for s in names}
    # Inventories give e-folding times from 0.02x to 100x the span at a typical temperature, so
    # that some species are lost, some barely touched; and at least ten times the particles above
    # the exobase (its density times 4 pi r^2 times the scale height r/lambda), as any real
    # atmosphere holds.
    t_typical = temperature(np.sqrt(t0 * t1))
    inventory = {}
    for s in names:
        m = exosieve.species(s).mass
        loss = 4 * np.pi * r_exo**2 * densities[s] * _effusion(t_typical, m, mass, r_exo)
        lam = sc.G * mass * m / (sc.k * t_typical * r_exo)
        column = 4 * np.pi * r_exo**2 * densities[s] * r_exo / lam
        inventory[s] = max(loss * (t1 - t0) * 10 ** rng.uniform(-1.7, 2), 10 * column)
    exobase = exosieve.PrescribedExobase(r_exo, history, densities)
    t_eval = np.geomspace(t0, t1, 30)
    case = Case(kind, planet, exobase, inventory, (t0, t1), t_eval)
    for s in names:
        m = exosieve.species(s).mass
        factor = 4 * np.pi * r_exo**2 * densities[s] / inventory[s]

        def k(t: float, m=m, factor=factor) -> float:
            return factor * _effusion(temperature(t), m, mass, r_exo)

        log_fraction = [0.0]
        for lo, hi in zip(t_eval[:-1], t_eval[1:], strict=True):
            points = [b for b in kinks if lo < b < hi] or None
            with warnings.catch_warnings():
                # QUADPACK's roundoff notice at epsrel 1e-13: its error estimate is checked below.
                warnings.simplefilter("ignore", IntegrationWarning)
                value, error = quad(k, lo, hi, points=points, epsabs=0, epsrel=1e-13, limit=400)
            log_fraction.append(log_fraction[-1] - value)
            if log_fraction[-1] > np.log(DEPLETION):
                case.reference_error = max(case.reference_error, error)
        case.exact[s] = np.exp(log_fraction)
    return case


def _effusion(temperature: float, m: float, planet_mass: float, r: float) -> float:
    """Jeans flux per unit density [m s^-1], constants from scipy.constants (CODATA)."""
    v0 = np.sqrt(2 * sc.k * temperature / m)
    lam = sc.G * planet_mass * m / (sc.k * temperature * r)
    return v0 / (2 * np.sqrt(np.pi)) * (1 + lam) * np.exp(-lam)


@pytest.fixture(scope="module")
def cases() -> list[Case]:
    rng = np.random.default_rng(20261202)
    return [
        _make_case(kind, rng) for kind in ("xuv", "table", "ramp") for _ in range(CASES_PER_KIND)
    ]


def test_reference_quadratures_are_exact_enough(cases):
    # The reference must be far more accurate than the tightest promise (10 x 1e-10).
    assert max(case.reference_error for case in cases) < 1e-11


@pytest.mark.parametrize("rtol", RTOLS)
def test_retained_fractions_within_ten_times_rtol(cases, rtol):
    worst = 0.0
    for case in cases:
        run = exosieve.evolve(
            case.planet, case.exobase, case.inventory, case.t_span, t_eval=case.t_eval, rtol=rtol
        )
        for s, n0 in case.inventory.items():
            got = run.inventory[s] / n0
            exact = case.exact[s]
            kept = exact > DEPLETION
            allowed = 10 * (rtol * exact + rtol * DEPLETION)  # default atol/N0 = rtol * 1e-3
            ratio = np.abs(got - exact)[kept] / allowed[kept]
            if ratio.size:
                worst = max(worst, float(ratio.max()))
            assert np.all(ratio <= 1.0), (case.kind, s, rtol, float(ratio.max()))
            assert np.all(np.diff(got) <= 0.0), (case.kind, s, "an output rose without a source")
    # The family must exercise the bound, not pass trivially: some error is measurable.
    assert worst > 1e-3


def test_hand_over_from_energy_limited_to_jeans_escape_is_exact():
    # Hydrogen alone on a small, hot world: while its Jeans parameter is below the
    # hydrodynamic threshold (2.1, Volkov et al. 2011) it is lost at the energy-limited rate
    # dN/dt = -eta pi R^3 F_xuv(t) / (G M m) (Watson et al. 1981, R_xuv = R, no Roche-lobe
    # factor), independent of N; once the cooling exobase lifts lambda above the threshold, at
    # T* = G M m / (2.1 k r), Jeans escape takes over: d ln N/dt = -k(t). Both pieces are exact
    # quadratures (scipy.integrate.quad), joined at the analytic hand-over time.
    mass, radius = 0.1 * c.M_EARTH, 0.53 * c.R_EARTH
    star = exosieve.Star(0.9 * c.M_SUN, 0.7 * c.L_SUN)
    a = 0.8 * c.AU
    planet = exosieve.Planet(mass, radius, a, star)
    r_exo = radius + 500e3
    m = exosieve.species("H").mass
    f_ref = float(planet.xuv_flux(4.5 * c.GYR))
    t_ref, gamma, t_min, t_max = 400.0, 0.6, 200.0, 1500.0
    law = exosieve.XuvTemperature(t_ref, f_ref, gamma, t_min, t_max)
    eta = 0.15
    hydro = exosieve.EnergyLimitedEscape(efficiency=eta, roche_lobe=False)
    t0, t1 = 10 * c.MYR, 10 * c.GYR
    t_eval = np.geomspace(t0, t1, 40)

    def flux(t: float) -> float:
        return float(planet.xuv_flux(t))  # the star's history itself is tested in test_stellar

    def temperature(t: float) -> float:
        return min(max(t_ref * (flux(t) / f_ref) ** gamma, t_min), t_max)

    t_star_temperature = sc.G * mass * m / (2.1 * sc.k * r_exo)
    assert t_min < t_star_temperature < t_max
    # The hand-over: F falls as (t / t_sat)^-beta after saturation.
    f_star = f_ref * (t_star_temperature / t_ref) ** (1 / gamma)
    t_sat, beta = star.saturation_time, star.decay_index
    t_star = t_sat * (f_star / flux(t_sat)) ** (-1 / beta)
    assert t0 < t_star < t1
    t_clamp = t_sat * (f_ref * (t_max / t_ref) ** (1 / gamma) / flux(t_sat)) ** (-1 / beta)
    kinks = [t_sat, t_clamp, t_star]

    def integral(f, lo: float, hi: float) -> float:
        points = [b for b in kinks if lo < b < hi] or None
        return quad(f, lo, hi, points=points, epsabs=0, epsrel=1e-13, limit=400)[0]

    mass_loss = eta * np.pi * radius**3 / (sc.G * mass * m)  # times F: particles s^-1
    # The inventory loses 30 % while hydrodynamic, and the exobase density makes Jeans escape
    # take about one e-fold after the hand-over: both regimes take a visible share.
    hydrodynamic_loss = mass_loss * integral(flux, t0, t_star)
    n0 = hydrodynamic_loss / 0.3
    n_star = n0 - hydrodynamic_loss
    jeans_effusion = integral(lambda s: _effusion(temperature(s), m, mass, r_exo), t_star, t1)
    density = n0 / (4 * np.pi * r_exo**2 * jeans_effusion)
    exobase = exosieve.PrescribedExobase(r_exo, law, {"H": density})
    loss = 4 * np.pi * r_exo**2 * density / n0  # the density follows the inventory

    def exact(t: float) -> float:
        if t <= t_star:
            return (n0 - mass_loss * integral(flux, t0, t)) / n0
        jeans = integral(lambda s: loss * _effusion(temperature(s), m, mass, r_exo), t_star, t)
        return n_star / n0 * np.exp(-jeans)

    expected = np.array([exact(t) for t in t_eval])
    assert expected[-1] == pytest.approx(0.7 * np.exp(-1.0), rel=1e-12)
    for rtol in (1e-6, 1e-9):
        run = exosieve.evolve(
            planet, exobase, {"H": n0}, (t0, t1), t_eval=t_eval, rtol=rtol, hydrodynamic=hydro
        )
        assert [change[1:] for change in run.regime_changes][-1][1] != "hydrodynamic"
        hand_over = [t for t, before, _ in run.regime_changes if before == "hydrodynamic"]
        assert hand_over and abs(hand_over[0] - t_star) < 1e-9 * t_star
        got = run.inventory["H"] / n0
        np.testing.assert_array_less(np.abs(got - expected), 10 * rtol * (expected + DEPLETION))
        assert np.all(np.diff(got) <= 0.0)


@pytest.mark.parametrize("stepper", ["auto", "rosenbrock4"])
def test_source_against_loss_relaxes_to_the_exact_balance(stepper):
    # One species at a constant exobase temperature whose exobase density follows its
    # inventory: the loss is k N with a constant k, and a constant source S gives the worked
    # solution N(t) = S/k + (N0 - S/k) e^(-k t). From 1e30 particles the inventory falls to
    # S/k ~ 2e3, far below the absolute tolerance (1e-9 N0 = 1e21): there the error test must
    # still keep ln N near its balance, never let it run off to e^(1e12).
    planet = exosieve.Planet(c.M_EARTH, c.R_EARTH)
    exobase = exosieve.PrescribedExobase(c.R_EARTH + 500e3, 1000.0, {"H": 1e11})
    n0, source = 1e30, 1.0
    t_eval = np.array([0.0, 1e3, 1e4, 1e5, 0.25 * c.GYR, c.GYR])
    r = exosieve.evolve(
        planet,
        exobase,
        {"H": n0},
        (0.0, c.GYR),
        t_eval=t_eval,
        sources={"H": exosieve.TabulatedSource([0.0], [source])},
        stepper=stepper,
    )
    k = r.escape_rate["H"][0] / n0  # [s^-1], constant: T and the density per particle are
    balance = source / k
    exact = balance + (n0 - balance) * np.exp(-k * t_eval)
    atol = 1e-8 * 1e-3 * n0  # evolve's default: rtol * depletion_fraction * N0
    np.testing.assert_array_less(np.abs(r.inventory["H"] - exact), 10 * (1e-8 * exact + atol))
    np.testing.assert_allclose(r.inventory["H"][-2:], balance, rtol=1e-6)
    np.testing.assert_allclose(r.escape_rate["H"][-2:], source, rtol=1e-6)
