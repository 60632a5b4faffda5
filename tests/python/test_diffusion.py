"""Binary diffusion, the diffusion-limited flux and the coupled diffusion–Jeans flux against
handbook values, scipy.constants and numerical solutions of the diffusion equation
(scipy.integrate.solve_bvp)."""

import numpy as np
import pytest
from scipy import constants as sc
from scipy import integrate

import exosieve
from exosieve.constants import M_EARTH, R_EARTH

ATM = sc.atm  # Pa (scipy.constants: standard atmosphere, exact)


def coefficient_at_1_atm(b, temperature):
    """D [cm^2 s^-1] at 1 atm from b = n D, n = p / (k T) (scipy.constants.k)."""
    return b * sc.k * temperature / ATM * 1e4


# Cussler, Diffusion (1997) Table 5.1-1 and the CRC Handbook table of gas-phase diffusion
# coefficients, D at 1 atm in cm^2 s^-1 (from memory).
HANDBOOK = [
    ("H2", "N2", 298.0, 0.78),
    ("He", "N2", 298.0, 0.687),
    ("O2", "N2", 293.0, 0.20),
    ("CO2", "N2", 298.0, 0.165),
]


@pytest.mark.parametrize(("a", "b", "temperature", "d_cm2"), HANDBOOK)
@pytest.mark.parametrize("method", ["measured", "chapman_enskog"])
def test_binary_diffusion_at_one_atmosphere_matches_handbook(a, b, temperature, d_cm2, method):
    # Chapman–Enskog with Lennard-Jones parameters is good to about 5-10 % for nonpolar gases
    # (Poling, Prausnitz & O'Connell 2001); tolerance 10 %.
    value = exosieve.binary_diffusion_parameter(a, b, temperature, method=method)
    assert coefficient_at_1_atm(value, temperature) == pytest.approx(d_cm2, rel=0.10)


def test_chapman_enskog_equals_the_worked_formula_with_scipy_constants():
    # Worked formula (Hirschfelder, Curtiss & Bird 1954) with CODATA constants from
    # scipy.constants and the Neufeld et al. (1972) fit written out here.
    a, b = exosieve.species("He"), exosieve.species("Ar")
    T = np.array([200.0, 500.0, 1500.0])
    sigma = 0.5 * (a.lj_diameter + b.lj_diameter)
    eps = np.sqrt(a.lj_well_depth * b.lj_well_depth)
    ts = T / eps
    omega = (
        1.06036 / ts**0.15610
        + 0.19300 / np.exp(0.47635 * ts)
        + 1.03587 / np.exp(1.52996 * ts)
        + 1.76474 / np.exp(3.89411 * ts)
    )
    mu = a.mass * b.mass / (a.mass + b.mass)
    expected = 3 / (16 * sigma**2 * omega) * np.sqrt(2 * sc.k * T / (np.pi * mu))
    got = exosieve.binary_diffusion_parameter(a, "Ar", T, method="chapman_enskog")
    np.testing.assert_allclose(got, expected, rtol=1e-9)


def test_measured_pairs_override_and_broadcast():
    pairs = {(p.species_a, p.species_b): p for p in exosieve.diffusion_pairs()}
    fit = pairs[("H2", "N2")]
    assert "CRC Handbook" in fit.source
    assert "from memory" in pairs[("H", "N2")].source
    T = np.array([[250.0, 500.0], [1000.0, 2000.0]])
    got = exosieve.binary_diffusion_parameter("N2", "H2", T)
    assert got.shape == (2, 2)
    np.testing.assert_allclose(got, fit.A * T**fit.s, rtol=1e-13)
    assert isinstance(exosieve.binary_diffusion_parameter("H2", "N2", 300.0), float)


# CRC Handbook of Chemistry and Physics, table "Diffusion in gases" (from Marrero & Mason 1972,
# J. Phys. Chem. Ref. Data 1, 3): D [cm^2 s^-1] at 101.325 kPa of a gas in a large excess of air.
CRC_IN_AIR = {
    "H2": {
        273.15: 0.668,
        293.15: 0.756,
        373.15: 1.153,
        473.15: 1.747,
        573.15: 2.444,
        673.15: 3.238,
    },
    "He": {
        273.15: 0.617,
        293.15: 0.697,
        373.15: 1.057,
        473.15: 1.594,
        573.15: 2.221,
        673.15: 2.933,
    },
}
# Dry air by mole fraction, N2/O2/Ar (common practice).
AIR = {"N2": 0.781, "O2": 0.210, "Ar": 0.009}


def coefficient_in_air(gas, temperature, method):
    """D [cm^2 s^-1] at 1 atm of `gas` through AIR by Blanc's law over the binary values."""
    inverse = sum(
        x / exosieve.binary_diffusion_parameter(gas, name, temperature, method=method)
        for name, x in AIR.items()
    )
    return coefficient_at_1_atm(1.0 / inverse, temperature)


@pytest.mark.parametrize(
    ("gas", "method", "tolerance"),
    [
        # the measured H2-N2 fit (Chapman–Enskog for O2 and Ar): 0.9 % at most, measured
        ("H2", "measured", 0.03),
        # Chapman–Enskog with Lennard-Jones parameters: good to 5-10 % (Poling et al. 2001)
        ("H2", "chapman_enskog", 0.10),
        ("He", "chapman_enskog", 0.10),
    ],
)
def test_diffusion_through_air_matches_the_crc_handbook(gas, method, tolerance):
    for temperature, d_cm2 in CRC_IN_AIR[gas].items():
        got = coefficient_in_air(gas, temperature, method)
        assert got == pytest.approx(d_cm2, rel=tolerance), temperature


def test_blanc_law_in_diffusion_limited_flux():
    # Blanc (1908): 1/b = sum_j y_j / b_j; Hunten (1973): Phi = b x (m_a - m_i) g / (k T).
    T, x, r = 300.0, 1e-6, R_EARTH + 100e3
    background = {"N2": 0.8, "O": 0.2}
    b1 = exosieve.binary_diffusion_parameter("He", "N2", T)
    b2 = exosieve.binary_diffusion_parameter("He", "O", T)
    b = 1.0 / (0.8 / b1 + 0.2 / b2)
    m_a = 0.8 * exosieve.species("N2").mass + 0.2 * exosieve.species("O").mass
    g = sc.G * M_EARTH / r**2
    expected = b * x * (m_a - exosieve.species("He").mass) * g / (sc.k * T)
    got = exosieve.diffusion_limited_flux("He", background, x, T, M_EARTH, r)
    # scipy.constants.G is CODATA 2018 like the core: agreement to rounding
    assert got == pytest.approx(expected, rel=1e-12)


def test_earth_diffusion_limited_hydrogen_flux():
    # from memory (Hunten 1973; Hunten & Donahue 1976; Catling & Kasting 2017): Earth's
    # diffusion-limited escape flux is about 2.5e13 f_T cm^-2 s^-1, with f_T the total
    # hydrogen mixing ratio counted in H2 molecules and the flux in H2 molecules. Inputs chosen
    # here: H2 through air (N2 0.78, O2 0.21, Ar 0.01) at a 100 km homopause, 200 K.
    # Tolerance 25 %: the rule of thumb rounds over the homopause temperature and height.
    air = {"N2": 0.78, "O2": 0.21, "Ar": 0.01}
    flux = exosieve.diffusion_limited_flux("H2", air, 1.0e-5, 200.0, M_EARTH, R_EARTH + 100e3)
    per_unit_mixing_ratio = flux * 1e-4 / 1.0e-5  # cm^-2 s^-1
    assert per_unit_mixing_ratio == pytest.approx(2.5e13, rel=0.25)


def test_diffusion_limited_flux_broadcasts_and_is_linear_in_mixing_ratio():
    x = np.array([1e-6, 2e-6, 4e-6])[:, None]
    T = np.array([180.0, 220.0])
    flux = exosieve.diffusion_limited_flux("H", "N2", x, T, M_EARTH, R_EARTH + 1e5)
    assert flux.shape == (3, 2)
    np.testing.assert_allclose(flux[1] / flux[0], 2.0, rtol=1e-14)
    # heavier than the background: cannot diffuse upward
    assert exosieve.diffusion_limited_flux("Ar", "N2", 1e-3, 250.0, M_EARTH, R_EARTH) < 0


def test_astropy_quantities_are_converted():
    u = pytest.importorskip("astropy.units")
    plain = exosieve.binary_diffusion_parameter("He", "N2", 300.0)
    assert exosieve.binary_diffusion_parameter("He", "N2", 26.85 * u.deg_C) == pytest.approx(
        plain, rel=1e-12
    )
    flux = exosieve.diffusion_limited_flux(
        "H2", "N2", 1e-5, 200.0 * u.K, 1.0 * u.M_earth, (6478.1 * u.km)
    )
    assert flux > 0


# ---------------------------------------------------------------- coupled flux


def coupled_by_bvp(x, n_a0, h_a, h_i, b, v_j, z_e):
    """Constant-flux diffusion of a minor gas through an exponential background, solved with
    scipy.integrate.solve_bvp.

    Phi = -D (dn/dz + n/H_i), D = b / n_a(z), n_a = n_a0 exp(-z/H_a): the unknown flux Phi is
    a parameter; n(0) = x n_a0 and Jeans effusion n(z_e) v_J = Phi at the top. Scaled: y = n /
    (x n_a0), p = Phi / (b x / H_a).
    """
    scale_flux = b * x / h_a

    def rhs(z, y, p):
        n_a = np.exp(-z / h_a)  # in units of n_a0
        return np.vstack([-y[0] / h_i - p[0] * scale_flux * n_a / (b * x)])

    def bc(ya, yb, p):
        return np.array([ya[0] - 1.0, v_j * x * n_a0 / scale_flux * yb[0] - p[0]])

    z = np.linspace(0.0, z_e, 2001)
    guess = np.exp(-z / h_i)[None, :]
    sol = integrate.solve_bvp(rhs, bc, z, guess, p=[0.5], tol=1e-10, max_nodes=200000)
    assert sol.success, sol.message
    return sol.p[0] * scale_flux


@pytest.mark.parametrize(
    ("n_a0", "label"),
    [(6e16, "neither limit"), (6e13, "Jeans-limited"), (6e20, "diffusion-limited")],
)
def test_coupled_flux_matches_solve_bvp(n_a0, label):
    # Worked problem, plane-parallel and isothermal: trace H-like gas (H_i = 60 km) through a
    # heavier background (H_a = 10 km), 300 km thick, effusion velocity 200 m/s. The
    # background density sets where between the limits the flux falls.
    x, h_a, h_i, b, v_j, z_e = 1e-5, 1e4, 6e4, 1e21, 200.0, 3e5
    beta = 1 / h_a - 1 / h_i
    phi_eq = v_j * x * n_a0 * np.exp(-z_e / h_i)  # Jeans flux at the equilibrium density
    phi_dl = b * x * beta
    got = exosieve.coupled_escape_flux(phi_eq, b, x, beta, z_e)
    expected = coupled_by_bvp(x, n_a0, h_a, h_i, b, v_j, z_e)
    assert got == pytest.approx(expected, rel=1e-6)
    if label == "neither limit":
        assert got < 0.8 * phi_eq and got < 0.8 * phi_dl
    elif label == "Jeans-limited":
        assert got == pytest.approx(phi_eq, rel=1e-3)
    else:
        assert got == pytest.approx(phi_dl, rel=1e-3)


def test_coupled_flux_beta_to_zero():
    # Worked limit: (1 - exp(-beta z)) / beta -> z, so Phi -> Phi_J / (1 + Phi_J z / (b x)).
    phi_j, b, x, z = 1e11, 1e21, 1e-4, 4e5
    limit = phi_j / (1 + phi_j * z / (b * x))
    beta = np.array([0.0, 1e-15, -1e-15, 1e-12])
    got = exosieve.coupled_escape_flux(phi_j, b, x, beta, z)
    np.testing.assert_allclose(got, limit, rtol=1e-6)
    assert got[0] == pytest.approx(limit, rel=1e-15)


def test_coupled_flux_matches_finite_differences_for_a_heavy_gas():
    # beta < 0 (heavier than the background): second-order finite differences of
    # d/dz [b (df/dz - beta f)] = 0 with f(0) = x and b (beta f - df/dz) = v_J n_a(z_e) f at
    # the top, solved as a linear system with numpy.
    x, b, beta, z_e, n_a_top, v_j = 1e-3, 1e21, -1 / 5e4, 2e5, 1e13, 300.0
    m = 4000
    z = np.linspace(0, z_e, m + 1)
    h = z[1] - z[0]
    a = np.zeros((m + 1, m + 1))
    rhs = np.zeros(m + 1)
    a[0, 0], rhs[0] = 1.0, x
    for k in range(1, m):  # f'' - beta f' = 0 (constant flux, constant b and beta)
        a[k, k - 1] = 1 / h**2 + beta / (2 * h)
        a[k, k] = -2 / h**2
        a[k, k + 1] = 1 / h**2 - beta / (2 * h)
    # top: b beta f - b f' - v_J n_a f = 0 with a second-order one-sided f'
    a[m, m] = b * beta - b * 3 / (2 * h) - v_j * n_a_top
    a[m, m - 1] = b * 4 / (2 * h)
    a[m, m - 2] = -b / (2 * h)
    f = np.linalg.solve(a, rhs)
    phi_fd = v_j * n_a_top * f[-1]
    phi_eq = v_j * n_a_top * x * np.exp(beta * z_e)
    got = exosieve.coupled_escape_flux(phi_eq, b, x, beta, z_e)
    assert got == pytest.approx(phi_fd, rel=1e-5)
    assert 0 < got < phi_eq


# ---------------------------------------------------------------- bad input


@pytest.mark.parametrize(
    ("call", "message"),
    [
        (
            lambda: exosieve.binary_diffusion_parameter("H", "N2", -5.0),
            "temperature must be finite and > 0, got -5",
        ),
        (
            lambda: exosieve.binary_diffusion_parameter("H", "N2", np.array([300.0, 0.0])),
            r"temperature must be finite and > 0, got 0 \(element 1\)",
        ),
        (lambda: exosieve.binary_diffusion_parameter("Hx", "N2", 300.0), "unknown species 'Hx'"),
        (
            lambda: exosieve.binary_diffusion_parameter("H", "N2", 300.0, method="fast"),
            "method must be one of",
        ),
        (
            lambda: exosieve.diffusion_limited_flux(
                "H", {"N2": 0.7, "O2": 0.2}, 1e-5, 300.0, M_EARTH, R_EARTH
            ),
            "background mole fractions must sum to one",
        ),
        (
            lambda: exosieve.diffusion_limited_flux(
                "H", {"N2": 1.1, "O2": -0.1}, 1e-5, 300.0, M_EARTH, R_EARTH
            ),
            "background mole fraction of 'O2' must be finite and >= 0, got -0.1",
        ),
        (
            lambda: exosieve.diffusion_limited_flux("H", "N2", 1.5, 300.0, M_EARTH, R_EARTH),
            "mixing_ratio must be <= 1, got 1.5",
        ),
        (
            lambda: exosieve.diffusion_limited_flux("H", "N2", 1e-5, 300.0, -1.0, R_EARTH),
            "planet_mass must be finite and > 0, got -1",
        ),
        (
            lambda: exosieve.diffusion_limited_flux("H", "H", 1e-5, 300.0, M_EARTH, R_EARTH),
            "must not contain the diffusing species",
        ),
        (
            lambda: exosieve.diffusion_limited_flux("H", 3.0, 1e-5, 300.0, M_EARTH, R_EARTH),
            "background must be a species name",
        ),
        (
            lambda: exosieve.coupled_escape_flux(1e8, -1e21, 1e-5, 1e-4, 1e5),
            "diffusion_parameter must be finite and > 0, got -1e",
        ),
    ],
)
def test_bad_input_names_argument_and_value(call, message):
    with pytest.raises(ValueError, match=message):
        call()
