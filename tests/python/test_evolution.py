"""exosieve.evolve against worked analytic solutions and against scipy.integrate.solve_ivp on
the same models written in numpy."""

import math

import numpy as np
import pytest
from scipy import constants as sc
from scipy import integrate, optimize

import exosieve
from exosieve import constants as c

G, K = sc.G, sc.k  # scipy.constants (CODATA 2018, as the core)
R_EXO = c.R_EARTH + 500e3


def jeans_rate(n, T, mass, planet_mass, r):
    """Global Jeans escape rate 4 pi r^2 n v0/(2 sqrt(pi)) (1 + lambda) e^-lambda (Jeans 1925;
    Chamberlain 1963), written out in numpy."""
    lam = G * planet_mass * mass / (K * T * r)
    v0 = np.sqrt(2 * K * T / mass)
    return 4 * np.pi * r**2 * n * v0 / (2 * np.sqrt(np.pi)) * (1 + lam) * np.exp(-lam)


def earth(**kwargs):
    return exosieve.Planet(c.M_EARTH, c.R_EARTH, **kwargs)


def test_exponential_decay_when_densities_follow_the_inventory():
    # Worked analytic solution: dN/dt = -(Q0/N0) N, so N = N0 exp(-Q0 t/N0).
    T, n0 = 1000.0, 1e11
    Q0 = jeans_rate(n0, T, exosieve.species("H").mass, c.M_EARTH, R_EXO)
    N0 = Q0 * c.GYR
    exo = exosieve.PrescribedExobase(R_EXO, T, {"H": n0}, scaling="inventory")
    t_eval = np.linspace(0, 5 * c.GYR, 11)
    r = exosieve.evolve(earth(), exo, {"H": N0}, (0.0, 8 * c.GYR), t_eval=t_eval, rtol=1e-10)
    np.testing.assert_allclose(r.time, t_eval, rtol=0)
    np.testing.assert_allclose(r.inventory["H"], N0 * np.exp(-Q0 * t_eval / N0), rtol=1e-9)
    np.testing.assert_allclose(r.escape_rate["H"], Q0 * np.exp(-Q0 * t_eval / N0), rtol=1e-9)
    assert r.depletion_time["H"] == pytest.approx(math.log(1000) * c.GYR, rel=1e-9)
    assert r.steps < 20


def test_linear_loss_and_depletion_time_when_densities_are_fixed():
    # Worked analytic solution: dN/dt = -Q0, N = N0 - Q0 t, depleted (N = f N0) at
    # t = (1 - f) N0 / Q0; after that the species is held at f N0.
    T, n0, f = 1000.0, 1e11, 1e-2
    Q0 = jeans_rate(n0, T, exosieve.species("H").mass, c.M_EARTH, R_EXO)
    N0 = 2 * Q0 * c.GYR
    exo = exosieve.PrescribedExobase(R_EXO, T, {"H": n0}, scaling="fixed")
    t_eval = np.linspace(0, 3 * c.GYR, 31)
    r = exosieve.evolve(
        earth(), exo, {"H": N0}, (0.0, 3 * c.GYR), t_eval=t_eval, rtol=1e-10, depletion_fraction=f
    )
    t_dep = (1 - f) * N0 / Q0
    assert r.depletion_time["H"] == pytest.approx(t_dep, rel=1e-9)
    before = t_eval < t_dep
    np.testing.assert_allclose(r.inventory["H"][before], N0 - Q0 * t_eval[before], rtol=1e-9)
    np.testing.assert_allclose(r.inventory["H"][~before], f * N0, rtol=1e-9)
    assert np.all(r.escape_rate["H"][~before] == 0.0)


def test_piecewise_behaviour_under_a_temperature_table():
    # Held at 900 K to 1 Gyr, linear to 1200 K at 2 Gyr, held after. With densities following
    # the inventory, ln N(t) = -integral of k(T(t)) dt, k = Q(n0, T)/N0: linear in t outside the
    # ramp; the ramp integral from scipy.integrate.quad.
    n0, T1, T2 = 1e11, 900.0, 1200.0
    m = exosieve.species("H").mass

    def k(T):
        return jeans_rate(n0, T, m, c.M_EARTH, R_EXO) / N0

    N0 = jeans_rate(n0, T2, m, c.M_EARTH, R_EXO) * 3 * c.GYR
    table = exosieve.TabulatedTemperature([1 * c.GYR, 2 * c.GYR], [T1, T2])
    exo = exosieve.PrescribedExobase(R_EXO, table, {"H": n0})
    t_eval = np.array([0.5, 1.0, 1.5, 2.0, 3.0, 4.0]) * c.GYR
    r = exosieve.evolve(earth(), exo, {"H": N0}, (0.0, 4 * c.GYR), t_eval=t_eval, rtol=1e-10)

    def T_of(t):
        return np.interp(t, [1 * c.GYR, 2 * c.GYR], [T1, T2])

    def exact(t):
        return -integrate.quad(
            lambda s: k(T_of(s)),
            0.0,
            t,
            points=[1 * c.GYR, 2 * c.GYR],
            epsabs=0,
            epsrel=1e-13,
            limit=200,
        )[0]

    expected = np.array([exact(t) for t in t_eval])
    np.testing.assert_allclose(np.log(r.inventory["H"] / N0), expected, rtol=0, atol=1e-9)
    # Outside the ramp the decay rate is exactly k(T1) and k(T2).
    assert expected[1] == pytest.approx(-k(T1) * c.GYR, rel=1e-12)
    assert expected[5] - expected[4] == pytest.approx(-k(T2) * c.GYR, rel=1e-10)
    np.testing.assert_allclose(r.exobase_temperature, T_of(t_eval), rtol=1e-14)


def test_rayleigh_law_for_d_against_h():
    # Rayleigh fractionation, worked: with both losses proportional to the inventories,
    # N_D/N_D0 = f^alpha with f = N_H/N_H0 and alpha = k_D/k_H, so (D/H)/(D/H)_0 = f^(alpha-1).
    T = 1500.0
    n0 = {"H": 1e11, "D": 1e7}
    N_H0 = jeans_rate(n0["H"], T, exosieve.species("H").mass, c.M_EARTH, R_EXO) * c.GYR
    N0 = {"H": N_H0, "D": 1e-4 * N_H0}
    exo = exosieve.PrescribedExobase(R_EXO, T, n0)
    r = exosieve.evolve(earth(), exo, N0, (0.0, 4 * c.GYR), rtol=1e-10)
    k = {
        s: jeans_rate(n0[s], T, exosieve.species(s).mass, c.M_EARTH, R_EXO) / N0[s]
        for s in ("H", "D")
    }
    alpha = k["D"] / k["H"]
    f = r.inventory["H"] / N0["H"]
    np.testing.assert_allclose(r.isotope_ratio["D/H"] / 1e-4, f ** (alpha - 1), rtol=1e-8)
    assert r.isotope_ratio["D/H"][-1] / 1e-4 == pytest.approx(math.exp(4 * (1 - alpha)), rel=1e-8)


# --- XUV-driven four-species case against solve_ivp ------------------------------------------

F_REF = 0.0046  # invented reference flux for the demo temperature law [W m^-2]


def xuv_case():
    """Invented system: a Sun-like star (IAU nominal mass and luminosity, library XUV defaults)
    and an Earth-mass planet at 1 au with a prescribed exobase 500 km up."""
    star = exosieve.Star(c.M_SUN, c.L_SUN)
    planet = exosieve.Planet(c.M_EARTH, c.R_EARTH, c.AU, star)
    temperature = exosieve.XuvTemperature(1000.0, F_REF, 0.5, 200.0, 5000.0)
    n0 = {"H": 1e11, "He": 1e12, "O": 1e13, "N2": 1e13}
    N0 = {"H": 3e40, "He": 1e38, "O": 1e42, "N2": 1e42}
    return star, planet, temperature, n0, N0


def numpy_xuv_model(star, planet, n0, N0, r_exo):
    """d ln N_i/dt = -Q_i(n_i0 N_i/N_i0, T(F_xuv(t)))/N_i in numpy: the same model."""
    names = list(N0)
    m = np.array([exosieve.species(s).mass for s in names])
    k0 = np.array([n0[s] / N0[s] for s in names])
    t_sat, L_sat = star.saturation_time, star.saturation_ratio * star.luminosity

    def temperature(t):
        L = L_sat * (1.0 if t <= t_sat else (t / t_sat) ** -star.decay_index)
        F = L / (4 * np.pi * c.AU**2)
        return min(5000.0, max(200.0, 1000.0 * (F / F_REF) ** 0.5))

    def rhs(t, y):
        return -jeans_rate(k0, temperature(t), m, planet.mass, r_exo)

    return rhs


def test_xuv_driven_case_agrees_with_solve_ivp_to_the_tolerance_asked():
    # Reference: scipy.integrate.solve_ivp (DOP853, rtol 1e-13) on the same model in numpy.
    star, planet, temperature, n0, N0 = xuv_case()
    exo = exosieve.PrescribedExobase(R_EXO, temperature, n0)
    span = (10 * c.MYR, 10 * c.GYR)
    rhs = numpy_xuv_model(star, planet, n0, N0, R_EXO)
    y0 = np.log(list(N0.values()))
    for rtol in (1e-6, 1e-8, 1e-10):
        r = exosieve.evolve(planet, exo, N0, span, rtol=rtol)
        ref = integrate.solve_ivp(
            rhs, span, y0, method="DOP853", rtol=1e-13, atol=1e-13, t_eval=r.time
        )
        y = np.log(np.maximum(r.inventory.values, 1e-300))
        kept = ref.y.T - y0 > math.log(1e-6)  # where N > 1e-6 N0 (below, atol governs)
        error = np.max(np.abs(y - ref.y.T)[kept])
        assert error < 50 * rtol, (rtol, error)
        # Depletion times from solve_ivp's event location on the same model.
        for i, name in enumerate(N0):
            event = lambda t, yy, i=i: yy[i] - y0[i] - math.log(1e-3)  # noqa: E731
            event.terminal = False
            ev = integrate.solve_ivp(
                rhs, span, y0, method="DOP853", rtol=1e-13, atol=1e-13, events=event
            )
            found = ev.t_events[0]
            if r.depletion_time[name] is None:
                assert len(found) == 0
            else:
                assert r.depletion_time[name] == pytest.approx(found[0], rel=100 * rtol)
    assert r.depletion_time["H"] is not None and r.depletion_time["N2"] is None


def thermosphere_case():
    """Invented system: Earth-mass planet at 1 au around a Sun-like star; isothermal
    thermosphere from a homopause 100 km up, N2/O/H mixed; exobase temperature an XUV power law
    clamped to [300, 1500] K."""
    star = exosieve.Star(c.M_SUN, c.L_SUN)
    planet = exosieve.Planet(c.M_EARTH, c.R_EARTH, c.AU, star)
    x0 = {"N2": 0.8, "O": 0.2 - 1e-6, "H": 1e-6}
    thermo = exosieve.Thermosphere(planet, c.R_EARTH + 100e3, 1e19, x0, 1000.0)
    temperature = exosieve.XuvTemperature(1000.0, F_REF, 0.3, 300.0, 1500.0)
    N0 = {"N2": 1e43, "O": 2e42, "H": 1e45}  # H: a large reservoir behind a small mixing ratio
    return star, planet, thermo, temperature, x0, N0


def numpy_thermosphere_model(star, planet, x0, N0, r_h, n_h):
    """The evolving isothermal thermosphere in numpy: x_i ∝ x_i0 N_i/N_i0;
    n_i(r) = x_i n_h exp(-lambda_i(r_h)(1 - r_h/r)); exobase where 1/sum n_j sigma_j equals
    k T/(m_mean g) (scipy.optimize.brentq); Jeans escape from there."""
    names = list(N0)
    sp = [exosieve.species(s) for s in names]
    m = np.array([s.mass for s in sp])
    sigma = np.array([s.cross_section for s in sp])
    lx0 = np.log([x0[s] for s in names])
    ly0 = np.log(list(N0.values()))
    M = planet.mass
    t_sat, L_sat = star.saturation_time, star.saturation_ratio * star.luminosity

    def temperature(t):
        L = L_sat * (1.0 if t <= t_sat else (t / t_sat) ** -star.decay_index)
        F = L / (4 * np.pi * c.AU**2)
        return min(1500.0, max(300.0, 1000.0 * (F / F_REF) ** 0.3))

    def log_n(r, lx, T):
        # densities at radii r (any shape) for each species (last axis)
        r = np.asarray(r)[..., None]
        return lx + np.log(n_h) - G * M * m / (K * T * r_h) * (1 - r_h / r)

    def criterion(r, lx, T):
        ln = log_n(r, lx, T)
        top = ln.max(axis=-1, keepdims=True)
        n = np.exp(ln - top)  # scaled by e^-top: cancels in the mean mass
        m_mean = np.sum(n * m, axis=-1) / np.sum(n, axis=-1)
        log_collisions = top[..., 0] + np.log(np.sum(n * sigma, axis=-1))
        return -log_collisions - np.log(K * T * r * r / (m_mean * G * M))

    grid = r_h * np.linspace(1.0, 20.0, 4000)

    def rhs(t, y):
        T = temperature(t)
        lx = lx0 + y - ly0
        lx -= np.log(np.sum(np.exp(lx - lx.max()))) + lx.max()
        j = int(np.argmax(criterion(grid, lx, T) > 0))
        r_exo = optimize.brentq(
            lambda r: float(criterion(r, lx, T)), grid[j - 1], grid[j], xtol=1e-9, rtol=1e-15
        )
        # ln Q_i - ln N_i in logs: H falls far below 1e-308 of its start.
        lam = G * M * m / (K * T * r_exo)
        log_q = (
            np.log(4 * np.pi * r_exo**2)
            + log_n(r_exo, lx, T)
            + np.log(np.sqrt(2 * K * T / m) / (2 * np.sqrt(np.pi)))
            + np.log1p(lam)
            - lam
        )
        return -np.exp(log_q - y)

    return rhs


def test_xuv_driven_thermosphere_agrees_with_solve_ivp():
    # Reference: scipy.integrate.solve_ivp (DOP853, rtol 1e-11) on the same evolving
    # thermosphere written in numpy (closed-form isothermal densities, brentq exobase).
    star, planet, thermo, temperature, x0, N0 = thermosphere_case()
    span = (10 * c.MYR, 3 * c.GYR)
    t_eval = np.array([10.5, 30, 100, 300, 1000, 3000]) * c.MYR
    rtol = 1e-8
    r = exosieve.evolve(
        planet,
        thermo,
        N0,
        span,
        t_eval=t_eval,
        rtol=rtol,
        exobase_temperature=temperature,
        limit_by_diffusion=False,
    )
    rhs = numpy_thermosphere_model(
        star, planet, x0, N0, thermo.homopause_radius, thermo.homopause_density
    )
    y0 = np.log(list(N0.values()))
    ref = integrate.solve_ivp(rhs, span, y0, method="DOP853", rtol=1e-11, atol=1e-11, t_eval=t_eval)
    assert ref.success
    y = np.log(np.maximum(r.inventory.values, 1e-300))
    kept = ref.y.T - y0 > math.log(1e-6)
    assert kept[:, :2].all()
    assert np.max(np.abs(y - ref.y.T)[kept]) < 50 * rtol
    # Something happened: H fell by more than e^-20 over the run, the exobase moved.
    assert y[-1, 2] - y0[2] < -20
    assert np.ptp(r.exobase_radius) > 1e5


# --- energy-limited loss, Roche factor, regimes ----------------------------------------------


def test_roche_factor_limits():
    # Worked analytic limits of K(xi) = 1 - 3/(2 xi) + 1/(2 xi^3) (Erkaev et al. 2007).
    assert exosieve.roche_lobe_factor(1.0 + 1e-9) == pytest.approx(0.0, abs=1e-8)
    assert exosieve.roche_lobe_factor(1e6) == pytest.approx(1.0, abs=2e-6)
    assert exosieve.roche_lobe_factor(2.0) == 0.3125
    xi = np.array([1e3, 1e4])
    np.testing.assert_allclose(
        1 - exosieve.roche_lobe_factor(xi), 1.5 / xi - 0.5 / xi**3, rtol=1e-9
    )
    with pytest.raises(ValueError, match="xi must be > 1"):
        exosieve.roche_lobe_factor(0.5)


def test_energy_limited_worked_example():
    # Invented planet 5 M_earth, R_p = R_xuv = 2 R_earth, F = 10 W m^-2, eta = 0.15:
    #   R_p^3 = (1.27562e7 m)^3 = 2.075697e21 m^3;  eta pi R^3 F = 9.781492e21
    #   G M_p = 5 x 3.986004e14 (IAU 2015 B3) = 1.993002e15;  dM/dt = 4.907919e6 kg/s
    Rp = 2 * c.R_EARTH
    mdot = exosieve.energy_limited_mass_loss(0.15, Rp, Rp, 10.0, 5 * c.M_EARTH)
    assert mdot == pytest.approx(4.907919e6, rel=1e-6)
    assert exosieve.energy_limited_mass_loss(
        0.15, Rp, Rp, 10.0, 5 * c.M_EARTH, roche_factor=0.3125
    ) == pytest.approx(mdot / 0.3125)


def test_no_exobase_hands_over_to_energy_limited_escape():
    # An invented hot sub-Neptune (5 Earth masses, 2.5 Earth radii, H/He) around a Sun-like star
    # at 0.1 au, its thermosphere cooling from 5000 K to 300 K while the star is saturated.
    # While hot the gas is collisional out to the outer radius: no exobase.
    star = exosieve.Star(c.M_SUN, c.L_SUN)
    planet = exosieve.Planet(5 * c.M_EARTH, 2.5 * c.R_EARTH, 0.1 * c.AU, star)
    thermo = exosieve.Thermosphere(planet, 1.05 * planet.radius, 1e18, {"H": 0.9, "He": 0.1}, 5e3)
    assert not thermo.exobase().found
    span = (10 * c.MYR, 60 * c.MYR)
    cooling = exosieve.TabulatedTemperature(span, [5000.0, 300.0])
    inventory = {"H": 1e51, "He": 1e50}
    with pytest.raises(exosieve.NumericalError, match="no exobase at t =.*energy-limited"):
        exosieve.evolve(planet, thermo, inventory, span, exobase_temperature=cooling)
    hydro = exosieve.EnergyLimitedEscape(efficiency=0.15, roche_lobe=False, diffusion={"He": 0.0})
    r = exosieve.evolve(
        planet,
        thermo,
        inventory,
        span,
        t_eval=span,
        exobase_temperature=cooling,
        hydrodynamic=hydro,
        rtol=1e-8,
    )
    # Watson et al. (1981) by hand, R_xuv = R, no Roche factor, He not dragged:
    # dM/dt = eta pi R^3 F / (G M), all of it H.
    flux = star.saturation_ratio * c.L_SUN / (4 * np.pi * (0.1 * c.AU) ** 2)
    mdot = 0.15 * np.pi * planet.radius**3 * flux / (c.G * planet.mass)
    assert r.escape_rate["H"][0] == pytest.approx(mdot / exosieve.species("H").mass, rel=1e-12)
    assert r.energy_limited.tolist() == [1, 0]
    assert r.regime_changes[0][1] == "hydrodynamic"
    assert span[0] < r.regime_changes[0][0] < span[1]


def test_energy_limited_evolution_is_linear_during_saturation():
    # Constant XUV flux during saturation: the light species loses dM/dt/m_H per second
    # (Watson et al. 1981 energy-limited rate with the Erkaev et al. 2007 factor; worked).
    star = exosieve.Star(c.M_SUN, c.L_SUN)
    planet = exosieve.Planet(c.M_EARTH, c.R_EARTH, c.AU, star)
    exo = exosieve.PrescribedExobase(R_EXO, 800.0, {"H": 1e10, "CO2": 1e13})
    hydro = exosieve.EnergyLimitedEscape(
        efficiency=0.2, activation="always", diffusion={"CO2": 0.0}
    )
    t_eval = np.array([10, 50, 90]) * c.MYR
    r = exosieve.evolve(
        planet,
        exo,
        {"H": 1e48, "CO2": 1e46},
        (10 * c.MYR, 90 * c.MYR),
        t_eval=t_eval,
        hydrodynamic=hydro,
        rtol=1e-10,
    )
    xi = exosieve.roche_lobe_ratio(planet.mass, star.mass, c.AU, planet.radius)
    mdot = exosieve.energy_limited_mass_loss(
        0.2,
        planet.radius,
        planet.radius,
        planet.xuv_flux(50 * c.MYR),
        planet.mass,
        exosieve.roche_lobe_factor(xi),
    )
    q = mdot / exosieve.species("H").mass
    np.testing.assert_allclose(r.inventory["H"], 1e48 - q * (t_eval - t_eval[0]), rtol=1e-9)
    assert np.all(r.energy_limited == 1)


def test_regime_classification_at_published_thresholds():
    # Volkov et al. (2011, ApJL 729, L24): ~6, ~3 and ~2.1.
    lam = np.array([6.000001, 6.0, 3.000001, 3.0, 2.100001, 2.1, 0.5])
    codes = exosieve.classify_regime(lam)
    assert [exosieve.REGIMES[k] for k in codes] == [
        "jeans",
        "enhanced_jeans",
        "enhanced_jeans",
        "transition",
        "transition",
        "hydrodynamic",
        "hydrodynamic",
    ]
    custom = exosieve.RegimeThresholds(enhanced=10.0, transition=5.0, hydrodynamic=1.0)
    assert exosieve.classify_regime(8.0, custom) == 1


def test_regime_changes_are_located_and_reported():
    # lambda_H = G M m/(k T r) crosses 6 (Volkov et al. 2011) where T = G M m/(6 k r); on the
    # linear table 1000 -> 2000 K over 1 Gyr that is an exact time.
    table = exosieve.TabulatedTemperature([0.0, c.GYR], [1000.0, 2000.0])
    exo = exosieve.PrescribedExobase(R_EXO, table, {"H": 1e13, "O": 1e10})
    r = exosieve.evolve(earth(), exo, {"H": 1e50, "O": 1e47}, (0.0, c.GYR))
    T6 = G * c.M_EARTH * exosieve.species("H").mass / (6 * K * R_EXO)
    t6 = (T6 - 1000.0) / 1000.0 * c.GYR
    assert r.regime_changes[0][1:] == ("jeans", "enhanced_jeans")
    assert r.regime_changes[0][0] == pytest.approx(t6, rel=1e-12)
    assert r.regime_names[0] == "jeans" and r.regime_names[-1] == "enhanced_jeans"


# --- histories, sources, hooks ------------------------------------------------------------------


def test_callable_temperature_matches_the_table_it_computes():
    table = exosieve.TabulatedTemperature([0.0, c.GYR], [900.0, 1300.0])
    n0, N0 = {"H": 1e11}, {"H": 1e38}
    t_eval = np.linspace(0, c.GYR, 5)
    a = exosieve.evolve(
        earth(), exosieve.PrescribedExobase(R_EXO, table, n0), N0, (0, c.GYR), t_eval=t_eval
    )
    b = exosieve.evolve(
        earth(),
        exosieve.PrescribedExobase(R_EXO, lambda t: table(t), n0),
        N0,
        (0, c.GYR),
        t_eval=t_eval,
    )
    np.testing.assert_allclose(b.inventory["H"], a.inventory["H"], rtol=1e-12)
    assert b.config["exobase_temperature"]["kind"] == "callable"


def test_sources_balance_proportional_loss():
    # dN/dt = S - k N: N = S/k + (N0 - S/k) e^(-k t) (worked analytic solution).
    T, n0 = 1000.0, 1e11
    Q0 = jeans_rate(n0, T, exosieve.species("H").mass, c.M_EARTH, R_EXO)
    N0 = Q0 * c.GYR
    k, S = Q0 / N0, 0.3 * Q0
    t_eval = np.array([1.0, 2.0, 5.0]) * c.GYR
    exo = exosieve.PrescribedExobase(R_EXO, T, {"H": n0})
    r = exosieve.evolve(
        earth(), exo, {"H": N0}, (0.0, 5 * c.GYR), t_eval=t_eval, rtol=1e-10, sources={"H": S}
    )
    np.testing.assert_allclose(
        r.inventory["H"], S / k + (N0 - S / k) * np.exp(-k * t_eval), rtol=1e-9
    )
    tab = exosieve.TabulatedSource([0.0, 5 * c.GYR], [S, S])
    r2 = exosieve.evolve(
        earth(), exo, {"H": N0}, (0.0, 5 * c.GYR), t_eval=t_eval, rtol=1e-10, sources={"H": tab}
    )
    np.testing.assert_allclose(r2.inventory["H"], r.inventory["H"], rtol=1e-12)


def stepwise_exobase(knots: int = 101):
    """A temperature table whose every knot is a step boundary: a run of >= knots - 1 steps."""
    table = exosieve.TabulatedTemperature(
        np.linspace(0, c.GYR, knots), 900 + 100 * np.sin(np.arange(knots))
    )
    return exosieve.PrescribedExobase(R_EXO, table, {"H": 1e11})


def stepwise_run(progress, progress_every: int) -> exosieve.EvolutionResult:
    """H over 1 Gyr on `stepwise_exobase`, without t_eval: every step's end is an output."""
    return exosieve.evolve(
        earth(),
        stepwise_exobase(),
        {"H": 1e38},
        (0.0, c.GYR),
        progress=progress,
        progress_every=progress_every,
    )


def test_progress_every_k_accepted_steps():
    seen = []
    r = stepwise_run(seen.append, 2)
    # Without t_eval every step's end is an output time: the calls came at steps 2, 4, ...
    assert r.completed and r.steps >= 100
    assert len(seen) == r.steps // 2 and seen == list(r.time[2::2])
    exo = exosieve.PrescribedExobase(R_EXO, 1000.0, {"H": 1e11, "He": 1e12})
    for bad in (0, -1, 1.5, True, "3"):
        with pytest.raises(ValueError, match=r"progress_every must be a whole number >= 1"):
            exosieve.evolve(earth(), exo, {"H": 1e36, "He": 1e37}, (0.0, c.GYR), progress_every=bad)


def test_progress_false_stops_the_run_and_keeps_results():
    seen = []
    r = stepwise_run(lambda t: seen.append(t) or len(seen) < 2, 3)
    # False at the 2nd call, made after every 3rd accepted step: the run stops after step 6.
    assert len(seen) == 2 and r.steps == 6
    assert not r.completed and r.t_reached == seen[-1] == r.time[-1] < c.GYR
    assert seen[0] == r.time[3]


def test_ctrl_c_stops_a_long_run_with_keyboard_interrupt(ctrl_c):
    import os
    import signal

    # The 5th progress call (every 10 accepted steps) sends SIGINT to this process, as Ctrl-C
    # does; KeyboardInterrupt is raised there, and the run stops at that call.
    calls = []

    def progress(t):
        calls.append(t)
        if len(calls) == 5:
            os.kill(os.getpid(), signal.SIGINT)

    with pytest.raises(KeyboardInterrupt):
        exosieve.evolve(
            earth(),
            stepwise_exobase(),
            {"H": 1e38},
            (0.0, c.GYR),
            progress=progress,
            progress_every=10,
        )
    assert len(calls) == 5 and calls[-1] < c.GYR


# --- results on disk ----------------------------------------------------------------------------


@pytest.fixture
def result():
    star = exosieve.Star(c.M_SUN, c.L_SUN)
    planet = exosieve.Planet(c.M_EARTH, c.R_EARTH, c.AU, star)
    temperature = exosieve.XuvTemperature(1000.0, F_REF, 0.5, 200.0, 3000.0)
    exo = exosieve.PrescribedExobase(R_EXO, temperature, {"H": 1e11, "D": 1e7, "O": 1e13})
    return exosieve.evolve(
        planet, exo, {"H": 1e40, "D": 1e36, "O": 1e42}, (10 * c.MYR, 4.5 * c.GYR)
    )


def test_hdf5_round_trip_is_exact(result, tmp_path):
    path = tmp_path / "run.h5"
    result.to_hdf5(path)
    back = exosieve.open_result(path)
    assert back.species == result.species and back.ratio_names == ["D/H"]
    for name in ("inventory", "escape_rate", "source_rate", "jeans_parameter", "isotope_ratio"):
        np.testing.assert_array_equal(getattr(back, name).values, getattr(result, name).values)
    for name in (
        "time",
        "exobase_radius",
        "exobase_temperature",
        "xuv_flux",
        "regime",
        "energy_limited",
    ):
        np.testing.assert_array_equal(getattr(back, name), getattr(result, name))
    assert back.depletion_time == result.depletion_time
    assert (back.steps, back.rejected_steps, back.completed) == (
        result.steps,
        result.rejected_steps,
        True,
    )
    assert back.config == result.config
    # Reopened results write again, identically.
    back.to_hdf5(tmp_path / "again.h5")
    again = exosieve.open_result(tmp_path / "again.h5")
    np.testing.assert_array_equal(again.inventory.values, result.inventory.values)


def test_xarray_opens_the_file_with_dimensions_coordinates_and_units(result, tmp_path):
    xr = pytest.importorskip("xarray")
    path = tmp_path / "run.h5"
    result.to_hdf5(path)
    with xr.open_dataset(path, engine="h5netcdf") as ds:
        assert ds.inventory.dims == ("time", "species")
        assert ds.isotope_ratio.dims == ("time", "ratio")
        np.testing.assert_array_equal(ds.inventory.sel(species="D").values, result.inventory["D"])
        assert ds.time.attrs["units"] == "s" and ds.time.dtype == np.float64
        for name, var in list(ds.data_vars.items()) + list(ds.coords.items()):
            assert "units" in var.attrs and "long_name" in var.attrs, name
        assert ds.escape_rate.attrs["units"] == "s-1"
        assert ds.exobase_temperature.attrs["units"] == "K"
        assert ds.regime.attrs["flag_meanings"].split() == list(exosieve.REGIMES)
        assert "config" in ds.attrs and "created" in ds.attrs
        # The in-memory Dataset has the same variables, dimensions and units.
        mem = result.to_xarray()
        assert set(mem.data_vars) == set(ds.data_vars)
        for name in mem.data_vars:
            assert mem[name].dims == ds[name].dims
            assert mem[name].attrs["units"] == ds[name].attrs["units"]


def test_h5py_reads_units_on_every_dataset(result, tmp_path):
    import h5py

    path = tmp_path / "run.h5"
    result.to_hdf5(path)
    with h5py.File(path, "r") as f:
        for name in f:
            assert "units" in f[name].attrs, name
        assert f["depletion_time"].attrs["units"] in ("s", b"s")


def test_writing_replaces_atomically(result, tmp_path):
    path = tmp_path / "run.h5"
    result.to_hdf5(path)
    before = path.read_bytes()
    broken = exosieve.open_result(path)
    broken.exobase_radius = broken.exobase_radius[:-1]  # inconsistent: the write must fail
    with pytest.raises(ValueError, match="expected"):
        broken.to_hdf5(path)
    assert path.read_bytes() == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["run.h5"]  # no temporary left
    # A good write replaces the file.
    exosieve.open_result(path).to_hdf5(path)
    assert exosieve.open_result(path).steps == result.steps


def test_pandas_frame(result):
    df = result.to_pandas()
    assert df.index.name == "time" and len(df) == len(result.time)
    np.testing.assert_array_equal(df[("inventory", "H")].to_numpy(), result.inventory["H"])
    np.testing.assert_array_equal(
        df[("exobase_temperature", "")].to_numpy(), result.exobase_temperature
    )


# --- bad input ------------------------------------------------------------------------------------


def basic(**kwargs):
    exo = kwargs.pop("exobase", exosieve.PrescribedExobase(R_EXO, 1000.0, {"H": 1e11}))
    args = {"inventory": {"H": 1e38}, "t_span": (0.0, c.GYR)}
    args.update(kwargs)
    return exosieve.evolve(earth(), exo, **args)


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"inventory": {"H": -5.0}}, "inventory of H must be finite and > 0.*got -5"),
        ({"inventory": {"H": 0.0}}, "give a small positive value"),
        ({"t_eval": [0.0, 2 * c.GYR]}, "t_eval.*outside t_span"),
        ({"t_eval": [0.5 * c.GYR, 0.2 * c.GYR]}, "t_eval must be strictly increasing"),
        ({"t_span": (c.GYR, 0.0)}, "t_span must be increasing"),
        ({"rtol": 0.0}, "rtol must be finite"),
        ({"depletion_fraction": 1.5}, "depletion_fraction must be in"),
        ({"inventory": {"H": 1e38, "O": 1e40}}, "no exobase density for O"),
        ({"sources": {"He": 1.0}}, "sources: He not in the inventory"),
        ({"sources": {"H": -1.0}}, "source of H must be finite and >= 0"),
    ],
)
def test_bad_input_is_a_clear_value_error(kwargs, message):
    with pytest.raises(ValueError, match=message):
        basic(**kwargs)


def test_temperature_table_must_increase_in_time():
    with pytest.raises(ValueError, match="times must be strictly increasing.*times\\[2\\]"):
        exosieve.TabulatedTemperature([0.0, 2.0, 1.0], [900.0, 900.0, 900.0])


def test_a_callable_returning_nan_is_a_clear_error():
    exo = exosieve.PrescribedExobase(R_EXO, lambda t: float("nan"), {"H": 1e11})
    with pytest.raises(ValueError, match="callable returned nan at t = 0 s"):
        basic(exobase=exo)
    exo = exosieve.PrescribedExobase(R_EXO, lambda t: None, {"H": 1e11})
    with pytest.raises(ValueError, match="callable returned None"):
        basic(exobase=exo)


def test_xuv_inputs_need_a_star():
    exo = exosieve.PrescribedExobase(
        R_EXO, exosieve.XuvTemperature(1000, 1, 0.5, 300, 3000), {"H": 1e11}
    )
    with pytest.raises(ValueError, match="semi_major_axis and star"):
        basic(exobase=exo)


def test_a_stalled_run_says_where_and_why():
    table = exosieve.TabulatedTemperature([0.0, c.GYR], [800.0, 1500.0])
    exo = exosieve.PrescribedExobase(R_EXO, table, {"H": 1e11})
    with pytest.raises(exosieve.NumericalError, match="max_steps = 3.*t = .*Myr.*species H"):
        basic(exobase=exo, max_steps=3)


def test_model_objects_pickle_and_give_the_same_run():
    import pickle

    star, planet, temperature, n0, N0 = xuv_case()
    exo = exosieve.PrescribedExobase(R_EXO, temperature, n0)
    hydro = exosieve.EnergyLimitedEscape(efficiency=0.1, diffusion={"O": (4.8e19, 0.75)})
    thresholds = exosieve.RegimeThresholds(enhanced=7.0)
    args = (planet, exo, N0, (10 * c.MYR, c.GYR))
    kwargs = {
        "hydrodynamic": hydro,
        "thresholds": thresholds,
        "sources": {"O": exosieve.TabulatedSource([0.0, c.GYR], [1e25, 0.0])},
    }
    a = exosieve.evolve(*args, **kwargs)
    b = exosieve.evolve(*pickle.loads(pickle.dumps(args)), **pickle.loads(pickle.dumps(kwargs)))
    np.testing.assert_array_equal(a.inventory.values, b.inventory.values)
    assert a.config == b.config


def test_astropy_quantities_are_converted():
    u = pytest.importorskip("astropy.units")
    star = exosieve.Star(c.M_SUN, c.L_SUN)
    si = exosieve.evolve(
        exosieve.Planet(c.M_EARTH, c.R_EARTH, c.AU, star),
        exosieve.PrescribedExobase(R_EXO, 1000.0, {"H": 1e11}),
        {"H": 1e38},
        (10 * c.MYR, c.GYR),
        t_eval=[100 * c.MYR, 500 * c.MYR],
    )
    q = exosieve.evolve(
        exosieve.Planet(c.M_EARTH * u.kg, (c.R_EARTH / 1e3) * u.km, 1 * u.AU, star),
        exosieve.PrescribedExobase((R_EXO / 1e3) * u.km, 1000 * u.K, {"H": 1e5 / u.cm**3}),
        {"H": 1e38},
        (10 * u.Myr, 1 * u.Gyr),
        t_eval=[100, 500] * u.Myr,
    )
    # astropy's Myr is the Julian one, as exosieve's (IAU: 1 a = 365.25 d).
    np.testing.assert_allclose(q.time, si.time, rtol=1e-15)
    np.testing.assert_allclose(q.inventory["H"], si.inventory["H"], rtol=1e-12)


def test_stiff_source_balance_takes_few_steps_with_the_default_stepper():
    # dN/dt = S - k N, e-folding 1e4 yr, over 10 Gyr (worked analytic solution); with a source
    # the default stepper is Rosenbrock 4(3), which is not held to steps of 1/k.
    T, n0 = 1000.0, 1e11
    Q0 = jeans_rate(n0, T, exosieve.species("H").mass, c.M_EARTH, R_EXO)
    N0 = Q0 * 1e4 * c.YEAR
    k, S = Q0 / N0, 0.5 * Q0
    exo = exosieve.PrescribedExobase(R_EXO, T, {"H": n0})
    t_eval = np.array([1e3 * c.YEAR, 1e4 * c.YEAR, c.GYR, 10 * c.GYR])
    r = exosieve.evolve(earth(), exo, {"H": N0}, (0.0, 10 * c.GYR), t_eval=t_eval, sources={"H": S})
    assert r.stepper == "rosenbrock4" and r.steps < 1000
    np.testing.assert_allclose(
        r.inventory["H"], S / k + (N0 - S / k) * np.exp(-k * t_eval), rtol=1e-7
    )
    with pytest.raises(ValueError, match="stepper must be"):
        exosieve.evolve(earth(), exo, {"H": N0}, (0.0, c.GYR), stepper="rk4")
