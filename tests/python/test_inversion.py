"""Inversion of a measured isotope ratio for the initial inventory, checked against closed forms.

Rayleigh distillation with a constant fractionation factor: an exobase at a prescribed radius and
a constant temperature, densities following each inventory, gives each species a fixed escape
rate at the start A_i [s^-1] and so the rate constant k_i = A_i / N_i(t_start):
N_i = N_i0 exp(-k_i t). The flux ratio over the reservoir ratio, alpha = k_D / k_H, is constant,
and R / R0 = (N_H / N_H0)^(alpha - 1) (Rayleigh 1902's law). With the total S = H0 + D0 held at
D0 = R0 H0 and A_i fixed, alpha = A_D / (A_H R0) does not depend on S, and
R(t) / R0 = exp(A_H (1 - alpha) t / H0): the exact inverse is H0 = A_H t (1 - alpha) / ln(R/R0).
The rates come from the Jeans formula written out with scipy.constants (CODATA 2018).
"""

from __future__ import annotations

import doctest
import math
import os
import signal

import numpy as np
import pytest
import scipy.constants as sc

import exosieve
from exosieve import _core, inversion
from exosieve import constants as c
from exosieve.catalogue import case_table_from_frame

pd = pytest.importorskip("pandas")

# An invented planet: 0.8 Earth masses, 0.9 Earth radii, exobase 400 km up at 900 K.
MASS = 0.8 * c.M_EARTH
RADIUS = 0.9 * c.R_EARTH
R_EXO = RADIUS + 4e5
T_EXO = 900.0
N_H = 1e11  # exobase density of H [m^-3]
R0 = 1.5e-4  # initial D/H, invented
SPAN = 4.0 * c.GYR
M_H = exosieve.species("H").mass
M_D = exosieve.species("D").mass


def jeans_rate(n: float, t: float, m: float, planet_mass: float = MASS) -> float:
    """4 pi r^2 n v0 / (2 sqrt(pi)) (1 + lambda) e^-lambda [s^-1] (Jeans 1925; Chamberlain
    1963), with scipy.constants."""
    v0 = math.sqrt(2 * sc.k * t / m)
    lam = sc.G * planet_mass * m / (sc.k * t * R_EXO)
    return 4 * math.pi * R_EXO**2 * n * v0 / (2 * math.sqrt(math.pi)) * (1 + lam) * math.exp(-lam)


A_H = jeans_rate(N_H, T_EXO, M_H)
A_D = jeans_rate(R0 * N_H, T_EXO, M_D)
ALPHA = A_D / (A_H * R0)


def exact_total(enrichment: float, a_h: float = A_H, alpha: float = ALPHA) -> float:
    """S = H0 (1 + R0) with H0 = A_H t (1 - alpha) / ln(R/R0): the inverse of Rayleigh's law."""
    return a_h * SPAN * (1 - alpha) / math.log(enrichment) * (1 + R0)


def forward_ratio(total: float) -> float:
    """D/H at the end for a total S: R0 exp(A_H (1 - alpha) t / H0)."""
    return R0 * math.exp(A_H * (1 - ALPHA) * SPAN / (total / (1 + R0)))


def model(total: float, **kwargs):
    h0 = total / (1 + R0)
    scaling = kwargs.pop("density_scaling", "inventory")
    exo = exosieve.PrescribedExobase(R_EXO, T_EXO, {"H": N_H, "D": R0 * N_H}, scaling=scaling)
    planet = exosieve.Planet(MASS, RADIUS)
    return planet, exo, {"H": h0, "D": R0 * h0}, (0.0, SPAN)


def invert(total: float, **kwargs):
    scaling = kwargs.pop("density_scaling", "inventory")
    planet, exo, inventory, span = model(total, density_scaling=scaling)
    kwargs.setdefault("rtol", 1e-10)
    return exosieve.invert_ratio(planet, exo, inventory, span, ratio="D/H", **kwargs)


@pytest.mark.parametrize("enrichment", [1.05, 3.0, 40.0])
@pytest.mark.parametrize("start", [1e-4, 1.0, 1e5])
def test_rayleigh_distillation_exact_inverse(enrichment, start):
    exact = exact_total(enrichment)
    result = invert(start * exact, measured=enrichment * R0)
    assert result.status == "solved", result.message
    assert result.total_initial == pytest.approx(exact, rel=1e-6)
    assert result.ratio_reached == pytest.approx(enrichment * R0, rel=1e-7)
    assert result.initial_inventory["D"] / result.initial_inventory["H"] == pytest.approx(R0)
    # Rayleigh's law at the solution's own end state.
    f = result.final_inventory["H"] / result.initial_inventory["H"]
    assert f ** (ALPHA - 1) == pytest.approx(enrichment, rel=1e-7)
    h0, d0 = exact / (1 + R0), R0 * exact / (1 + R0)
    lost = h0 * -math.expm1(-A_H / h0 * SPAN) + d0 * -math.expm1(-A_D / d0 * SPAN)
    assert result.total_lost == pytest.approx(lost, rel=1e-6)
    assert sum(result.lost.values()) == pytest.approx(result.total_lost, rel=1e-12)
    lo, hi = result.bracket
    assert lo <= result.total_initial <= hi and hi / lo - 1 < 2e-9
    assert result.scaled == ["H", "D"]
    assert not result.depleted


def test_enrichment_and_the_initial_ratio_from_the_inventory():
    # D/H at the start from VSMOW's 155.76 ppm (IAEA reference value, from memory): the
    # proportions of the inventory set R0; the measured value is the enrichment over it.
    vsmow = 155.76e-6
    planet = exosieve.Planet(MASS, RADIUS)
    exo = exosieve.PrescribedExobase(R_EXO, T_EXO, {"H": N_H, "D": vsmow * N_H})
    result = exosieve.invert_ratio(
        planet, exo, {"H": 1e42, "D": vsmow * 1e42}, (0.0, SPAN), ratio=("D", "H"),
        measured=3.0, relative=True, rtol=1e-10,
    )  # fmt: skip
    assert result.initial_ratio == pytest.approx(vsmow, rel=1e-14)
    assert result.target == pytest.approx(3 * vsmow, rel=1e-14)
    a_d = jeans_rate(vsmow * N_H, T_EXO, M_D)
    alpha = a_d / (A_H * vsmow)
    exact = A_H * SPAN * (1 - alpha) / math.log(3.0) * (1 + vsmow)
    assert result.total_initial == pytest.approx(exact, rel=1e-6)


@pytest.mark.parametrize("enrichment", [1.01, 1.5, 10.0, 900.0])
@pytest.mark.parametrize("start", [1e-3, 1.0, 1e3])
def test_linear_loss_with_fixed_densities_exact_inverse(enrichment, start):
    # Worked analytic solution: fixed densities give constant rates, N_i = N_i0 - A_i t, so
    # R = (R0 H0 - A_D t) / (H0 - A_H t) and H0 = (R A_H - A_D) t / (R - R0). Smaller H0 use
    # H up (it is then held at its depletion level, 1e-3 H0): there R(H0) turns back, and a
    # search from below meets that branch first. The root found is the physical one; at 900
    # it lies within 1e-4 of the depletion boundary.
    target = enrichment * R0
    h0 = (target * A_H - A_D) * SPAN / (target - R0)
    assert h0 > A_H * SPAN / (1 - 1e-3)  # H is not used up
    result = invert(start * h0 * (1 + R0), measured=target, density_scaling="fixed")
    assert result.status == "solved", result.message
    assert result.total_initial == pytest.approx(h0 * (1 + R0), rel=1e-6)
    assert result.final_inventory["H"] == pytest.approx(h0 - A_H * SPAN, rel=1e-5)
    assert not result.depleted


def test_a_solution_that_depletes_a_ratio_species_says_so():
    # A 1e4-fold enrichment leaves N_H/N_H0 = 1e4^(1/(alpha - 1)), about 1e-4: below the
    # depletion fraction 1e-3. Still the exact inverse (the loss follows the inventory here),
    # but flagged, since where a loss does not follow it the species would be held there.
    result = invert(exact_total(1e4), measured=1e4 * R0)
    assert result.status == "solved"
    assert result.total_initial == pytest.approx(exact_total(1e4), rel=1e-6)
    assert result.final_inventory["H"] / result.initial_inventory["H"] < 1e-3
    assert result.depleted
    assert "held" in result.message


def test_no_solution_is_reported_with_the_bracket_and_the_ratio_at_its_ends():
    total = exact_total(3.0)
    result = invert(total, measured=0.5 * R0)  # D/H only rises under this loss
    assert result.status == "no_solution"
    assert not result.solved
    assert math.isnan(result.total_initial) and math.isnan(result.ratio_reached)
    lo, hi = result.bracket
    assert lo == pytest.approx(total / 1e10, rel=1e-12)
    assert hi == pytest.approx(total * 1e10, rel=1e-12)
    r_lo, r_hi = result.bracket_ratio
    assert r_hi == pytest.approx(forward_ratio(hi), rel=1e-9)
    assert r_lo > 0.5 * R0 and r_hi > 0.5 * R0
    assert "no solution" in result.message and "above it" in result.message
    # Out of reach inside given bounds: the ratio at both ends of the range, in closed form.
    bounded = invert(total, measured=27 * R0, inventory_min=0.5 * total, inventory_max=2 * total)
    assert bounded.status == "no_solution"
    assert bounded.bracket == pytest.approx((0.5 * total, 2 * total), rel=1e-12)
    assert bounded.bracket_ratio[0] == pytest.approx(9 * R0, rel=1e-7)
    assert bounded.bracket_ratio[1] == pytest.approx(forward_ratio(2 * total), rel=1e-7)
    assert "below it" in bounded.message


def test_a_failing_run_is_a_failure_with_its_message():
    result = invert(exact_total(3.0), measured=3 * R0, max_steps=1)
    assert result.status == "failed"
    assert "nominal" in result.message and "step" in result.message


def test_monte_carlo_over_the_measured_ratio():
    total = exact_total(3.0)
    n, mean, sigma = 400, 3 * R0, 0.3 * R0
    result = invert(total, measured=mean, sigma=sigma, samples=n, seed=5, threads=2, rtol=1e-9)
    s = result.samples
    assert s is not None and len(s) == n
    assert s.counts["solved"] == n
    # Each sample is the exact inverse at its own drawn ratio.
    exact = [exact_total(t / R0) for t in s.target]
    np.testing.assert_allclose(s.total_initial, exact, rtol=1e-6)
    np.testing.assert_allclose(s.initial_inventory.sum(axis=1), s.total_initial, rtol=1e-14)
    np.testing.assert_allclose(s.lost().sum(axis=1), s.total_lost, rtol=1e-9)
    # The draws: N(3 R0, (0.3 R0)^2) (truncation at 0 is 10 sigma away); sample mean within
    # 4 standard errors, sample deviation within 15% (fixed seed: the same draws every time).
    assert abs(s.target.mean() - mean) < 4 * sigma / math.sqrt(n)
    assert s.target.std() == pytest.approx(sigma, rel=0.15)
    q = s.quantiles((16, 50, 84))
    assert q["total_initial"][0] < result.total_initial < q["total_initial"][2]
    assert np.all(np.diff(q["total_lost"]) > 0)
    # Thread-count independent and reproducible.
    again = invert(total, measured=mean, sigma=sigma, samples=n, seed=5, threads=1, rtol=1e-9)
    assert again.samples is not None
    assert np.array_equal(again.samples.target, s.target)
    assert np.array_equal(again.samples.total_initial, s.total_initial)


def test_log_normal_measurement():
    total = exact_total(3.0)
    result = invert(total, measured=3 * R0, lnsigma=0.2, samples=200, seed=1, rtol=1e-8)
    assert result.samples is not None
    log_t = np.log(result.samples.target)
    assert abs(np.mean(log_t) - math.log(3 * R0)) < 4 * 0.2 / math.sqrt(200)
    assert np.std(log_t) == pytest.approx(0.2, rel=0.15)
    exact = [exact_total(t / R0) for t in result.samples.target]
    np.testing.assert_allclose(result.samples.total_initial, exact, rtol=1e-5)


def test_progress_by_count_and_stopping_keeps_the_first_k_m():
    total = exact_total(3.0)
    calls: list[tuple[int, int]] = []
    full = invert(total, measured=3 * R0, sigma=0.2 * R0, samples=11, threads=2,
                  progress=lambda d, t: calls.append((d, t)), progress_every=4)  # fmt: skip
    assert calls == [(4, 12), (8, 12), (12, 12)]
    stop: list[int] = []

    def progress(done: int, total_runs: int) -> bool:
        stop.append(done)
        return len(stop) < 2

    part = invert(total, measured=3 * R0, sigma=0.2 * R0, samples=11, threads=2,
                  progress=progress, progress_every=4)  # fmt: skip
    assert stop == [4, 8]
    assert part.samples is not None and full.samples is not None
    assert part.samples.cancelled
    assert list(part.samples.status) == ["solved"] * 7 + ["cancelled"] * 4
    assert np.array_equal(part.samples.total_initial[:7], full.samples.total_initial[:7])


def test_ctrl_c_stops_an_inversion(ctrl_c):
    total = exact_total(3.0)

    def interrupt(done: int, total_runs: int) -> None:
        os.kill(os.getpid(), signal.SIGINT)

    with pytest.raises(KeyboardInterrupt):
        invert(total, measured=3 * R0, sigma=0.2 * R0, samples=8, threads=1,
               progress=interrupt, progress_every=2)  # fmt: skip


def frame(rows: int = 1):
    """The model above as case-table rows (invented), with uncertain mass and temperature."""
    x_h, x_d = 1 / (1 + R0), R0 / (1 + R0)
    return pd.DataFrame(
        {
            "case": [f"Invented {k}" for k in range(rows)],
            "planet_mass [kg]": [MASS] * rows,
            "planet_mass_sigma [kg]": [0.03 * MASS] * rows,
            "planet_radius [m]": [RADIUS] * rows,
            "exobase_altitude [km]": [400.0] * rows,
            "exobase_composition": ["bulk"] * rows,
            "exobase_density [m-3]": [N_H / x_h] * rows,
            "exobase_temperature [K]": [T_EXO] * rows,
            "exobase_temperature_sigma [K]": [20.0] * rows,
            "inventory [particles]": [1e42] * rows,
            "age_start [Gyr]": [0.0] * rows,
            "age_end [Gyr]": [4.0] * rows,
            "rtol [1]": [1e-10] * rows,
            "x_H": [x_h] * rows,
            "x_D": [x_d] * rows,
        }
    )


def test_case_row_every_stated_uncertainty_drawn_each_sample_exact():
    table = frame(3)
    seed, n = 17, 16
    result = exosieve.invert_case(
        table, "Invented 2", ratio="D/H", measured=3 * R0, sigma=0.3 * R0, samples=n, seed=seed
    )
    assert result.status == "solved"
    assert result.total_initial == pytest.approx(exact_total(3.0), rel=1e-6)
    assert result.samples is not None and result.samples.counts["solved"] == n
    # The closed form at each sample's own draws, read back as compare() draws them for row 2.
    core = case_table_from_frame(table).to_core()
    for j in range(n):
        drawn = _core.case_values(core, 2, seed, j)
        m, t = drawn["planet_mass"], drawn["exobase_temperature"]
        assert m != MASS and t != T_EXO
        a_h = jeans_rate(N_H, t, M_H, m)
        alpha = jeans_rate(R0 * N_H, t, M_D, m) / (a_h * R0)
        exact = exact_total(result.samples.target[j] / R0, a_h, alpha)
        assert result.samples.total_initial[j] == pytest.approx(exact, rel=1e-6)
    # The row by index draws the same; another row draws others.
    by_index = exosieve.invert_case(
        table, 2, ratio="D/H", measured=3 * R0, sigma=0.3 * R0, samples=n, seed=seed
    )
    assert by_index.samples is not None
    assert np.array_equal(by_index.samples.total_initial, result.samples.total_initial)
    other = exosieve.invert_case(
        table, 1, ratio="D/H", measured=3 * R0, sigma=0.3 * R0, samples=n, seed=seed
    )
    assert other.samples is not None
    assert not np.array_equal(other.samples.target, result.samples.target)


def test_bad_input_is_refused_before_any_run(monkeypatch):
    runs: list[object] = []
    monkeypatch.setattr(inversion._core, "invert_case", lambda **k: runs.append(k))
    table = frame(2)
    for kwargs, text in [
        ({"case": "Nowhere"}, "no row is called 'Nowhere'"),
        ({"case": None}, "the table has 2 rows"),
        ({"case": 5}, "outside the table's rows 0..1"),
        ({"case": True}, "case must be"),
        ({"case": 0, "ratio": "D-H"}, "ratio must be 'numerator/denominator'"),
        ({"case": 0, "measured": -1.0}, "measured"),
        ({"case": 0, "sigma": 0.1, "lnsigma": 0.1}, "either sigma"),
        ({"case": 0, "sigma": -0.1}, "sigma must be >= 0"),
        ({"case": 0, "inventory_min": 0.0}, "inventory_min must be > 0"),
        ({"case": 0, "scaled": "H"}, "scaled must be a sequence"),
        ({"case": 0, "max_runs": 1}, "max_runs"),
        ({"case": 0, "progress": "yes"}, "progress must be a callable"),
    ]:
        arguments = {"ratio": "D/H", "measured": 3 * R0, **kwargs}
        with pytest.raises(ValueError, match=text):
            exosieve.invert_case(table, **arguments)
    assert runs == []
    monkeypatch.undo()
    # The core's own checks, also before any run: naming the species and the option.
    planet, exo, inventory, span = model(1e42)
    with pytest.raises(ValueError, match="'He' is not a species of the model"):
        exosieve.invert_ratio(planet, exo, inventory, span, ratio="He/H", measured=1.0)
    with pytest.raises(ValueError, match="must include"):
        exosieve.invert_ratio(
            planet, exo, inventory, span, ratio="D/H", measured=1e-4, scaled=["D"]
        )
    with pytest.raises(ValueError, match="search_factor"):
        exosieve.invert_ratio(
            planet, exo, inventory, span, ratio="D/H", measured=1e-4, search_factor=0.5
        )
    with pytest.raises(ValueError, match="case 'Invented 0'"):
        broken = frame(1)
        broken["exobase_temperature [K]"] = np.nan
        exosieve.invert_case(broken, ratio="D/H", measured=3 * R0)


def test_docstring_examples():
    result = doctest.testmod(inversion)
    assert result.attempted > 0 and result.failed == 0


def test_a_python_temperature_callable_runs_on_one_worker():
    # The same model with its constant temperature given as a Python callable.
    h0 = exact_total(3.0) / (1 + R0)
    exo = exosieve.PrescribedExobase(R_EXO, lambda t: T_EXO, {"H": N_H, "D": R0 * N_H})
    result = exosieve.invert_ratio(
        exosieve.Planet(MASS, RADIUS), exo, {"H": h0, "D": R0 * h0}, (0.0, SPAN),
        ratio="D/H", measured=3 * R0, sigma=0.1 * R0, samples=3, threads=2, rtol=1e-10,
    )  # fmt: skip
    assert result.status == "solved"
    assert result.total_initial == pytest.approx(exact_total(3.0), rel=1e-6)
    assert result.samples is not None and result.samples.counts["solved"] == 3
