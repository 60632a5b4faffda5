"""Losses the user gives (non-thermal or external) in evolve(), tail_depletion's enhancement
keyword, and the XUV absorption radius and recombination limit of energy-limited loss."""

from __future__ import annotations

import math
import pickle

import numpy as np
import pytest
from scipy import constants as sc
from scipy.integrate import quad

import exosieve
from exosieve import constants as c

DEPLETION = 1e-3  # evolve's default depletion_fraction


def _effusion(temperature: float, m: float, planet_mass: float, r: float) -> float:
    """Jeans flux per unit density [m s^-1], constants from scipy.constants (CODATA)."""
    v0 = np.sqrt(2 * sc.k * temperature / m)
    lam = sc.G * planet_mass * m / (sc.k * temperature * r)
    return float(v0 / (2 * np.sqrt(np.pi)) * (1 + lam) * np.exp(-lam))


def _jeans_case(star: bool = False, density: float = 1e11):
    """An invented Earth-sized planet whose exobase H density follows the inventory at a
    constant temperature: a thermal loss k N with k constant [s^-1]."""
    if star:
        host = exosieve.Star(0.9 * c.M_SUN, 0.7 * c.L_SUN)
        planet = exosieve.Planet(c.M_EARTH, c.R_EARTH, 0.8 * c.AU, host)
    else:
        planet = exosieve.Planet(c.M_EARTH, c.R_EARTH)
    r_exo, temperature, n0 = c.R_EARTH + 500e3, 1000.0, 1e37
    exobase = exosieve.PrescribedExobase(r_exo, temperature, {"H": density})
    m = exosieve.species("H").mass
    k = 4 * np.pi * r_exo**2 * density * _effusion(temperature, m, c.M_EARTH, r_exo) / n0
    return planet, exobase, n0, k


def test_constant_given_loss_matches_the_exact_solution():
    # dN/dt = -k N - G with k, G constant: N(t) = (N0 + G/k) e^(-k t) - G/k (worked analytic
    # solution), depleted (N = f N0) at t_d = ln((N0 + G/k) / (f N0 + G/k)) / k, then held.
    planet, exobase, n0, k = _jeans_case()
    g = 0.3 * k * n0
    t_d = np.log((n0 + g / k) / (DEPLETION * n0 + g / k)) / k
    t_eval = np.linspace(0.0, 1.5 * t_d, 61)
    for rtol in (1e-6, 1e-10):
        run = exosieve.evolve(
            planet, exobase, {"H": n0}, (0.0, 1.5 * t_d), t_eval=t_eval, rtol=rtol,
            given_losses={"H": g},
        )  # fmt: skip
        before = t_eval < t_d
        exact = (n0 + g / k) * np.exp(-k * t_eval[before]) - g / k
        got = run.inventory["H"][before]
        # Errors in N propagate like e^(-k t), as N + G/k does, while N itself falls faster:
        # relative to N + G/k they stay at the tolerance.
        np.testing.assert_array_less(np.abs(got - exact), 3 * rtol * (exact + g / k))
        assert run.depletion_time["H"] == pytest.approx(t_d, rel=10 * rtol)
        # Held at depletion: the given loss does not vanish with the inventory.
        # (The first output after t_d may precede the located depletion by its error.)
        held = run.inventory["H"][~before]
        assert held == pytest.approx(DEPLETION * n0, abs=rtol * n0)
        assert np.all(held[1:] == held[-1])
        # Reported apart: escape_rate is the thermal loss alone, given_loss_rate the given one.
        np.testing.assert_allclose(run.escape_rate["H"][before], k * got, rtol=1e-9)
        assert np.all(run.given_loss_rate["H"][before] == g)
        assert np.all(run.given_loss_rate["H"][~before][1:] == 0.0)
        assert run.config["given_losses"]["H"] == {"kind": "constant", "rate_s-1": g}
    # Without the given loss the same run is the pure exponential: the option changes it.
    plain = exosieve.evolve(planet, exobase, {"H": n0}, (0.0, t_d), t_eval=[t_d])
    assert plain.inventory["H"][-1] == pytest.approx(n0 * np.exp(-k * t_d), rel=1e-7)
    assert np.all(plain.given_loss_rate["H"] == 0.0)


def test_xuv_power_law_given_loss_matches_quadrature():
    # L(t) = L_ref (F(t)/F_ref)^p on top of the thermal k N: variation of constants gives
    # N(t) = e^(-k (t - t0)) [N0 - int_t0^t e^(k (s - t0)) L(s) ds], by scipy.integrate.quad
    # (split at the end of the star's XUV saturation, the kink of F).
    planet, exobase, n0, k = _jeans_case(star=True, density=1e4)
    assert 0.3 < k * 5 * c.GYR < 3  # about an e-fold of thermal loss over the span
    t0, t1 = 10 * c.MYR, 5 * c.GYR
    f_ref, p = float(planet.xuv_flux(c.GYR)), 1.3
    l_ref = 0.2 * k * n0
    law = exosieve.GivenLoss.xuv_power_law(l_ref, f_ref, p)
    t_sat = planet._core.star.xuv.saturation_time
    assert t0 < t_sat < t1

    def loss(s: float) -> float:
        return l_ref * (float(planet.xuv_flux(s)) / f_ref) ** p

    def exact(t: float) -> float:
        points = [t_sat] if t0 < t_sat < t else None
        integral = quad(
            lambda s: np.exp(k * (s - t0)) * loss(s), t0, t, points=points, epsabs=0,
            epsrel=1e-12, limit=200,
        )[0]  # fmt: skip
        return float(np.exp(-k * (t - t0)) * (n0 - integral))

    t_eval = np.geomspace(t0, t1, 25)
    expected = np.array([exact(t) for t in t_eval])
    assert expected[-1] > 0.05 * n0  # not depleted: the comparison covers the whole span
    # The given loss takes a visible share: without it the inventory would be larger.
    assert expected[-1] < 0.9 * n0 * np.exp(-k * (t1 - t0))
    for rtol in (1e-6, 1e-9):
        run = exosieve.evolve(
            planet, exobase, {"H": n0}, (t0, t1), t_eval=t_eval, rtol=rtol,
            given_losses={"H": law},
        )  # fmt: skip
        np.testing.assert_allclose(run.inventory["H"], expected, rtol=5 * rtol)
        np.testing.assert_allclose(run.given_loss_rate["H"], [loss(t) for t in t_eval], rtol=1e-12)


def test_tabulated_given_loss_is_kept_apart_in_every_output(tmp_path):
    # A table of rates against time: linear between points, held at the ends; reported in the
    # result, its HDF5 file (read back by open_result and by xarray), and to_pandas.
    planet, _, n0, k = _jeans_case()
    exobase = exosieve.PrescribedExobase(c.R_EARTH + 500e3, 1000.0, {"H": 1e11, "D": 1.0})
    times, rates = [0.0, 1e15, 2e15], [0.0, 1e20, 0.0]
    t_eval = np.linspace(0.0, 3e15, 13)
    inventory = {"H": n0, "D": 1e36}
    run = exosieve.evolve(
        planet, exobase, inventory, (0.0, 3e15), t_eval=t_eval, rtol=1e-10,
        given_losses={"D": (times, rates)},
    )  # fmt: skip
    np.testing.assert_allclose(run.given_loss_rate["D"], np.interp(t_eval, times, rates))
    assert np.all(run.given_loss_rate["H"] == 0.0)
    # The table's points are kinks for the integrator; the loss integrates to 1e35 particles
    # (a triangle: exact), the thermal loss of D being a part in 1e8 of that here.
    thermal = exosieve.evolve(
        planet, exobase, inventory, (0.0, 3e15), t_eval=t_eval, rtol=1e-10
    ).inventory["D"]
    assert thermal[-1] - run.inventory["D"][-1] == pytest.approx(1e35, rel=1e-7)
    np.testing.assert_allclose(run.inventory["H"], thermal * 0 + run.inventory["H"])
    path = tmp_path / "given.h5"
    run.to_hdf5(path)
    back = exosieve.open_result(path)
    np.testing.assert_array_equal(back.given_loss_rate.values, run.given_loss_rate.values)
    # A file written before given losses existed reads back with none.
    import h5py

    old = tmp_path / "old.h5"
    run.to_hdf5(old)
    with h5py.File(old, "a") as f:
        del f["given_loss_rate"]
    assert np.all(exosieve.open_result(old).given_loss_rate.values == 0.0)
    # One written before the loss ledger: the ledger reads as unknown (NaN), the rest as stored.
    with h5py.File(old, "a") as f:
        del f["regime_time"], f["non_jeans_loss_share"]
    older = exosieve.open_result(old)
    assert older.regime_time.shape == run.regime_time.shape
    assert np.isnan(older.regime_time).all()
    assert all(math.isnan(v) for v in older.non_jeans_loss_share.values())
    np.testing.assert_array_equal(older.inventory.values, run.inventory.values)
    ds = run.to_xarray()
    assert ds["given_loss_rate"].attrs["units"] == "s-1"
    assert ds["given_loss_rate"].dims == ("time", "species")
    import xarray as xr

    with xr.open_dataset(path, engine="h5netcdf") as on_disk:
        np.testing.assert_array_equal(on_disk["given_loss_rate"].values, run.given_loss_rate.values)
    frame = run.to_pandas()
    np.testing.assert_array_equal(frame[("given_loss_rate", "D")], run.given_loss_rate["D"])


def test_given_loss_bad_input_is_refused_by_name():
    planet, exobase, n0, _ = _jeans_case()
    span = (0.0, c.GYR)
    with pytest.raises(ValueError, match=r"given_losses: O not in the inventory"):
        exosieve.evolve(planet, exobase, {"H": n0}, span, given_losses={"O": 1.0})
    with pytest.raises(ValueError, match=r"given loss of H must be finite and >= 0.*-1"):
        exosieve.evolve(planet, exobase, {"H": n0}, span, given_losses={"H": -1.0})
    with pytest.raises(ValueError, match=r"given loss rate must be >= 0.*-2"):
        exosieve.GivenLoss(-2.0)
    with pytest.raises(ValueError, match=r"rates\[1\] must be finite and >= 0.*-5"):
        exosieve.GivenLoss.table([0.0, 1.0], [1.0, -5.0])
    with pytest.raises(ValueError, match=r"reference_flux must be .*> 0.*got 0"):
        exosieve.GivenLoss.xuv_power_law(1.0, 0.0, 1.0)
    law = exosieve.GivenLoss.xuv_power_law(1e20, 1e-3, 1.0)
    with pytest.raises(ValueError, match=r"given loss following the XUV flux needs the planet"):
        exosieve.evolve(planet, exobase, {"H": n0}, span, given_losses={"H": law})
    assert pickle.loads(pickle.dumps(law))(0.0, xuv_flux=2e-3) == pytest.approx(2e20)


def test_tail_depletion_refuses_factors_above_one_unless_an_enhancement():
    planet, exobase, n0, k = _jeans_case()
    span = (0.0, c.GYR)
    with pytest.raises(ValueError, match=r"tail_depletion must be <= 1 .*got 1\.5.*enhancement"):
        exosieve.evolve(planet, exobase, {"H": n0}, span, tail_depletion=1.5)
    with pytest.raises(ValueError, match=r"tail_depletion factor\[1\] must be <= 1.*got 2"):
        exosieve.jeans_flux(
            1e11, 1000.0, "H", c.M_EARTH, c.R_EARTH, tail_depletion=([2, 8], [1, 2])
        )
    with pytest.raises(ValueError, match=r"tail_depletion must be <= 1"):
        exosieve.TailDepletion(1.2)
    enhanced = exosieve.TailDepletion(1.5, enhancement=True)
    assert enhanced.enhancement and pickle.loads(pickle.dumps(enhanced)).constant == 1.5
    run = exosieve.evolve(planet, exobase, {"H": n0}, span, t_eval=[0.0], tail_depletion=enhanced)
    assert run.escape_rate["H"][0] == pytest.approx(1.5 * k * n0, rel=1e-9)
    table = exosieve.TailDepletion([2.0, 8.0], [1.0, 2.0], enhancement=True)
    assert table(5.0) == pytest.approx(1.5)
    assert exosieve.TailDepletion(1.0).constant == 1.0  # 1 itself is no enhancement


def _hydrogen_world():
    """An invented hot sub-Neptune-sized planet of hydrogen, with its star."""
    mass, radius = 5 * c.M_EARTH, 2.5 * c.R_EARTH
    star = exosieve.Star(0.8 * c.M_SUN, 0.4 * c.L_SUN)
    planet = exosieve.Planet(mass, radius, 0.015 * c.AU, star)
    exobase = exosieve.PrescribedExobase(radius * 1.1, 3000.0, {"H": 1e13})
    return planet, exobase, mass, radius


def test_absorption_radius_and_recombination_limit_match_the_standalone_rates():
    # At one time, the energy-limited loss of the only species is the standalone rate: with
    # the XUV absorbed at the radius of optical depth one (xuv_absorption_radius with the scale
    # height at the planet radius), and capped by the recombination-limited rate
    # (xuv_driven_mass_loss). Those functions are checked in test_outflow.py.
    planet, exobase, mass, radius = _hydrogen_world()
    m = exosieve.species("H").mass
    n_base, sigma, mu, temp = 1e17, 2e-22, 2.3 * sc.atomic_mass, 1000.0
    h = exosieve.scale_height(temp, mu, mass, radius)
    r_abs = exosieve.xuv_absorption_radius(radius, n_base, h, sigma)
    assert r_abs > 1.05 * radius  # the option changes the rate
    t = 50 * c.MYR
    flux = float(planet.xuv_flux(t))
    absorption = {"base_density": n_base, "cross_section": sigma, "mean_molecular_mass": mu}

    def rate(**options):
        hydro = exosieve.EnergyLimitedEscape(roche_lobe=False, activation="always", **options)
        run = exosieve.evolve(
            planet, exobase, {"H": 1e45}, (t, 2 * t), t_eval=[t], hydrodynamic=hydro
        )
        return run.escape_rate["H"][0] * m

    plain = exosieve.energy_limited_mass_loss(0.15, radius, radius, flux, mass)
    assert rate() == pytest.approx(plain, rel=1e-12)
    fixed = exosieve.energy_limited_mass_loss(0.15, radius, r_abs, flux, mass)
    assert rate(absorption={**absorption, "temperature": temp}) == pytest.approx(fixed, rel=1e-12)
    # Without a temperature the absorbing layer is at the exobase temperature (3000 K here).
    h_exo = exosieve.scale_height(3000.0, mu, mass, radius)
    r_exo = exosieve.xuv_absorption_radius(radius, n_base, h_exo, sigma, chord=True)
    at_exobase = exosieve.energy_limited_mass_loss(0.15, radius, r_exo, flux, mass)
    got = rate(absorption={**absorption, "chord": True})
    assert got == pytest.approx(at_exobase, rel=1e-12)
    capped = exosieve.xuv_driven_mass_loss(0.15, radius, radius, flux, mass)
    recombination = exosieve.recombination_limited_mass_loss(flux, mass, radius)
    assert capped == recombination < 0.7 * plain  # saturated flux: the cap acts
    assert rate(recombination_limit=True) == pytest.approx(capped, rel=1e-12)
    custom = {"temperature": 8000.0, "recombination_coefficient": 3e-19}
    expected = exosieve.xuv_driven_mass_loss(
        0.15, radius, radius, flux, mass, temperature=8000.0, recombination_coefficient=3e-19
    )
    assert rate(recombination_limit=custom) == pytest.approx(expected, rel=1e-12)
    with pytest.raises(ValueError, match=r"xuv_radius .* and an absorption model"):
        exosieve.EnergyLimitedEscape(xuv_radius=2 * radius, absorption=absorption)
    with pytest.raises(ValueError, match=r"absorption: missing cross_section"):
        exosieve.EnergyLimitedEscape(absorption={"base_density": 1.0, "mean_molecular_mass": mu})
    with pytest.raises(ValueError, match=r"recombination_coefficient must be .*> 0"):
        exosieve.EnergyLimitedEscape(recombination_limit={"recombination_coefficient": -1.0})
    options = exosieve.EnergyLimitedEscape(absorption=absorption, recombination_limit=custom)
    copy = pickle.loads(pickle.dumps(options))
    assert copy.absorption == options.absorption
    assert copy.recombination_limit == custom


def test_recombination_limited_loss_integrated_matches_quadrature():
    # dN/dt = -Mdot(F(t)) / m_H with Mdot the smaller of the energy-limited rate (XUV absorbed
    # at the optical-depth-one radius) and the recombination-limited rate: N(t) = N0 -
    # int Mdot/m ds by scipy.integrate.quad, split at the end of saturation and where the
    # declining flux crosses recombination_transition_flux (the two rates' kink).
    planet, exobase, mass, radius = _hydrogen_world()
    m = exosieve.species("H").mass
    n_base, sigma, mu, temp = 1e17, 2e-22, 2.3 * sc.atomic_mass, 1000.0
    r_abs = exosieve.xuv_absorption_radius(
        radius, n_base, exosieve.scale_height(temp, mu, mass, radius), sigma
    )
    hydro = exosieve.EnergyLimitedEscape(
        roche_lobe=False, activation="always", recombination_limit=True,
        absorption={"base_density": n_base, "cross_section": sigma,
                    "mean_molecular_mass": mu, "temperature": temp},
    )  # fmt: skip
    t0, t1 = 10 * c.MYR, 3 * c.GYR
    f_cross = exosieve.recombination_transition_flux(0.15, radius, r_abs, mass)
    t_sat = planet._core.star.xuv.saturation_time
    star = planet._core.star
    f_sat = float(planet.xuv_flux(t_sat))
    t_cross = t_sat * (f_cross / f_sat) ** (-1 / star.xuv.decay_index)
    assert f_cross < f_sat and t0 < t_sat < t_cross < t1  # both branches act

    def mdot(s: float) -> float:
        return float(exosieve.xuv_driven_mass_loss(0.15, radius, r_abs, planet.xuv_flux(s), mass))

    total = quad(mdot, t0, t1, points=[t_sat, t_cross], epsabs=0, epsrel=1e-12, limit=200)[0]
    n0 = 2 * total / m  # half is lost over the span
    t_eval = np.geomspace(t0, t1, 20)
    expected = [
        n0 - quad(mdot, t0, t, points=[p for p in (t_sat, t_cross) if t0 < p < t] or None,
                  epsabs=0, epsrel=1e-12, limit=200)[0] / m
        for t in t_eval
    ]  # fmt: skip
    for rtol in (1e-6, 1e-9):
        run = exosieve.evolve(
            planet, exobase, {"H": n0}, (t0, t1), t_eval=t_eval, rtol=rtol, hydrodynamic=hydro
        )
        np.testing.assert_allclose(run.inventory["H"], expected, rtol=5 * rtol)
    assert run.config["hydrodynamic"]["recombination_limit"]["temperature_K"] == 1e4
    assert run.config["hydrodynamic"]["absorption"]["cross_section_m2"] == sigma


def test_hand_over_jump_between_energy_limited_and_jeans_escape():
    # The README's case: hydrogen on a small world whose exobase cools through lambda = 2.1.
    # Just before the hand-over the loss is the energy-limited rate (Watson et al. 1981,
    # R_xuv = R_p, no Roche factor), just after it the Jeans rate at lambda = 2.1 (formula with
    # scipy.constants): two separate models, so the rate jumps (here by a factor ~40); between
    # transition and enhanced Jeans the same Jeans formula holds and the rate is continuous.
    star = exosieve.Star(0.9 * c.M_SUN, 0.7 * c.L_SUN)
    mass, radius = 0.1 * c.M_EARTH, 0.53 * c.R_EARTH
    planet = exosieve.Planet(mass, radius, 0.8 * c.AU, star)
    f_ref = float(planet.xuv_flux(4.5 * c.GYR))
    law = exosieve.XuvTemperature(400.0, f_ref, 0.6, 200.0, 1500.0)
    r_exo, n_exo, n0 = radius + 500e3, 1e12, 1e49
    exobase = exosieve.PrescribedExobase(r_exo, law, {"H": n_exo})
    hydro = exosieve.EnergyLimitedEscape(efficiency=0.15, roche_lobe=False)
    span = (10 * c.MYR, 10 * c.GYR)
    run = exosieve.evolve(planet, exobase, {"H": n0}, span, hydrodynamic=hydro)
    changes = {(a, b): t for t, a, b in run.regime_changes}
    m = exosieve.species("H").mass
    t_h = changes[("hydrodynamic", "transition")]
    t_e = changes[("transition", "enhanced_jeans")]
    times = [t_h * (1 - 1e-9), t_h * (1 + 1e-9), t_e * (1 - 1e-9), t_e * (1 + 1e-9)]
    near = exosieve.evolve(planet, exobase, {"H": n0}, span, hydrodynamic=hydro, t_eval=times)
    q, n = near.escape_rate["H"], near.inventory["H"]
    energy_limited = 0.15 * np.pi * radius**3 * float(planet.xuv_flux(times[0])) / (sc.G * mass)
    assert q[0] == pytest.approx(energy_limited / m, rel=1e-6)
    temperature = sc.G * mass * m / (2.1 * sc.k * r_exo)
    jeans = 4 * np.pi * r_exo**2 * n_exo * n[1] / n0 * _effusion(temperature, m, mass, r_exo)
    assert q[1] == pytest.approx(jeans, rel=1e-6)
    assert q[1] / q[0] == pytest.approx(0.0241, rel=0.01)  # the jump the README states
    assert q[3] == pytest.approx(q[2], rel=1e-6)  # continuous into enhanced Jeans
