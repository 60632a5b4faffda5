"""One case's history across species (plot.case_history, ``exosieve history``) and the
one-row-per-case table with units in its headers (export.comparison_table, ``exosieve table``).

Outside references: the result file as h5py and xarray read it (values and ``units``
attributes), astropy.units for the header units, astropy.constants (CODATA 2018 G) for the
escape speed the table gives, and the exact solution of a loss proportional to the inventory
(constant exobase temperature, densities following the inventory: N/N0 = exp(-t/tau)).
"""

import math

import numpy as np
import pandas as pd
import pytest

import exosieve
from exosieve import plot
from exosieve.catalogue import demo_catalogue_path
from exosieve.cli import main
from exosieve.constants import GYR, M_EARTH, MYR, R_EARTH
from exosieve.export import comparison_table, split_header

matplotlib = pytest.importorskip("matplotlib")
matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402

h5py = pytest.importorskip("h5py")
xr = pytest.importorskip("xarray")
u = pytest.importorskip("astropy.units")
astropy_constants = pytest.importorskip("astropy.constants")


@pytest.fixture(scope="module")
def sweep(tmp_path_factory):
    path = tmp_path_factory.mktemp("sweep") / "sweep.h5"
    exosieve.compare(demo_catalogue_path(), samples=12, seed=4, times=12, output=path)
    return path


# --- the table ------------------------------------------------------------------------------


def test_table_round_trips_values_and_units_against_the_file(sweep, tmp_path):
    result = exosieve.open_comparison(sweep)
    csv = tmp_path / "cases.csv"
    frame = comparison_table(result, csv)
    back = pd.read_csv(csv)
    assert list(back.columns) == list(frame.columns)
    assert len(back) == len(result) == 8
    checked = 0
    with h5py.File(sweep, "r") as f:
        species = [s.decode() if isinstance(s, bytes) else str(s) for s in f["species"][:]]
        for header in back.columns:
            name, unit = split_header(header)
            if unit is None:
                assert name in ("case", "error", "sample_error")
                continue
            base, column = name, None
            if name not in f:  # per species: <variable>_<species>
                for gas in species:
                    if name.endswith("_" + gas) and name[: -len(gas) - 1] in f:
                        base, column = name[: -len(gas) - 1], species.index(gas)
            if base not in f:  # from the summary (probability, percentiles)
                assert base.startswith(("probability_retained", "retained_fraction_p"))
                continue
            stored_unit = f[base].attrs["units"]
            stored_unit = stored_unit.decode() if isinstance(stored_unit, bytes) else stored_unit
            assert stored_unit == unit, header
            stored = f[base][: len(result)]
            stored = stored if column is None else stored[:, column]
            assert np.array_equal(back[header].to_numpy(dtype=float), stored, equal_nan=True), (
                header
            )
            checked += 1
    assert checked > 70  # every per-case number and every species' (8 species x 9)
    ds = xr.open_dataset(sweep, engine="h5netcdf")
    try:
        he = back.set_index("case")["final_retained_fraction_He [1]"]
        assert np.array_equal(
            he.to_numpy(), ds.final_retained_fraction.sel(species="He").values, equal_nan=True
        )
        assert ds.final_retained_fraction.attrs["units"] == "1"
        assert list(he.index) == [str(c) for c in ds.case.values]
    finally:
        ds.close()


def test_header_units_parse_with_astropy_and_give_the_escape_speed(sweep):
    frame = comparison_table(exosieve.open_comparison(sweep))
    units = {}
    for header in frame.columns:
        name, unit = split_header(header)
        if unit is not None:
            units[name] = u.Unit(unit)  # raises for a unit astropy does not read
    assert units["escape_speed"] == u.m / u.s
    assert units["escape_rate_start_H"] == 1 / u.s
    assert units["final_retained_fraction_He"] == u.dimensionless_unscaled
    # v_esc = sqrt(2 G M / r) with astropy's G (CODATA 2018), in the units the headers state.
    mass = frame["planet_mass [kg]"].to_numpy() * units["planet_mass"]
    radius = frame["exobase_radius [m]"].to_numpy() * units["exobase_radius"]
    expected = np.sqrt(2 * astropy_constants.G * mass / radius).to(units["escape_speed"])
    assert np.allclose(frame["escape_speed [m s-1]"], expected.value, rtol=1e-12, atol=0)
    assert frame.attrs["units"]["escape_speed [m s-1]"] == "m s-1"


def test_table_final_fraction_is_the_exact_exponential_decay(tmp_path):
    # Exobases at a constant temperature with densities following each inventory (invented
    # planets): dN/dt = -N/tau with tau = N0/Q0, so N/N0 = exp(-(t_end - t_start)/tau).
    n = 6
    cases = pd.DataFrame(
        {
            "case": [f"Tarn {k}" for k in range(n)],
            "planet_mass [M_earth]": [0.7] * n,
            "planet_radius [R_earth]": [0.85] * n,
            "exobase_altitude [km]": [500.0] * n,
            "exobase_density [m-3]": [1e10] * n,
            "exobase_temperature [K]": np.linspace(950.0, 1300.0, n),
            "inventory [particles]": [1e38] * n,
            "x_N2": [0.75] * n,
            "x_He": [0.2] * n,
            "x_O": [0.05] * n,
            "exobase_composition": ["bulk"] * n,
        }
    )
    result = exosieve.compare(cases, t_start=10 * MYR, t_end=4.5 * GYR, times=3, threads=1)
    frame = comparison_table(result, species=["He", "O"])
    for gas in ("He", "O"):
        tau = frame[f"efolding_time_{gas} [s]"].to_numpy()
        span = (frame["age_end [s]"] - frame["age_start [s]"]).to_numpy()
        fraction = frame[f"final_retained_fraction_{gas} [1]"].to_numpy()
        ran = np.isfinite(tau) & (fraction > 1e-3)
        assert ran.sum() >= 3
        if gas == "He":  # the helium of these planets is partly lost, not all or nothing
            assert ((fraction[ran] > 0.01) & (fraction[ran] < 0.99)).sum() >= 3
        assert np.allclose(fraction[ran], np.exp(-span[ran] / tau[ran]), rtol=1e-5, atol=0)
    assert not any(c.endswith("_N2 [1]") for c in frame.columns)  # only the species asked for


def test_table_with_samples_carries_probabilities_and_refuses_unknown_species(sweep):
    result = exosieve.open_comparison(sweep)
    frame = comparison_table(result, retain=0.25)
    summary = result.summarize(retain=0.25).set_index(["case", "species"])
    p = frame.set_index("case")["probability_retained_He [1]"]
    with_he = summary.xs("He", level="species").index
    assert len(with_he) >= 5
    for case in result.cases:
        if case in with_he:
            assert p[case] == summary.loc[(case, "He"), "probability_retained"]
        else:  # a case without helium has no probability of keeping it
            assert np.isnan(p[case])
    assert "retained_fraction_p95_He [1]" in frame.columns
    with pytest.raises(ValueError, match=r"species: \['Xe'\] are not in the comparison"):
        comparison_table(result, species=["Xe"])
    one = comparison_table(result, species="He")
    assert [c for c in one.columns if c.startswith("final_retained_fraction")] == [
        "final_retained_fraction_He [1]"
    ]
    with pytest.raises(ValueError, match="is the comparison's own result file"):
        comparison_table(result, sweep)
    assert exosieve.open_comparison(sweep).cases == result.cases  # left alone


def test_split_header():
    assert split_header("planet_mass [kg]") == ("planet_mass", "kg")
    assert split_header("escape_speed [m s-1]") == ("escape_speed", "m s-1")
    assert split_header("case") == ("case", None)


def test_cli_table_writes_the_same_table(sweep, tmp_path, capsys):
    out = tmp_path / "t.csv"
    assert main(["table", str(sweep), "-o", str(out), "--species", "He,N2"]) == 0
    assert "8 cases" in capsys.readouterr().out
    back = pd.read_csv(out)
    expected = comparison_table(exosieve.open_comparison(sweep), species=["He", "N2"])
    assert list(back.columns) == list(expected.columns)
    assert np.array_equal(
        back["depletion_time_He [s]"].to_numpy(),
        expected["depletion_time_He [s]"].to_numpy(),
        equal_nan=True,
    )


# --- the history plot -----------------------------------------------------------------------


def _lines_with_data(ax):
    return [ln for ln in ax.get_lines() if np.isfinite(np.asarray(ln.get_ydata(), float)).sum() > 1]


def test_case_history_draws_the_case_from_the_file(sweep):
    result = exosieve.open_comparison(sweep)
    fig = plot.case_history(result, "Ithrel b")
    top, bottom = fig.axes[:2]
    for ax in (top, bottom):
        assert "[" in ax.get_ylabel() and "]" in ax.get_ylabel()
    assert bottom.get_xlabel() == "stellar age [Gyr]"
    k = result.cases.index("Ithrel b")
    legend = [t.get_text() for t in top.get_legend().get_texts()]
    present = [s for s, x in zip(result.species, result["mole_fraction"][k], strict=True) if x > 0]
    assert [t for t in legend if t in result.species] == present
    # the H line is the file's retained fraction (solid and other pieces together)
    j = result.species.index("H")
    expected = result["retained_fraction"][k][:, j]
    pieces = [ln for ln in top.get_lines() if ln.get_color() == f"C{j}" and len(ln.get_xdata()) > 2]
    drawn = np.fmax.reduce([np.asarray(ln.get_ydata(), float) for ln in pieces])
    grid = np.isin(np.asarray(pieces[0].get_xdata()), result.times / GYR)
    ok = np.isfinite(expected) & (expected > 0)
    assert np.allclose(drawn[grid][ok], expected[ok], rtol=1e-12)
    # each depletion time is a vertical line with its label
    depleted = [
        s
        for s, t in zip(result.species, result["depletion_time"][k], strict=True)
        if math.isfinite(t)
    ]
    assert depleted  # Ithrel b loses its hydrogen
    texts = [t.get_text() for t in top.texts]
    for gas in depleted:
        assert f"{gas} depleted" in texts
    # the sample spread is drawn and said
    assert any("12 samples" in t for t in legend)
    line = bottom.get_lines()[0]
    on_grid = np.isin(np.asarray(line.get_xdata()), result.times / GYR)
    assert np.array_equal(
        np.asarray(line.get_ydata())[on_grid], result["exobase_temperature"][k], equal_nan=True
    )
    plt.close(fig)


def test_case_history_by_row_and_refusals(sweep):
    result = exosieve.open_comparison(sweep)
    fig = plot.case_history(result, 3)
    assert result.cases[3] in fig.axes[0].get_title()
    plt.close(fig)
    with pytest.raises(ValueError, match="case: no case 'Nowhere b'"):
        plot.case_history(result, "Nowhere b")
    with pytest.raises(ValueError, match="case: no row 99"):
        plot.case_history(result, 99)
    with pytest.raises(ValueError, match=r"species \['CO2'\] are not in case 'Maraud b'"):
        plot.case_history(result, "Maraud b", species=["CO2"])
    with pytest.raises(ValueError, match="percentiles must be"):
        plot.case_history(result, 0, percentiles=(95, 5))
    with pytest.raises(ValueError, match="result must be a Comparison or an EvolutionResult"):
        plot.case_history(object())


def test_case_history_of_an_evolution_marks_the_transition_regime():
    # A hot, light world whose hydrogen starts in the transition range of the Jeans
    # parameter (2.1 <= lambda < 3): its line starts dashed.
    planet = exosieve.Planet(0.1 * M_EARTH, 0.5 * R_EARTH)
    radius = 0.5 * R_EARTH + 300e3
    # lambda is inversely proportional to T: the temperature that gives lambda = 2.6
    temperature = float(exosieve.jeans_parameter(1000.0, "H", planet.mass, radius)) * 1000 / 2.6
    exobase = exosieve.PrescribedExobase(radius, temperature, {"H": 1e8, "O": 1e12})
    times = np.geomspace(10 * MYR, 1 * GYR, 30)
    run = exosieve.evolve(
        planet, exobase, {"H": 1e40, "O": 1e44}, (10 * MYR, 1 * GYR), t_eval=times
    )
    assert 2.1 <= run.jeans_parameter["H"][0] < 3.0
    fig = plot.case_history(run, "test world")
    top = fig.axes[0]
    assert top.get_title().startswith("test world")
    styles = {ln.get_linestyle() for ln in _lines_with_data(top) if ln.get_color() == "C0"}
    assert "--" in styles
    legend = [t.get_text() for t in top.get_legend().get_texts()]
    # H is a trace gas here (O is the bulk): the legend says what its lambda is, not that
    # the run left the Jeans regime; no dotted piece was drawn, so none is explained
    assert any(t.startswith("its $\\lambda$ in [2.1, 3)") for t in legend)
    assert not any("hydrodynamic" in t for t in legend)
    assert "hydrodynamic" not in top.get_title()
    plt.close(fig)


def test_cli_history_writes_a_png(sweep, tmp_path, capsys):
    out = tmp_path / "h.png"
    assert main(["history", str(sweep), "--case", "Sefir b", "-o", str(out)]) == 0
    assert out.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert main(["history", str(sweep), "--case", "5", "-o", str(out)]) == 0  # a row
    assert main(["history", str(sweep), "--case", "Nowhere b", "-o", str(out)]) == 2
    assert "no case 'Nowhere b'" in capsys.readouterr().err


# --- the existing charts, as they now read -------------------------------------------------


def test_covered_lines_are_widened_to_show():
    fig, ax = plt.subplots()
    x = np.geomspace(1.0, 10.0, 20)
    first, second = ax.loglog(x, np.ones(20), x, np.ones(20) * 1.001)
    third = ax.loglog(x, 1e-3 * x)[0]
    plot._show_hidden(ax)
    assert first.get_linewidth() > second.get_linewidth()
    assert third.get_linewidth() == second.get_linewidth()  # not covered: left alone
    plt.close(fig)


def test_jeans_flux_axis_spans_the_decades_asked_for():
    t = np.linspace(500.0, 3000.0, 100)
    radius = 1.01 * R_EARTH + 500e3
    ax = plot.jeans_flux_vs_temperature(t, ["H", "N2"], 1e12, 1.02 * M_EARTH, radius, decades=20)
    low, high = ax.get_ylim()
    top = float(exosieve.jeans_flux(1e12, 3000.0, "H", 1.02 * M_EARTH, radius))
    assert math.isclose(math.log10(high / low), 21.0, rel_tol=1e-12)
    assert math.isclose(high, 10 * top, rel_tol=1e-12)
    legend = [t.get_text() for t in ax.get_legend().get_texts()]
    assert "N2: below the axis throughout" in legend  # N2's flux is below 1e-5 m^-2 s^-1
    assert any(t.startswith("transition") for t in legend)  # H's lambda falls below 3
    with pytest.raises(ValueError, match="decades must be"):
        plot.jeans_flux_vs_temperature(t, ["H"], 1e12, M_EARTH, radius, decades=0)
    plt.close("all")


def test_depletion_markers_are_labelled():
    planet = exosieve.Planet(M_EARTH, R_EARTH)
    exobase = exosieve.PrescribedExobase(R_EARTH + 500e3, 2000.0, {"H": 1e12, "O": 1e12})
    times = np.geomspace(10 * MYR, 4 * GYR, 40)
    run = exosieve.evolve(
        planet, exobase, {"H": 1e38, "O": 1e44}, (10 * MYR, 4 * GYR), t_eval=times
    )
    assert run.depletion_time["H"] is not None
    ax = plot.histories(run, label=", hot")
    assert [t.get_text() for t in ax.texts] == ["H, hot < 0.001"]
    x = [ln.get_xdata()[0] for ln in ax.get_lines() if ln.get_linestyle() == ":"]
    assert np.allclose(x, run.depletion_time["H"] / GYR)
    plt.close("all")


def test_case_history_says_when_the_bulk_gas_is_hydrodynamic_and_unmodelled():
    # A hydrogen world at lambda = 1.5 (below the hydrodynamic threshold 2.1) with no
    # energy-limited model: its Jeans loss is not its loss, and the title says so.
    planet = exosieve.Planet(0.1 * M_EARTH, 0.5 * R_EARTH)
    radius = 0.5 * R_EARTH + 300e3
    temperature = float(exosieve.jeans_parameter(1000.0, "H", planet.mass, radius)) * 1000 / 1.5
    exobase = exosieve.PrescribedExobase(radius, temperature, {"H": 1e8})
    run = exosieve.evolve(planet, exobase, {"H": 1e44}, (10 * MYR, 1 * GYR))
    assert set(run.regime_names) == {"hydrodynamic"}
    fig = plot.case_history(run)
    assert "bulk gas hydrodynamic without an energy-limited model" in fig.axes[0].get_title()
    plt.close(fig)
    cases = pd.DataFrame(
        {
            "case": ["runaway", "kept"],
            "planet_mass [M_earth]": [0.1, 1.0],
            "planet_radius [R_earth]": [0.5, 1.0],
            "exobase_altitude [km]": [300.0, 500.0],
            "exobase_density [m-3]": [1e8, 1e12],
            "exobase_temperature [K]": [temperature, 1000.0],
            "inventory [particles]": [1e44, 1e44],
            "x_H": [1.0, 1.0],
            "exobase_composition": ["bulk", "bulk"],
        }
    )
    result = exosieve.compare(cases, times=4)
    assert list(result["hydrodynamic_unmodelled"]) == [1, 0]
    titles = [plot.case_history(result, name).axes[0].get_title() for name in ("runaway", "kept")]
    assert "hydrodynamic" in titles[0] and "hydrodynamic" not in titles[1]
    plt.close("all")


def test_escape_rate_axis_keeps_to_the_relevant_decades():
    # The exobase cools from 2500 K to 300 K: O's Jeans rate falls by some hundred decades,
    # which would squeeze H's history into a line; the axis stops 25 decades below the top.
    planet = exosieve.Planet(M_EARTH, R_EARTH)
    cooling = exosieve.TabulatedTemperature([10 * MYR, 1 * GYR], [2500.0, 300.0])
    exobase = exosieve.PrescribedExobase(R_EARTH + 500e3, cooling, {"H": 1e10, "O": 1e12})
    times = np.geomspace(10 * MYR, 4 * GYR, 40)
    run = exosieve.evolve(
        planet, exobase, {"H": 1e44, "O": 1e44}, (10 * MYR, 4 * GYR), t_eval=times
    )
    rates = run.escape_rate["O"]
    assert np.all(rates > 0) and np.log10(rates.max() / rates.min()) > 25
    ax = plot.histories(run, "escape_rate")
    low, high = ax.get_ylim()
    top = max(run.escape_rate["H"].max(), rates.max())
    assert math.isclose(low, top / 1e25, rel_tol=1e-12) and high > top
    plt.close("all")


def test_cli_history_of_an_evolution_file(tmp_path, capsys):
    planet = exosieve.Planet(M_EARTH, R_EARTH)
    exobase = exosieve.PrescribedExobase(R_EARTH + 500e3, 1500.0, {"H": 1e11, "O": 1e12})
    run = exosieve.evolve(planet, exobase, {"H": 1e38, "O": 1e44}, (10 * MYR, 1 * GYR))
    assert run.depletion_time["H"] is not None
    run.to_hdf5(tmp_path / "run.h5")
    out = tmp_path / "run.png"
    assert main(["history", str(tmp_path / "run.h5"), "-o", str(out), "--case", "my run"]) == 0
    assert out.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    reopened = exosieve.open_result(tmp_path / "run.h5")
    fig = plot.case_history(reopened, "my run")
    assert "H depleted" in [t.get_text() for t in fig.axes[0].texts]
    plt.close(fig)
