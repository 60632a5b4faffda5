"""Thermosphere densities, exobase and escape fluxes against closed forms,
scipy.integrate.solve_ivp of the diffusive-equilibrium equation, and values of the trade."""

import pickle
from types import SimpleNamespace

import numpy as np
import pytest
from scipy import constants as sc
from scipy import integrate

import exosieve
from exosieve.constants import M_EARTH, R_EARTH

EARTH = (M_EARTH, R_EARTH)
G, K = sc.G, sc.k  # scipy.constants (CODATA 2018, as the core)


def earth_like(**kwargs):
    # Earth-like inputs (common practice, roughly the mean standard thermosphere): homopause
    # at 120 km with 5e17 m^-3, N2/O2/O = 0.75/0.10/0.15, 360 K there, Bates profile to
    # 1000 K with shape 1/(50 km).
    args = {"homopause_temperature": 360.0, "shape": 1 / 50e3}
    args.update(kwargs)
    return exosieve.Thermosphere(
        EARTH, R_EARTH + 120e3, 5e17, {"N2": 0.75, "O2": 0.10, "O": 0.15}, 1000.0, **args
    )


def ivp_density(t, name, species_obj, radii, temperature, dtemperature):
    """n(r) from scipy.integrate.solve_ivp of
    d ln n/dr = -m G M/(r^2 k T) - (1 + alpha) (dT/dr)/T, n(r_h) = x n_h."""
    m, alpha = species_obj.mass, species_obj.thermal_diffusion_factor
    M = t.planet_mass

    def rhs(r, y):
        T = temperature(r)
        return [-m * G * M / (r * r * K * T) - (1 + alpha) * dtemperature(r) / T]

    sol = integrate.solve_ivp(
        rhs,
        (t.homopause_radius, radii[-1]),
        [np.log(t.mole_fractions[name] * t.homopause_density)],
        t_eval=radii,
        rtol=1e-12,
        atol=1e-12,
        method="DOP853",
    )
    assert sol.success
    return np.exp(sol.y[0])


# ---------------------------------------------------------------- densities


def test_isothermal_densities_equal_the_closed_form():
    # Worked solution: n_i(r) = x_i n_h exp(-lambda_i(r_h) (1 - r_h / r)).
    r_h, n_h, T = R_EARTH + 100e3, 1e19, 800.0
    t = exosieve.Thermosphere(EARTH, r_h, n_h, {"N2": 0.7, "O": 0.29, "He": 0.01}, T)
    r = r_h + np.array([[0.0, 50e3, 200e3], [500e3, 2e6, 5e7]])
    for name in t.species:
        m = exosieve.species(name).mass
        lam = G * M_EARTH * m / (K * T * r_h)
        expected = t.mole_fractions[name] * n_h * np.exp(-lam * (1 - r_h / r))
        got = t.density(name, r)
        assert got.shape == (2, 3)
        np.testing.assert_allclose(got, expected, rtol=1e-12)
    assert t.density("N2", r_h) == 0.7 * n_h
    assert t.temperature(r_h + 1e6) == T


@pytest.mark.parametrize("alpha", [0.0, -0.38])
def test_bates_densities_match_solve_ivp(alpha):
    # Bates (1959) profile; scipy.integrate.solve_ivp (DOP853) of the same equation. With
    # alpha = -0.38, the thermal-diffusion factor usually taken for He (common practice).
    he = exosieve.Species(
        "He*",
        exosieve.species("He").mass,
        exosieve.species("He").lj_diameter,
        exosieve.species("He").lj_well_depth,
        exosieve.species("He").cross_section,
        alpha,
    )
    r_h, T_inf, T_h, s = R_EARTH + 100e3, 1100.0, 190.0, 1 / 35e3
    t = exosieve.Thermosphere(
        EARTH, r_h, 1e19, {"N2": 0.78, "O2": 0.19, "O": 0.02, he: 0.01}, T_inf, T_h, s
    )

    def temperature(r):
        return T_inf - (T_inf - T_h) * np.exp(-s * (r - r_h))

    def dtemperature(r):
        return s * (T_inf - T_h) * np.exp(-s * (r - r_h))

    radii = r_h + np.array([1e3, 20e3, 80e3, 250e3, 600e3, 1500e3, 4000e3])
    np.testing.assert_allclose(t.temperature(radii), temperature(radii), rtol=1e-14)
    for name, obj in [("N2", exosieve.species("N2")), ("O", exosieve.species("O")), ("He*", he)]:
        expected = ivp_density(t, name, obj, radii, temperature, dtemperature)
        np.testing.assert_allclose(t.density(name, radii), expected, rtol=1e-8)


def test_tabulated_profile_matches_solve_ivp():
    # Piecewise-linear table; scipy.integrate.solve_ivp segment by segment (the slope jumps at
    # the nodes), d ln n/dr = -m g/(k T) - (dT/dr)/T.
    r_h = R_EARTH + 110e3
    table_r = r_h + np.array([-10e3, 40e3, 100e3, 250e3, 600e3])
    table_T = np.array([240.0, 500.0, 800.0, 950.0, 1000.0])
    t = exosieve.Thermosphere(
        EARTH, r_h, 1e18, {"N2": 0.8, "O": 0.2}, temperature_table=(table_r, table_T)
    )
    assert t.profile_kind == "table"
    radii = np.sort(np.append(table_r[1:], r_h + np.array([20e3, 70e3, 400e3, 900e3])))
    cuts = [r_h, *table_r[1:], radii[-1]]
    for name in ("N2", "O"):
        m = exosieve.species(name).mass
        y = np.log(t.mole_fractions[name] * 1e18)
        expected = {}
        for k in range(len(cuts) - 1):
            a, b = cuts[k], cuts[k + 1]
            seg = min(k + 1, len(table_r) - 1)  # segment [table_r[k], table_r[k + 1]]
            slope = (
                (table_T[seg] - table_T[seg - 1]) / (table_r[seg] - table_r[seg - 1])
                if b <= table_r[-1]
                else 0.0
            )

            def rhs(r, yy, slope=slope, m=m):
                T = np.interp(r, table_r, table_T)
                return [-m * G * M_EARTH / (r * r * K * T) - slope / T]

            sol = integrate.solve_ivp(
                rhs, (a, b), [y], dense_output=True, rtol=1e-12, atol=1e-12, method="DOP853"
            )
            for r in radii[(radii > a) & (radii <= b)]:
                expected[r] = np.exp(sol.sol(r)[0])
            y = sol.y[0][-1]
        got = t.density(name, radii)
        np.testing.assert_allclose(got, [expected[r] for r in radii], rtol=1e-8)


# ---------------------------------------------------------------- exobase


def criterion(t, r):
    """mean free path / scale height at radii r, from the densities and the species table."""
    n = np.array([t.density(name, r) for name in t.species])
    sigma = np.array([exosieve.species(name).cross_section for name in t.species])
    mass = np.array([exosieve.species(name).mass for name in t.species])
    n = n.reshape(len(t.species), -1)
    mfp = 1.0 / (sigma @ n)
    m_mean = (mass @ n) / n.sum(axis=0)
    r = np.reshape(r, -1)
    h = K * t.temperature(r) * r**2 / (G * t.planet_mass * m_mean)
    return mfp / h


def test_earth_like_exobase_near_500_km():
    # Common practice: Earth's exobase near 500 km (roughly 350-800 km with solar activity).
    # Inputs chosen: see earth_like() above. The result is 425 km.
    t = earth_like()
    e = t.exobase()
    assert e.found and e.status is exosieve.ExobaseStatus.FOUND
    assert 400e3 < e.radius - R_EARTH < 650e3
    assert e.temperature == pytest.approx(1000.0, rel=0.01)
    assert max(e.densities, key=e.densities.get) == "O"
    assert "exobase at" in e.message


@pytest.mark.parametrize(
    "make",
    [
        earth_like,
        lambda: exosieve.Thermosphere(
            EARTH, R_EARTH + 100e3, 1e19, {"N2": 0.7, "O": 0.29, "He": 0.01}, 1200.0
        ),
        # a light minor gas: the criterion crosses 1, falls back and crosses again higher up
        lambda: exosieve.Thermosphere(
            EARTH, R_EARTH + 120e3, 1e16, {"O": 0.999, "H": 0.001}, 1000.0
        ),
    ],
)
def test_exobase_criterion_holds_at_the_radius_found_and_nowhere_below(make):
    t = make()
    e = t.exobase()
    assert e.found
    assert criterion(t, e.radius)[0] == pytest.approx(1.0, rel=1e-9)
    below = np.linspace(t.homopause_radius, e.radius, 5001)[:-1]
    assert np.all(criterion(t, below) < 1.0)


def test_lowest_crossing_is_found_when_the_criterion_is_not_monotonic():
    t = exosieve.Thermosphere(EARTH, R_EARTH + 120e3, 1e16, {"O": 0.999, "H": 0.001}, 1000.0)
    e = t.exobase()
    above = np.linspace(e.radius + 1e3, e.radius + 2e6, 4000)
    ratio = criterion(t, above)
    assert np.any(ratio < 1.0)  # collisional again above: the precondition of this test
    assert np.any(ratio > 1.0)


def test_exobase_densities_match_density():
    t = earth_like()
    e = t.exobase()
    for name, value in e.densities.items():
        assert t.density(name, e.radius) == pytest.approx(value, rel=1e-14)


def test_no_exobase_is_reported_with_the_reason():
    thin = exosieve.Thermosphere(EARTH, R_EARTH + 100e3, 1e10, {"N2": 1.0}, 500.0)
    e = thin.exobase()
    assert e.status is exosieve.ExobaseStatus.COLLISIONLESS_AT_HOMOPAUSE
    assert not e.found and np.isnan(e.radius) and e.densities == {}
    with pytest.raises(exosieve.NumericalError, match="collisionless down to the homopause"):
        thin.escape_flux("N2")
    # Invented hot sub-Neptune: 5 Earth masses, 2.5 Earth radii, H/He at 5000 K.
    planet = SimpleNamespace(mass=5 * M_EARTH, radius=2.5 * R_EARTH)
    hot = exosieve.Thermosphere(planet, 1.05 * planet.radius, 1e18, {"H": 0.9, "He": 0.1}, 5000.0)
    e = hot.exobase()
    assert e.status is exosieve.ExobaseStatus.NONE_BELOW_OUTER_RADIUS
    assert "hydrodynamically" in e.message
    assert hot.outer_radius == pytest.approx(20 * 1.05 * planet.radius)
    with pytest.raises(exosieve.NumericalError, match="no exobase below the outer radius"):
        hot.escape_flux("H")
    # A larger outer radius is honoured.
    wider = exosieve.Thermosphere(
        planet, 1.05 * planet.radius, 1e18, {"H": 0.9, "He": 0.1}, 5000.0, outer_radius=1e9
    )
    assert wider.outer_radius == 1e9


# ---------------------------------------------------------------- escape fluxes


def trace_h():
    return exosieve.Thermosphere(
        EARTH,
        R_EARTH + 100e3,
        1e19,
        {"N2": 0.78, "O2": 0.18, "O": 0.04 - 5.3e-6, "He": 5e-6, "H": 3e-7},
        1000.0,
        homopause_temperature=190.0,
        shape=1 / 40e3,
    )


def test_jeans_flux_at_the_exobase():
    t = trace_h()
    e = t.exobase()
    for name in t.species:
        expected = exosieve.jeans_flux(e.densities[name], e.temperature, name, M_EARTH, e.radius)
        assert t.escape_flux(name, limit_by_diffusion=False) == pytest.approx(expected, rel=1e-13)


def test_coupled_escape_flux_is_assembled_as_in_the_design():
    # DESIGN 3.4: z_e = exobase - homopause radius, background the other species (Blanc's
    # law, mean mass), scale heights at the homopause.
    t = trace_h()
    e = t.exobase()
    others = {k: v for k, v in t.mole_fractions.items() if k != "H"}
    total = sum(others.values())
    background = {k: v / total for k, v in others.items()}
    x, T_h, r_h = t.mole_fractions["H"], 190.0, t.homopause_radius
    phi_dl = exosieve.diffusion_limited_flux("H", background, x, T_h, M_EARTH, r_h)
    assert t.diffusion_limited_flux("H") == pytest.approx(phi_dl, rel=1e-12)
    inverse_b = sum(
        y / exosieve.binary_diffusion_parameter("H", k, T_h) for k, y in background.items()
    )
    m_a = sum(y * exosieve.species(k).mass for k, y in background.items())
    beta = (m_a - exosieve.species("H").mass) * G * M_EARTH / r_h**2 / (K * T_h)
    phi_j = t.escape_flux("H", limit_by_diffusion=False)
    expected = exosieve.coupled_escape_flux(phi_j, 1 / inverse_b, x, beta, e.radius - r_h)
    assert t.escape_flux("H") == pytest.approx(expected, rel=1e-12)
    # neither limit alone, and below both
    assert t.escape_flux("H") < min(phi_j, phi_dl)


def test_lone_species_is_not_diffusion_limited():
    t = exosieve.Thermosphere(EARTH, R_EARTH + 100e3, 1e19, {"O": 1.0}, 1000.0)
    assert t.escape_flux("O") == t.escape_flux("O", limit_by_diffusion=False)
    assert np.isnan(t.diffusion_limited_flux("O"))


def test_species_objects_and_names_are_interchangeable():
    t = trace_h()
    assert t.escape_flux(exosieve.species("He")) == t.escape_flux("He")
    with pytest.raises(ValueError, match="'Ar' is not in this thermosphere"):
        t.escape_flux("Ar")
    with pytest.raises(ValueError, match="unknown species 'Hq'"):
        t.density("Hq", R_EARTH + 2e5)


# ---------------------------------------------------------------- many at once


def test_solve_thermospheres_equals_one_by_one():
    rng = np.random.default_rng(7)
    n = 300
    t_exo = rng.uniform(600.0, 1600.0, n)
    n_h = 10 ** rng.uniform(16.5, 18.5, n)
    n_h[::50] = 1e9  # no exobase for these
    x_h = 10 ** rng.uniform(-7, -5, n)
    comp = {"N2": 0.75, "O2": 0.10, "O": 0.15 - x_h, "H": x_h}
    out = exosieve.solve_thermospheres(
        M_EARTH, R_EARTH, R_EARTH + 120e3, n_h, comp, t_exo, 360.0, 1 / 50e3
    )
    assert out.exobase_radius.shape == (n,)
    assert set(out.escape_flux) == {"N2", "O2", "O", "H"}
    assert np.sum(~out.found) == 6
    for i in range(0, n, 13):
        t = exosieve.Thermosphere(
            EARTH,
            R_EARTH + 120e3,
            n_h[i],
            {k: float(np.broadcast_to(v, n)[i]) for k, v in comp.items()},
            t_exo[i],
            homopause_temperature=360.0,
            shape=1 / 50e3,
        )
        e = t.exobase()
        assert exosieve.thermosphere.STATUS_CODES[out.status[i]] is e.status
        if not e.found:
            assert np.isnan(out.exobase_radius[i]) and np.isnan(out.escape_flux["H"][i])
            continue
        assert out.exobase_radius[i] == e.radius
        assert out.exobase_temperature[i] == e.temperature
        for name in t.species:
            assert out.escape_flux[name][i] == t.escape_flux(name)


def test_solve_thermospheres_broadcasts_and_isothermal():
    out = exosieve.solve_thermospheres(
        M_EARTH,
        R_EARTH,
        R_EARTH + 100e3,
        np.array([1e18, 1e19])[:, None],
        {"N2": 0.8, "O": 0.2},
        np.array([700.0, 900.0, 1100.0]),
        limit_by_diffusion=False,
        threads=1,
    )
    assert out.exobase_radius.shape == (2, 3)
    assert out.escape_flux["O"].shape == (2, 3)
    t = exosieve.Thermosphere(EARTH, R_EARTH + 100e3, 1e19, {"N2": 0.8, "O": 0.2}, 900.0)
    assert out.exobase_radius[1, 1] == t.exobase().radius
    assert out.escape_flux["O"][1, 1] == t.escape_flux("O", limit_by_diffusion=False)


# ---------------------------------------------------------------- API details


def test_pickle_round_trip():
    t = earth_like()
    u = pickle.loads(pickle.dumps(t))
    assert u.exobase().radius == t.exobase().radius
    assert u.species == t.species
    # an unregistered species travels with the thermosphere
    o = exosieve.species("O")
    heavy_o = exosieve.Species(
        "Oheavy", 1.1 * o.mass, o.lj_diameter, o.lj_well_depth, o.cross_section
    )
    t = exosieve.Thermosphere(EARTH, R_EARTH + 1e5, 1e18, {"N2": 0.8, heavy_o: 0.2}, 900.0)
    u = pickle.loads(pickle.dumps(t))
    assert u.density("Oheavy", R_EARTH + 3e5) == t.density("Oheavy", R_EARTH + 3e5)


def test_planet_duck_typing_and_quantities():
    u = pytest.importorskip("astropy.units")
    plain = earth_like().exobase().radius
    planet = SimpleNamespace(mass=1.0 * u.M_earth, radius=R_EARTH / 1e3 * u.km)
    t = exosieve.Thermosphere(
        planet,
        (R_EARTH + 120e3) / 1e3 * u.km,
        5e11 * u.cm**-3,
        {"N2": 0.75, "O2": 0.10, "O": 0.15},
        1000.0 * u.K,
        homopause_temperature=360.0 * u.K,
        shape=1 / (50.0 * u.km),
    )
    # astropy's M_earth is GM_earth / G with the IAU 2015 nominal GM, as the core
    assert t.exobase().radius == pytest.approx(plain, rel=1e-9)


# ---------------------------------------------------------------- bad input


COMP = {"N2": 0.8, "O": 0.2}


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"homopause_radius": R_EARTH - 1e3}, "below the planet's surface"),
        ({"composition": {"N2": 0.8, "O": 0.3}}, "must sum to one .* got 1.1"),
        ({"composition": {"N2": 1.2, "O": -0.2}}, "mole fraction of 'O' must be .* got -0.2"),
        ({"composition": {"N2": 0.8, "Oxy": 0.2}}, "unknown species 'Oxy'"),
        ({"composition": {}}, "composition must name at least one species"),
        ({"composition": ["N2"]}, "composition must be a mapping"),
        ({"exobase_temperature": 0.0}, "temperature must be finite and > 0, got 0"),
        ({"exobase_temperature": -100.0}, "temperature must be finite and > 0, got -100"),
        (
            {"homopause_temperature": -5.0, "shape": 1e-5},
            "homopause_temperature must be finite and > 0, got -5",
        ),
        ({"homopause_temperature": 200.0}, "shape is not"),
        ({"shape": 1e-5}, "homopause_temperature is not"),
        ({"shape": 0.0, "homopause_temperature": 200.0}, "shape must be finite and > 0, got 0"),
        ({"exobase_temperature": None}, "exobase_temperature is required"),
        ({"temperature_table": ([7e6, 8e6], [300.0, 900.0])}, "either temperature_table"),
        ({"homopause_density": -1.0}, "homopause_density must be finite and > 0, got -1"),
        ({"planet": (M_EARTH,)}, "planet must have .mass"),
        ({"planet": (-M_EARTH, R_EARTH)}, "planet_mass must be finite and > 0"),
        ({"outer_radius": R_EARTH}, "outer_radius"),
        ({"diffusion_method": "guess"}, "method must be one of"),
    ],
)
def test_bad_input(kwargs, message):
    args = {
        "planet": EARTH,
        "homopause_radius": R_EARTH + 100e3,
        "homopause_density": 1e18,
        "composition": COMP,
        "exobase_temperature": 900.0,
    }
    args.update(kwargs)
    with pytest.raises(ValueError, match=message):
        exosieve.Thermosphere(**args)


def test_bad_radius_and_bulk_input():
    t = exosieve.Thermosphere(EARTH, R_EARTH + 100e3, 1e18, COMP, 900.0)
    with pytest.raises(ValueError, match="below the homopause"):
        t.density("O", np.array([R_EARTH + 2e5, R_EARTH]))
    with pytest.raises(ValueError, match="below the homopause"):
        t.temperature(R_EARTH)
    with pytest.raises(ValueError, match=r"case 1: .*temperature must be finite and > 0, got -3"):
        exosieve.solve_thermospheres(
            M_EARTH, R_EARTH, R_EARTH + 1e5, 1e18, COMP, np.array([900.0, -3.0])
        )
    with pytest.raises(ValueError, match="case 0: composition mole fractions must sum to one"):
        exosieve.solve_thermospheres(
            M_EARTH, R_EARTH, R_EARTH + 1e5, 1e18, {"N2": 0.5, "O": 0.2}, 900.0
        )
    with pytest.raises(ValueError, match="given together"):
        exosieve.solve_thermospheres(M_EARTH, R_EARTH, R_EARTH + 1e5, 1e18, COMP, 900.0, 300.0)
    with pytest.raises(ValueError, match="threads must be an integer >= 0"):
        exosieve.solve_thermospheres(M_EARTH, R_EARTH, R_EARTH + 1e5, 1e18, COMP, 900.0, threads=-1)


@pytest.mark.parametrize("profile", ["isothermal", "bates", "table"])
@pytest.mark.parametrize("temperature", [1e-300, 1e-100, 1e300])
def test_density_at_extreme_temperatures_is_never_nan(temperature, profile):
    # At the homopause the barometric law gives x n_h exactly (no column). At T = 1e-300 K the
    # scale height kT/(mg) underflows: 1/H and the column overflow, which must give a density
    # of 0 above the homopause, never 0 * inf or inf - inf = NaN. At 1e300 K the column is
    # negligible and the density stays x n_h.
    planet = exosieve.Planet(M_EARTH, R_EARTH)
    rh = R_EARTH + 100e3
    gas = {"N2": 0.9, "H": 0.1}
    if profile == "isothermal":
        th = exosieve.Thermosphere(planet, rh, 1e18, gas, exobase_temperature=temperature)
    elif profile == "bates":
        th = exosieve.Thermosphere(
            planet,
            rh,
            1e18,
            gas,
            temperature,
            homopause_temperature=temperature / 2,
            shape=1 / rh,
        )
    else:
        table = ([rh, 2 * rh, 10 * rh], [temperature / 2, temperature, temperature])
        th = exosieve.Thermosphere(planet, rh, 1e18, gas, temperature_table=table)
    assert th.density("H", rh) == pytest.approx(0.1 * 1e18, rel=1e-15)
    for r in (1.5 * rh, 3 * rh, 100 * rh):
        above = th.density("H", r)
        assert not np.isnan(above), r
        if temperature < 1:
            assert above == 0.0
        elif profile == "isothermal":
            assert above == pytest.approx(0.1 * 1e18, rel=1e-12)
