"""Jeans escape against direct integration of the Maxwellian (scipy.integrate), mpmath and
textbook values."""

import mpmath
import numpy as np
import pytest
from scipy import integrate

import exosieve
from exosieve.constants import K_B, M_EARTH, R_EARTH

R_EXO = R_EARTH + 500e3


def test_earth_escape_speed():
    # common practice: Earth's surface escape speed is about 11.2 km/s (IAU nominal GM, radius).
    assert exosieve.escape_speed(M_EARTH, R_EARTH) == pytest.approx(11.2e3, rel=0.01)


def test_hydrogen_jeans_parameter_on_earth():
    # from memory (textbook value): atomic H at a 1000 K exobase 500 km above Earth has
    # lambda near 7.
    assert exosieve.jeans_parameter(1000.0, "H", M_EARTH, R_EXO) == pytest.approx(7.0, abs=0.5)


def test_jeans_parameter_is_escape_over_thermal_speed_squared():
    T, m = np.array([300.0, 1000.0, 3000.0]), exosieve.species("He").mass
    ratio = exosieve.escape_speed(M_EARTH, R_EXO) / exosieve.most_probable_speed(T, m)
    assert np.allclose(exosieve.jeans_parameter(T, m, M_EARTH, R_EXO), ratio**2, rtol=1e-13)


@pytest.mark.parametrize(
    ("name", "temperature"), [("H", 1000.0), ("He", 2500.0), ("O", 4000.0), ("H2", 700.0)]
)
def test_flux_equals_upward_maxwellian_flux_above_escape_speed(name, temperature):
    # Kinetic theory: upward flux of particles faster than v_esc through a horizontal surface,
    # n * int_{v_esc}^inf v f(v) dv * int_0^{pi/2} cos(t) sin(t) dt / 2 = (n/4) int v f dv,
    # integrated numerically with scipy.integrate.quad.
    n = 1e12
    m = exosieve.species(name).mass
    v_esc = exosieve.escape_speed(M_EARTH, R_EXO)
    integral, _ = integrate.quad(
        lambda v: v * exosieve.speed_pdf(v, temperature, m),
        v_esc,
        np.inf,
        epsabs=0.0,
        epsrel=1e-12,
        limit=200,
    )
    expected = 0.25 * n * integral
    assert exosieve.jeans_flux(n, temperature, m, M_EARTH, R_EXO) == pytest.approx(
        expected, rel=1e-9
    )


def test_flux_by_velocity_space_integration():
    # Independent of the 1/4 factor: integrate v cos(theta) f(v) over the upward hemisphere
    # with scipy.integrate.dblquad (angle and speed).
    n, T, m = 1e12, 1500.0, exosieve.species("He").mass
    v_esc = exosieve.escape_speed(M_EARTH, R_EXO)
    v0 = exosieve.most_probable_speed(T, m)
    value, _ = integrate.dblquad(
        lambda theta, v: v * np.cos(theta) * exosieve.speed_pdf(v, T, m) * np.sin(theta) / 2.0,
        v_esc,
        v_esc + 30.0 * v0,
        0.0,
        np.pi / 2,
        epsabs=0.0,
        epsrel=1e-11,
    )
    assert exosieve.jeans_flux(n, T, m, M_EARTH, R_EXO) == pytest.approx(n * value, rel=1e-8)


def test_energy_flux_by_quadrature():
    # Kinetic energy carried up: (n/4) int_{v_esc}^inf (m v^2 / 2) v f(v) dv (scipy quad),
    # evaluated at the exobase.
    n, T, m = 1e12, 1000.0, exosieve.species("H").mass
    v_esc = exosieve.escape_speed(M_EARTH, R_EXO)
    integral, _ = integrate.quad(
        lambda v: 0.5 * m * v**3 * exosieve.speed_pdf(v, T, m),
        v_esc,
        np.inf,
        epsabs=0.0,
        epsrel=1e-12,
    )
    assert exosieve.jeans_energy_flux(n, T, m, M_EARTH, R_EXO) == pytest.approx(
        0.25 * n * integral, rel=1e-9
    )


def test_escape_rate_is_flux_times_area():
    args = (1e11, 1000.0, "H", M_EARTH, R_EXO)
    assert exosieve.jeans_escape_rate(*args) == pytest.approx(
        4 * np.pi * R_EXO**2 * exosieve.jeans_flux(*args), rel=1e-15
    )


def test_log_forms_against_mpmath_far_below_double_range():
    # mpmath at 50 digits of n v0/(2 sqrt(pi)) (1 + lambda) exp(-lambda) for xenon at 50 K.
    mpmath.mp.dps = 50
    n, T, name = 1e15, 50.0, "Xe"
    m = exosieve.species(name).mass
    lam = mpmath.mpf(exosieve.jeans_parameter(T, m, M_EARTH, R_EARTH))
    v0 = mpmath.sqrt(2 * mpmath.mpf(K_B) * T / mpmath.mpf(m))
    exact = mpmath.log(n * v0 / (2 * mpmath.sqrt(mpmath.pi)) * (1 + lam) * mpmath.exp(-lam))
    assert float(exact) < -1e4  # far below the smallest double
    assert exosieve.log_jeans_flux(n, T, m, M_EARTH, R_EARTH) == pytest.approx(
        float(exact), rel=1e-14
    )
    assert exosieve.jeans_flux(n, T, m, M_EARTH, R_EARTH) == 0.0
    assert exosieve.log_jeans_escape_rate(n, T, m, M_EARTH, R_EARTH) == pytest.approx(
        float(exact + mpmath.log(4 * mpmath.pi * R_EARTH**2)), rel=1e-14
    )


def test_tail_depletion_forms():
    args = (1e11, 1000.0, "H", M_EARTH, R_EXO)
    plain = exosieve.jeans_flux(*args)
    lam = exosieve.jeans_parameter(*args[1:])
    assert exosieve.jeans_flux(*args, tail_depletion=0.8) == pytest.approx(0.8 * plain)
    table = ([0.0, 10.0], [0.5, 1.0])
    assert exosieve.jeans_flux(*args, tail_depletion=table) == pytest.approx(
        (0.5 + 0.05 * lam) * plain, rel=1e-14
    )
    with pytest.raises(ValueError, match="strictly increasing"):
        exosieve.jeans_flux(*args, tail_depletion=([1.0, 1.0], [0.5, 0.6]))


def test_array_kernels_match_scalar_calls_on_large_arrays():
    rng = np.random.default_rng(1)
    T = rng.uniform(200.0, 5000.0, 200_000)
    n = rng.uniform(1e8, 1e14, T.size)
    flux = exosieve.jeans_flux(n, T, "He", M_EARTH, R_EXO)
    idx = rng.integers(0, T.size, 50)
    for i in idx:
        assert flux[i] == pytest.approx(
            exosieve.jeans_flux(n[i], T[i], "He", M_EARTH, R_EXO), rel=1e-14
        )


def test_array_kernels_run_in_parallel_threads():
    # The GIL is released: two Python threads computing at once give the same answers.
    from concurrent.futures import ThreadPoolExecutor

    T = np.linspace(300.0, 3000.0, 100_000)
    reference = exosieve.jeans_flux(1e12, T, "O", M_EARTH, R_EXO)
    with ThreadPoolExecutor(2) as pool:
        results = list(
            pool.map(lambda _: exosieve.jeans_flux(1e12, T, "O", M_EARTH, R_EXO), range(4))
        )
    for r in results:
        assert np.array_equal(r, reference)


@pytest.mark.parametrize("lam_target", [700.0, 740.0, 760.0])
def test_flux_keeps_precision_where_exp_alone_is_subnormal(lam_target):
    # mpmath at 50 digits; exp(-740) alone would be a subnormal double with few digits,
    # yet with n = 1e20 the flux itself is a normal double.
    mpmath.mp.dps = 50
    m = exosieve.species("O").mass
    T = exosieve.jeans_parameter(1.0, m, M_EARTH, R_EXO) / lam_target
    lam = mpmath.mpf(exosieve.jeans_parameter(T, m, M_EARTH, R_EXO))
    v0 = mpmath.sqrt(2 * mpmath.mpf(K_B) * T / mpmath.mpf(m))
    exact = 1e20 * v0 / (2 * mpmath.sqrt(mpmath.pi)) * (1 + lam) * mpmath.exp(-lam)
    single = exosieve.jeans_flux(1e20, T, m, M_EARTH, R_EXO)
    array = exosieve.jeans_flux(np.full(3, 1e20), T, m, M_EARTH, R_EXO)
    assert single == pytest.approx(float(exact), rel=1e-13)
    assert np.allclose(array, float(exact), rtol=1e-13, atol=0)
