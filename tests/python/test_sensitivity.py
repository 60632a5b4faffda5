"""Sobol' sensitivity indices: the estimators against closed forms and scipy, and the Saltelli
sweep end to end (drawn inputs stored next to outputs, indices, file, chart, command line)."""

from __future__ import annotations

import math

import matplotlib
import numpy as np
import pandas as pd
import pytest
import scipy.integrate
import scipy.stats

import exosieve
from exosieve import _core, compare, open_comparison
from exosieve.cli import main
from exosieve.sensitivity import saltelli_inputs, sobol_indices

matplotlib.use("Agg")

YEAR = 3.15576e7  # Julian year [s]
T_END = 4.5e9 * YEAR


def ishigami(x: np.ndarray, a: float = 7.0, b: float = 0.1) -> np.ndarray:
    """Ishigami & Homma (1990)."""
    return np.sin(x[..., 0]) + a * np.sin(x[..., 1]) ** 2 + b * x[..., 2] ** 4 * np.sin(x[..., 0])


def ishigami_indices(a: float = 7.0, b: float = 0.1) -> tuple[np.ndarray, np.ndarray]:
    """Closed-form first-order and total indices (Sobol' & Levitan 1999)."""
    pi = math.pi
    v1 = 0.5 * (1 + b * pi**4 / 5) ** 2
    v2 = a**2 / 8
    v13 = b**2 * pi**8 * (1 / 18 - 1 / 50)
    v = v1 + v2 + v13
    return np.array([v1 / v, v2 / v, 0.0]), np.array([(v1 + v13) / v, v2 / v, v13 / v])


def test_ishigami_indices_as_the_closed_form():
    rng = np.random.default_rng(2026)
    a, b = rng.uniform(-math.pi, math.pi, (2, 1 << 15, 3))
    r = sobol_indices(ishigami(saltelli_inputs(a, b)), ["x1", "x2", "x3"], resamples=300)
    s1, st = ishigami_indices()
    # Standard error from the 95 % interval's width; within 4 of them and within 0.02.
    for value, low, high, exact in [
        (r.first_order, r.first_order_low, r.first_order_high, s1),
        (r.total, r.total_low, r.total_high, st),
    ]:
        se = (high - low) / (2 * 1.96)
        assert np.all(np.abs(value - exact) < 4 * se), (value, exact, se)
        assert np.all(np.abs(value - exact) < 0.02)
    assert r.rows_used == 1 << 15
    assert r.inputs == ["x1", "x2", "x3"]
    # The values quoted with the function, from memory: 0.3139, 0.4424, 0; 0.5576, 0.4424, 0.2437.
    np.testing.assert_allclose(s1, [0.3139, 0.4424, 0.0], atol=2e-4)
    np.testing.assert_allclose(st, [0.5576, 0.4424, 0.2437], atol=2e-4)


@pytest.mark.parametrize("function", ["ishigami", "linear"])
def test_same_estimates_as_scipy_on_the_same_runs(function):
    # scipy.stats.sobol_indices (Saltelli 2010 first order, Jansen total, on centred outputs)
    # given the very same f(A), f(B), f(A_B^(i)).
    rng = np.random.default_rng(7)
    n, k = 2048, 3
    a, b = rng.normal(size=(2, n, k))
    x = saltelli_inputs(a, b)
    y = ishigami(x) if function == "ishigami" else x @ np.array([1.0, -2.0, 0.5]) + 3.0
    ours = sobol_indices(y, k, resamples=0)
    f_ab = y[2 * n :].reshape(k, 1, n)
    theirs = scipy.stats.sobol_indices(
        func={"f_A": y[None, :n], "f_B": y[None, n : 2 * n], "f_AB": f_ab}, n=n
    )
    np.testing.assert_allclose(ours.first_order, theirs.first_order, rtol=1e-12, atol=1e-14)
    np.testing.assert_allclose(ours.total, theirs.total_order, rtol=1e-12, atol=1e-14)
    assert np.all(np.isnan(ours.first_order_low))  # no bootstrap asked for


def test_saltelli_inputs_layout_and_leading_axes():
    a = np.arange(6.0).reshape(3, 2)
    b = -a - 1
    x = saltelli_inputs(a, b)
    assert x.shape == (12, 2)
    np.testing.assert_array_equal(x[:3], a)
    np.testing.assert_array_equal(x[3:6], b)
    np.testing.assert_array_equal(x[6:9], np.column_stack([b[:, 0], a[:, 1]]))  # A_B^(1)
    np.testing.assert_array_equal(x[9:], np.column_stack([a[:, 0], b[:, 1]]))  # A_B^(2)
    # Many outputs at once: the same as one at a time, on any number of threads.
    rng = np.random.default_rng(3)
    a, b = rng.uniform(-math.pi, math.pi, (2, 400, 3))
    x = saltelli_inputs(a, b)
    y = np.stack([ishigami(x, a=v) for v in (7.0, 3.0)])
    both = sobol_indices(y, 3, resamples=50, threads=2)
    alone = sobol_indices(y[1], 3, resamples=50, threads=1)
    assert both.total.shape == (2, 3)
    np.testing.assert_array_equal(both.total_high[1], alone.total_high)
    np.testing.assert_array_equal(both.first_order_low[1], alone.first_order_low)


@pytest.mark.parametrize(
    ("call", "text"),
    [
        (lambda: sobol_indices(np.zeros(11), 3), "outputs must have a last axis of N"),
        (lambda: sobol_indices(np.zeros(10), 0), "inputs must be a whole number >= 1"),
        (lambda: sobol_indices(np.zeros(10), True), "inputs must be a count"),
        (lambda: sobol_indices(np.zeros(10), 3, confidence=1.5), "confidence must be in"),
        (lambda: sobol_indices(np.zeros(10), 3, resamples=-1), "resamples must be a whole"),
        (lambda: sobol_indices(np.zeros(10), 3, resolution=-1.0), "resolution must be >= 0"),
        (lambda: sobol_indices(["a"] * 10, 3), "outputs"),
        (lambda: saltelli_inputs(np.zeros((3, 2)), np.zeros((3, 3))), "b must have the shape"),
        (lambda: saltelli_inputs(np.zeros(3), np.zeros(3)), "a must have shape (N, K)"),
    ],
)
def test_bad_arguments_are_refused_by_name(call, text):
    with pytest.raises(ValueError, match=None) as err:
        call()
    assert text in str(err.value)


def _closed_form_table(temperature_sigma: float | None = None) -> pd.DataFrame:
    """An invented Earth-like planet whose He inventory is about half lost (a prescribed exobase
    following the inventories, constant temperature): then N/N0 = exp(-c n / N_tot), so
    g = ln(-ln(N/N0)) = ln c + ln n - ln N_tot is additive in the log-normal inputs."""
    table = {
        "case": ["Tessaly b"],
        "planet_mass [M_earth]": [1.0],
        "planet_radius [R_earth]": [1.0],
        "exobase_altitude [km]": [500.0],
        "exobase_composition": ["bulk"],
        "exobase_density [m-3]": [1e13],
        "exobase_density_lnsigma": [0.3],
        "exobase_temperature [K]": [875.0],
        "inventory [particles]": [3e35],
        "inventory_lnsigma": [0.2],
        "x_N2": [0.75],
        "x_He": [0.25],
    }
    if temperature_sigma is not None:
        table["exobase_temperature_sigma [K]"] = [temperature_sigma]
    return pd.DataFrame(table)


def test_saltelli_sweep_against_the_closed_form_of_exponential_loss():
    base = 2048
    r = compare(_closed_form_table(), t_end=T_END, samples=base, design="saltelli", seed=5)
    assert r.inputs == ["exobase_density", "inventory"]
    assert r.input_units == ["m-3", "particles"]
    assert r.samples == base * 4
    he = r.species.index("He")
    kept = r["sample_retained_fraction"][0, :, he]
    x = r["sample_input"][0]
    # The stored inputs are those of each run: g minus ln n - ln N_tot is the same in every run
    # (worked analytic solution of dN/dt = -(4 pi r^2 n phi / N_tot) N).
    g = np.log(-np.log(kept))
    offset = g - np.log(x[:, 0]) + np.log(x[:, 1])
    assert np.std(offset) < 1e-9 * np.std(g)
    # A and B are the Monte Carlo draws 2r and 2r + 1 of the case.
    table = exosieve.catalogue.load_cases(_closed_form_table()).to_core()
    for run, draw in [(0, 0), (base, 1), (base + 5, 11), (2 * base + 3, 6)]:
        values = _core.case_values(table, 0, 5, draw)
        assert x[run, 1] == values["inventory"]
    assert x[2 * base + 3, 0] == _core.case_values(table, 0, 5, 7)["exobase_density"]
    # Indices of g: the variance shares of the two log-normal widths, exactly (additive).
    exact = np.array([0.3**2, 0.2**2]) / (0.3**2 + 0.2**2)
    s = sobol_indices(g, r.inputs, resamples=300)
    for value, low, high in [
        (s.first_order, s.first_order_low, s.first_order_high),
        (s.total, s.total_low, s.total_high),
    ]:
        se = (high - low) / (2 * 1.96)
        assert np.all(np.abs(value - exact) < 4 * se), (value, exact)
    # Indices of the retention indicator 1{N/N0 > 0.5} = 1{U - V < d}, U = ln(n/n0),
    # V = ln(N_tot/N_tot0): Var E[1 | U] = E[Phi((d - U)/s_V)^2] - P^2 by scipy.integrate.quad.
    g0 = math.log(-math.log(r["final_retained_fraction"][0, he]))
    d = math.log(math.log(2.0)) - g0
    sd_u, sd_v = 0.3, 0.2
    p = scipy.stats.norm.cdf(d / math.hypot(sd_u, sd_v))

    def share(sd_given: float, sd_other: float, sign: float) -> float:
        def integrand(z: float) -> float:
            return (
                scipy.stats.norm.pdf(z)
                * scipy.stats.norm.cdf((d - sign * sd_given * z) / sd_other) ** 2
            )

        second, _ = scipy.integrate.quad(integrand, -12, 12, epsabs=1e-13)
        return (second - p * p) / (p * (1 - p))

    s_u, s_v = share(sd_u, sd_v, 1.0), share(sd_v, sd_u, -1.0)
    frame = r.sensitivity("retained", resamples=400)
    rows = frame[frame["species"] == "He"].set_index("input")
    assert rows["output_mean"].iloc[0] == pytest.approx(p, abs=4 * math.sqrt(p * (1 - p) / base))
    for name, s1, st in [("exobase_density", s_u, 1 - s_v), ("inventory", s_v, 1 - s_u)]:
        row = rows.loc[name]
        for value, low, high, exact_value in [
            (row["first_order"], row["first_order_low"], row["first_order_high"], s1),
            (row["total"], row["total_low"], row["total_high"], st),
        ]:
            se = (high - low) / (2 * 1.96)
            assert abs(value - exact_value) < 4 * se, (name, value, exact_value, se)
    # N2 is kept in every run: no variance, no indices.
    n2 = frame[frame["species"] == "N2"]
    assert n2["total"].isna().all()
    assert (n2["output_mean"] == 1.0).all()


def test_saltelli_sweep_file_threads_and_monte_carlo_inputs(tmp_path):
    cases = _closed_form_table(temperature_sigma=15.0)
    second = cases.iloc[0].copy()
    second["case"] = "Tessaly c"
    second["exobase_temperature_sigma [K]"] = np.nan  # held fixed in this row
    cases = pd.concat([cases, second.to_frame().T], ignore_index=True)
    path = tmp_path / "sweep.h5"
    options = {"t_end": T_END, "samples": 64, "design": "saltelli", "seed": 9}
    on_file = compare(cases, output=path, threads=2, chunk_size=1, **options)
    in_memory = compare(cases, threads=1, **options)
    reopened = open_comparison(path)
    assert reopened.design == "saltelli"
    assert reopened.inputs == ["exobase_density", "inventory", "exobase_temperature"]
    np.testing.assert_array_equal(reopened["sample_input"], in_memory["sample_input"])
    np.testing.assert_array_equal(
        reopened["sample_retained_fraction"], in_memory["sample_retained_fraction"]
    )
    np.testing.assert_array_equal(reopened["input_uncertain"], [[1, 1, 1], [1, 1, 0]])
    a = reopened.sensitivity(resamples=100)
    b = in_memory.sensitivity(resamples=100)
    pd.testing.assert_frame_equal(a, b)
    assert on_file.samples == 64 * 5
    # The row that holds the temperature fixed: its A_B^(temperature) runs are not run (NaN),
    # and its temperature index is NaN.
    he = reopened.species.index("He")
    block = reopened["sample_retained_fraction"][:, 4 * 64 : 5 * 64, he]
    assert np.isnan(block[1]).all()
    assert np.isfinite(block[0]).all()
    fixed = a[(a["case"] == "Tessaly c") & (a["input"] == "exobase_temperature")]
    assert fixed["total"].isna().all()
    assert not fixed["uncertain"].any()
    # xarray reads the inputs with their units.
    import xarray as xr

    with xr.open_dataset(path, engine="h5netcdf") as ds:
        assert list(ds["input"].values) == reopened.inputs
        assert list(ds["input_unit"].values) == ["m-3", "particles", "K"]
        assert ds["sample_input"].dims == ("case", "sample", "input")
    # A plain Monte Carlo sweep stores its drawn inputs too: run j is the case's draw j.
    mc = compare(cases, t_end=T_END, samples=5, seed=9)
    table = exosieve.catalogue.load_cases(cases).to_core()
    values = _core.case_values(table, 0, 9, 3)
    assert mc["sample_input"][0, 3, 2] == values["exobase_temperature"]
    assert mc["sample_input"][1, 3, 2] == 875.0  # held at its table value
    with pytest.raises(ValueError, match="design='saltelli'"):
        mc.sensitivity()


def test_saltelli_design_refusals():
    plain = _closed_form_table().drop(columns=["exobase_density_lnsigma", "inventory_lnsigma"])
    with pytest.raises(ValueError, match="needs uncertain inputs"):
        compare(plain, t_end=T_END, samples=4, design="saltelli")
    with pytest.raises(ValueError, match="needs samples > 0"):
        compare(_closed_form_table(), t_end=T_END, design="saltelli")
    with pytest.raises(ValueError, match="design must be 'monte_carlo' or 'saltelli'"):
        compare(_closed_form_table(), t_end=T_END, samples=4, design="sobol")
    r = compare(_closed_form_table(), t_end=T_END, samples=8, design="saltelli")
    with pytest.raises(ValueError, match="output must be one of retained, fraction"):
        r.sensitivity("fractions")


def test_sensitivity_chart_reads_at_a_glance():
    import matplotlib.pyplot as plt

    from exosieve.plot import sensitivity_chart

    r = compare(_closed_form_table(15.0), t_end=T_END, samples=128, design="saltelli", seed=1)
    frame = r.sensitivity("fraction", resamples=100)
    axes = sensitivity_chart(frame, species=["He", "N2"])
    try:
        assert len(axes) == 2
        labels = [t.get_text() for t in axes[0].get_yticklabels()]
        assert set(labels) == {
            "exobase density [m-3]",
            "exobase temperature [K]",
            "inventory [particles]",
        }
        he = frame[frame["species"] == "He"]
        top = he.loc[he["total"].idxmax()]
        assert labels[0] == f"{str(top['input']).replace('_', ' ')} [{top['unit']}]"
        widths = sorted(p.get_width() for p in axes[0].patches)
        np.testing.assert_allclose(widths, np.sort(np.r_[he["first_order"], he["total"]]))
        assert "[1]" in axes[0].get_xlabel()
        assert "no spread" in " ".join(t.get_text() for t in axes[1].texts)
    finally:
        plt.close(axes[0].figure)
    with pytest.raises(ValueError, match="case 'nowhere' is not in the indices"):
        sensitivity_chart(frame, case="nowhere")


def test_command_line_sensitivity(tmp_path, capsys):
    table = tmp_path / "cases.csv"
    _closed_form_table(15.0).to_csv(table, index=False)
    out = tmp_path / "sweep.h5"
    assert (
        main(["sweep", str(table), "-o", str(out), "--samples", "64", "--design", "saltelli", "-q"])
        == 0
    )
    chart, csv = tmp_path / "drivers.png", tmp_path / "indices.csv"
    code = main(
        ["sensitivity", str(out), "--resamples", "100", "--chart", str(chart), "--csv", str(csv)]
    )
    text = capsys.readouterr().out
    assert code == 0
    assert chart.stat().st_size > 0
    assert "exobase_temperature [K]" in text
    assert "Tessaly b, N2: does not vary over the samples" in text
    written = pd.read_csv(csv)
    expected = open_comparison(out).sensitivity(resamples=100)
    np.testing.assert_allclose(written["total"], expected["total"], equal_nan=True)
    assert main(["sensitivity", str(out), "--case", "nowhere"]) == 2
    assert "no case ['nowhere']" in capsys.readouterr().err
