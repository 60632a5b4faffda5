"""Speed distribution against scipy.stats.maxwell and mpmath."""

import mpmath
import numpy as np
import pytest
from scipy import stats

import exosieve
from exosieve.constants import AMU, K_B

T = 850.0
M = 15.999 * AMU  # atomic oxygen


def scipy_maxwell(temperature=T, mass=M):
    # scipy.stats.maxwell has scale a = sqrt(kT/m) = v0 / sqrt(2).
    return stats.maxwell(scale=np.sqrt(K_B * temperature / mass))


def test_pdf_matches_scipy():
    v = np.linspace(0.0, 6000.0, 301)
    assert np.allclose(exosieve.speed_pdf(v, T, M), scipy_maxwell().pdf(v), rtol=1e-13, atol=0)


def test_fraction_faster_matches_scipy_survival_function():
    v = np.linspace(0.0, 8000.0, 201)
    assert np.allclose(
        exosieve.fraction_faster(v, T, M), scipy_maxwell().sf(v), rtol=1e-12, atol=1e-300
    )


def test_mean_and_standard_deviation_match_scipy():
    dist = scipy_maxwell()
    assert exosieve.mean_speed(T, M) == pytest.approx(dist.mean(), rel=1e-14)
    rms = exosieve.rms_speed(T, M)
    mean = exosieve.mean_speed(T, M)
    assert np.sqrt(rms**2 - mean**2) == pytest.approx(dist.std(), rel=1e-12)


def test_most_probable_speed_is_the_mode():
    # The pdf's maximum, found by scipy.optimize on the scipy.stats density.
    from scipy.optimize import minimize_scalar

    dist = scipy_maxwell()
    mode = minimize_scalar(
        lambda v: -dist.pdf(v), bounds=(1.0, 5000.0), method="bounded", options={"xatol": 1e-6}
    ).x
    assert exosieve.most_probable_speed(T, M) == pytest.approx(mode, rel=1e-7)


@pytest.mark.parametrize("x", [3.0, 10.0, 26.0, 30.0, 100.0, 1000.0])
def test_deep_tail_log_fraction_against_mpmath(x):
    # mpmath at 50 digits: erfc(x) + 2/sqrt(pi) x exp(-x^2).
    mpmath.mp.dps = 50
    exact = mpmath.log(mpmath.erfc(x) + 2 / mpmath.sqrt(mpmath.pi) * x * mpmath.exp(-x * x))
    v0 = exosieve.most_probable_speed(T, M)
    assert exosieve.log_fraction_faster(x * v0, T, M) == pytest.approx(float(exact), rel=1e-13)


def test_deep_tail_underflows_to_zero_not_nan():
    v0 = exosieve.most_probable_speed(T, M)
    values = exosieve.fraction_faster(np.array([30.0, 100.0, 1e6]) * v0, T, M)
    assert np.all(values == 0.0)
    assert np.all(np.isfinite(exosieve.log_fraction_faster(np.array([30.0, 1e6]) * v0, T, M)))


def test_astropy_quantities_are_converted():
    import astropy.units as u

    assert exosieve.most_probable_speed(T * u.K, M * u.kg) == exosieve.most_probable_speed(T, M)
    # Celsius through the temperature equivalency; grams to kilograms.
    assert exosieve.mean_speed((T - 273.15) * u.deg_C, M * 1e3 * u.g) == pytest.approx(
        exosieve.mean_speed(T, M), rel=1e-14
    )
    with pytest.raises(ValueError, match="temperature: cannot convert"):
        exosieve.rms_speed(3.0 * u.m, M)


def test_broadcasting_and_scalar_results():
    assert isinstance(exosieve.most_probable_speed(300.0, "N2"), float)
    out = exosieve.speed_pdf(np.zeros((3, 1)), np.array([100.0, 200.0]), "N2")
    assert out.shape == (3, 2)
    with pytest.raises(ValueError, match="do not broadcast"):
        exosieve.speed_pdf(np.zeros(3), np.ones(2), M)
