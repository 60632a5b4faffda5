"""Archive tables to case tables, split-normal uncertainties and the retention map.

The sample table (data/archive_layout_sample.csv) is invented, in the archive layout.
"""

import math
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import exosieve
from exosieve import archive, plot
from exosieve.archive import archive_cases, archive_sample_path, read_archive
from exosieve.catalogue import case_table_from_frame, load_cases, read_case_table
from exosieve.constants import K_B, M_EARTH, R_EARTH

ROOT = Path(__file__).resolve().parents[2]


@pytest.fixture(scope="module")
def converted():
    return archive_cases(archive_sample_path())


@pytest.fixture(scope="module")
def sweep(converted):
    return exosieve.compare(converted.cases, samples=24, seed=3, threads=2)


def _row(cases, name):
    return cases[cases["case"] == name].iloc[0]


def _archive_frame():
    frame, _, _ = read_archive(archive_sample_path())
    return frame


# --- reading and converting ------------------------------------------------------------------


def test_rows_kept_dropped_and_limited_are_reported(converted):
    names = list(converted.cases["case"])
    assert "Vessir d" not in names  # pl_bmasselim = 1: an upper limit, dropped by default
    assert names.count("Ebrant b") == 1  # the default_flag 0 set left out
    assert [(n.planet, n.column, n.kind, n.value) for n in converted.limited] == [
        ("Vessir d", "pl_bmasse", "upper limit", 3.0)
    ]
    reasons = {(d.planet, d.reason.split(":")[0].split(" is")[0]) for d in converted.dropped}
    assert reasons == {("Vessir d", "pl_bmasse"), ("Ebrant b", "default_flag 0")}
    assert converted.limited[0].line == 22  # the file's line of that row
    text = converted.report()
    assert "limit: Vessir d (line 22): pl_bmasse is an upper limit (3); dropped" in text


def test_values_and_asymmetric_errors_are_carried_over(converted):
    frame = _archive_frame()
    archive_row = frame[(frame.pl_name == "Vessir b")].iloc[0]
    row = _row(converted.cases, "Vessir b")
    same = pytest.approx  # the unit converted to SI and back: equal to rounding
    assert row["planet_mass [M_earth]"] == same(archive_row.pl_bmasse) == 1.60
    assert row["planet_mass_sigma_upper [M_earth]"] == same(archive_row.pl_bmasseerr1) == 0.40
    assert row["planet_mass_sigma_lower [M_earth]"] == same(-archive_row.pl_bmasseerr2) == 0.30
    assert row["planet_radius_sigma_lower [R_earth]"] == same(0.04, rel=1e-15)
    assert row["semi_major_axis [au]"] == same(0.061, rel=1e-15)
    # No errors given: no widths (a fixed value).
    assert np.isnan(_row(converted.cases, "Ebrant c")["planet_mass_sigma_upper [M_earth]"])
    assert row["star"] == "Vessir"


def test_luminosity_and_units_against_astropy(converted):
    # IAU 2015 Resolution B3 nominal L_sun, M_earth (from GM_earth and CODATA G), R_earth, au:
    # astropy.constants; the case table read back by exosieve's own reader, in SI.
    constants = pytest.importorskip("astropy.constants")
    table = load_cases(converted.cases)
    k = table.names.index("Vessir b")
    assert table.column("star_luminosity")[k] == pytest.approx(
        10**-0.45 * constants.L_sun.si.value, rel=1e-14
    )
    assert constants.L_sun.si.value == 3.828e26  # IAU 2015 B3 nominal solar luminosity
    assert table.column("planet_mass")[k] == pytest.approx(1.6 * constants.M_earth.si.value, 1e-9)
    assert table.column("planet_radius")[k] == pytest.approx(1.12 * constants.R_earth.si.value)
    assert table.column("semi_major_axis")[k] == pytest.approx(0.061 * constants.au.si.value)
    # The widths of log10 L (+-0.02 dex) as linear widths: L (10^0.02 - 1) and L (1 - 10^-0.02).
    lum = 10**-0.45 * constants.L_sun.si.value
    assert table.column("star_luminosity_sigma_upper")[k] == pytest.approx(lum * (10**0.02 - 1))
    assert table.column("star_luminosity_sigma_lower")[k] == pytest.approx(lum * (1 - 10**-0.02))


def test_equilibrium_temperature_from_the_star_when_missing(converted):
    # T_eq = (L / (16 pi sigma a^2))^(1/4), zero albedo, full redistribution (worked closed
    # form), with astropy's Stefan-Boltzmann constant (CODATA 2018, exact in the SI).
    constants = pytest.importorskip("astropy.constants")
    scipy_constants = pytest.importorskip("scipy.constants")
    assert archive.STEFAN_BOLTZMANN == pytest.approx(scipy_constants.Stefan_Boltzmann, rel=1e-15)
    lum = 10**-1.55 * constants.L_sun.si.value
    a = 0.029 * constants.au.si.value
    t_eq = (lum / (16 * math.pi * constants.sigma_sb.si.value * a**2)) ** 0.25
    row = _row(converted.cases, "Talmoran b")
    assert row["exobase_temperature [K]"] == pytest.approx(4.0 * t_eq, rel=1e-13)
    assert np.isnan(row["exobase_temperature_sigma_upper [K]"])
    # Given pl_eqt: 4 T_eq, and its errors scaled into the exobase temperature's widths.
    row = _row(converted.cases, "Vessir b")
    assert row["exobase_temperature [K]"] == 4 * 760.0
    assert row["exobase_temperature_sigma_upper [K]"] == 4 * 25.0
    assert row["exobase_temperature_sigma_lower [K]"] == 4 * 20.0
    notes = {note.rule.split(":")[0]: note.planets for note in converted.defaults}
    assert notes["T_eq computed from the star"] == ["Talmoran b"]


def test_composition_by_planet_class(converted):
    rocky = _row(converted.cases, "Vessir b")  # 1.12 R_earth
    gas = _row(converted.cases, "Vessir c")  # 2.40 R_earth
    assert (rocky["x_N2"], rocky["x_CO2"], rocky["x_H2O"], rocky["x_H2"]) == (0.8, 0.1, 0.1, 0)
    # Solar He/H by number 10^(10.93 - 12) (Asplund et al. 2009, from memory), H as H2:
    # x_He = 2 y / (1 + 2 y) = 0.1455 (worked by hand: y = 0.0851).
    y = 10 ** (10.93 - 12)
    assert gas["x_He"] == pytest.approx(2 * y / (1 + 2 * y), rel=1e-15)
    assert gas["x_He"] == pytest.approx(0.1455, abs=5e-4)
    assert gas["x_H2"] + gas["x_He"] == pytest.approx(1.0, abs=1e-15)
    assert (gas["x_N2"], gas["x_H2O"]) == (0.0, 0.0)
    assert rocky["surface_pressure [bar]"] == 1.0 and np.isnan(rocky["inventory [particles]"])
    # Gas-rich inventory: 1 % of the planet mass over the mean particle mass.
    mean = gas["x_H2"] * exosieve.species("H2").mass + gas["x_He"] * exosieve.species("He").mass
    assert gas["inventory [particles]"] == pytest.approx(0.01 * 7.1 * M_EARTH / mean, rel=1e-12)
    assert rocky["comment"].startswith("rocky") and gas["comment"].startswith("gas-rich")


def test_homopause_scaling_and_earth(converted):
    # 13 scale heights k T_eq / (m g) of the row's bulk gas at its surface gravity.
    row = _row(converted.cases, "Vessir b")
    mean = sum(
        row[f"x_{s}"] * exosieve.species(s).mass for s in ("N2", "CO2", "H2O") if row[f"x_{s}"]
    )
    g = exosieve.constants.G * 1.6 * M_EARTH / (1.12 * R_EARTH) ** 2
    assert row["homopause_altitude [km]"] * 1e3 == pytest.approx(
        13 * K_B * 760 / (mean * g), rel=1e-12
    )
    assert row["homopause_density [m-3]"] == 1e19
    # Earth (T_eq 255 K, air: N2/O2/Ar) gives about its homopause near 100 km (common practice;
    # from memory: 100-110 km), through an override of the composition by our own columns.
    earth = pd.DataFrame(
        {
            "pl_name": ["Earth-like"],
            "pl_bmasse": [1.0],
            "pl_rade": [1.0],
            "pl_eqt": [255.0],
            "x_N2": [0.781],
            "x_O2": [0.2095],
            "x_Ar": [0.0095],
        }
    )
    out = archive_cases(earth)
    altitude = out.cases.loc[0, "homopause_altitude [km]"]
    assert 90.0 < altitude < 115.0
    assert (out.cases.loc[0, "x_O2"], out.cases.loc[0, "x_CO2"]) == (0.2095, 0.0)
    assert "composition from the archive" in out.cases.loc[0, "comment"]


def test_own_columns_override_the_defaults_row_by_row():
    frame = _archive_frame()
    frame["exobase_temperature [K]"] = np.where(frame.pl_name == "Vessir b", 1500.0, np.nan)
    frame["exobase_altitude [km]"] = np.where(frame.pl_name == "Ebrant c", 400.0, np.nan)
    frame["exobase_density [m-3]"] = np.where(frame.pl_name == "Ebrant c", 1e13, np.nan)
    # A prescribed exobase states its own composition (the bulk one is no exobase's).
    frame["exobase_x_N2 [1]"] = np.where(frame.pl_name == "Ebrant c", 0.9, np.nan)
    frame["exobase_x_H2O [1]"] = np.where(frame.pl_name == "Ebrant c", 0.1, np.nan)
    out = archive_cases(frame)
    vessir = _row(out.cases, "Vessir b")
    assert vessir["exobase_temperature [K]"] == 1500.0
    assert np.isnan(vessir["exobase_temperature_sigma_upper [K]"])  # the default's widths go
    assert _row(out.cases, "Vessir c")["exobase_temperature [K]"] == 4 * 430.0
    ebrant = _row(out.cases, "Ebrant c")
    assert ebrant["exobase_altitude [km]"] == 400.0
    assert np.isnan(ebrant["homopause_altitude [km]"]) and np.isnan(
        ebrant["homopause_density [m-3]"]
    )
    notes = {note.column: note.planets for note in out.defaults}
    assert "Vessir b" not in notes["exobase_temperature"]
    assert "Ebrant c" not in notes["homopause_altitude"]
    # Either kind of row runs.
    result = exosieve.compare(out.cases, threads=2)
    errors = result.summary.groupby("case")["error"].first()
    assert errors["Ebrant c"] == "" and errors["Vessir b"] == ""


def test_limits_kept_as_bounds():
    out = archive_cases(archive_sample_path(), limits="bound")
    row = _row(out.cases, "Vessir d")
    assert row["planet_mass [M_earth]"] == 3.0
    assert np.isnan(row["planet_mass_sigma_upper [M_earth]"])
    assert out.limited[0].action == "kept with the limit as its value"
    assert [d.planet for d in out.dropped] == ["Ebrant b"]


def test_rows_without_a_star_or_a_temperature():
    out = archive_cases(archive_sample_path())
    ordel = _row(out.cases, "Ordel b")
    assert np.isnan(ordel["semi_major_axis [au]"]) and np.isnan(ordel["star_mass [M_sun]"])
    frame = _archive_frame()
    frame.loc[frame.pl_name == "Ordel b", "pl_eqt"] = np.nan
    out = archive_cases(frame)
    assert "Ordel b" not in list(out.cases["case"])
    assert any(d.planet == "Ordel b" and "no pl_eqt" in d.reason for d in out.dropped)


@pytest.mark.parametrize(
    ("column", "value", "message"),
    [
        ("pl_bmasseerr1", -0.1, "column 'pl_bmasseerr1': must be >= 0"),
        ("pl_radeerr2", 0.2, "column 'pl_radeerr2': must be <= 0"),
        ("pl_bmasselim", 2.0, "column 'pl_bmasselim': a limit flag is -1, 0 or 1, got 2.0"),
        ("pl_rade", "big", "column 'pl_rade': 'big' is not a finite number"),
        ("pl_bmasse", -1.0, "column 'pl_bmasse': must be > 0, got -1.0"),
        ("pl_eqt", 0.0, "column 'pl_eqt': must be > 0, got 0.0"),
    ],
)
def test_bad_archive_values_are_refused_naming_column_and_line(tmp_path, column, value, message):
    frame = pd.read_csv(archive_sample_path(), comment="#", dtype=str, keep_default_na=False)
    frame.loc[0, column] = str(value)
    path = tmp_path / "bad.csv"
    path.write_text("# a comment\n" + frame.to_csv(index=False))
    with pytest.raises(ValueError, match="line 3 " + message.replace("(", r"\(").split(",")[0]):
        archive_cases(path)


def test_bad_options_are_refused():
    with pytest.raises(ValueError, match="limits must be one of"):
        archive_cases(archive_sample_path(), limits="maybe")
    with pytest.raises(ValueError, match="radius_valley must be > 0"):
        archive_cases(archive_sample_path(), radius_valley=-1.0)
    with pytest.raises(ValueError, match="exobase_temperature_factor must be finite"):
        archive_cases(archive_sample_path(), exobase_temperature_factor=float("nan"))
    with pytest.raises(ValueError, match="envelope_mass_fraction must be < 1"):
        archive_cases(archive_sample_path(), envelope_mass_fraction=1.0)
    with pytest.raises(ValueError, match="no column 'pl_name'"):
        archive_cases(pd.DataFrame({"pl_rade": [1.0]}))
    with pytest.raises(ValueError, match="archive must be a CSV path or a pandas DataFrame"):
        archive_cases(3)
    frame = _archive_frame()
    frame["exobase_temperature [km]"] = 1.0
    with pytest.raises(ValueError, match="unit 'km' does not measure exobase_temperature"):
        archive_cases(frame)


def test_csv_round_trip_reads_as_a_case_table(converted, tmp_path):
    path = converted.to_csv(tmp_path / "cases.csv")
    table = read_case_table(path)
    assert table.names == list(converted.cases["case"])
    k = table.names.index("Vessir b")
    assert table.column("planet_mass_sigma_upper")[k] == pytest.approx(0.4 * M_EARTH)


# --- split normal ----------------------------------------------------------------------------


def _split_normal_moments(mode, lo, hi):
    """Mean and variance of the split normal by quadrature of its density (scipy.integrate),
    an outside check of the closed form mode + sqrt(2/pi)(hi - lo), (1 - 2/pi)(hi - lo)^2 +
    hi lo (the two-piece normal of Wallis 2014, Stat. Sci. 29:106, doi:10.1214/13-STS417)."""
    integrate = pytest.importorskip("scipy.integrate")
    norm = math.sqrt(2 / math.pi) / (lo + hi)

    def pdf(x):
        s = lo if x < mode else hi
        return norm * math.exp(-((x - mode) ** 2) / (2 * s * s))

    span = (mode - 40 * lo, mode + 40 * hi)
    mean = sum(integrate.quad(lambda x: x * pdf(x), *part)[0] for part in _halves(mode, span))
    second = sum(
        integrate.quad(lambda x: (x - mean) ** 2 * pdf(x), *part)[0] for part in _halves(mode, span)
    )
    return mean, second


def _halves(mode, span):
    return [(span[0], mode), (mode, span[1])]


def test_split_normal_closed_form_against_quadrature():
    for mode, lo, hi in [(1.0, 0.1, 0.3), (5.0, 2.0, 0.5), (0.0, 1.0, 1.0)]:
        mean, var = _split_normal_moments(mode, lo, hi)
        assert mean == pytest.approx(mode + math.sqrt(2 / math.pi) * (hi - lo), rel=1e-10)
        assert var == pytest.approx((1 - 2 / math.pi) * (hi - lo) ** 2 + hi * lo, rel=1e-9)


def _split_frame(upper, lower, mass=1.0):
    return pd.DataFrame(
        {
            "case": ["a", "b"],
            "planet_mass [M_earth]": [mass, 1.2],
            "planet_mass_sigma_upper [M_earth]": upper,
            "planet_mass_sigma_lower [M_earth]": lower,
            "planet_radius [R_earth]": [1.0, 1.0],
            "exobase_altitude [km]": [500.0, 500.0],
            "exobase_density [m-3]": [1e13, 1e13],
            "exobase_temperature [K]": [900.0, 1500.0],
            "inventory [particles]": [1e37, 1e37],
            "x_N2": [0.75, 0.75],
            "x_He": [0.25, 0.25],
            "exobase_composition": ["bulk", "bulk"],
        }
    )


def test_split_normal_draws_in_sample_input():
    n = 2000
    result = exosieve.compare(
        _split_frame([0.3, 0.0], [0.1, 0.0]), samples=n, seed=5, threads=2, times=2
    )
    assert result.inputs == ["planet_mass"]  # the pair is one input
    drawn = result["sample_input"][:, :, 0] / M_EARTH
    assert list(result["input_uncertain"][:, 0]) == [1, 1]
    mean, var = 1.0 + math.sqrt(2 / math.pi) * 0.2, (1 - 2 / math.pi) * 0.04 + 0.03
    assert abs(drawn[0].mean() - mean) < 5 * math.sqrt(var / n)
    assert drawn[0].var() == pytest.approx(var, rel=5 * math.sqrt(3 / n))
    assert (drawn[0] < 1.0).mean() == pytest.approx(0.25, abs=5 * math.sqrt(0.1875 / n))
    assert np.all(drawn[1] == 1.2)  # zero widths: held at the value
    assert "split normal" in result.config["options"]["distributions"]


def test_split_normal_bad_widths_are_refused_naming_column_and_row():
    with pytest.raises(ValueError, match=r"row 0 \(case 'a'\), column 'planet_mass_sigma_lower'"):
        exosieve.compare(_split_frame([0.3, 0.0], [-0.1, 0.0]), threads=1)
    with pytest.raises(ValueError, match="column 'planet_mass_sigma_lower': a split normal"):
        exosieve.compare(_split_frame([0.3, 0.0], [np.nan, 0.0]), threads=1)
    both = _split_frame([0.3, 0.0], [0.1, 0.0])
    both["planet_mass_sigma [M_earth]"] = [0.1, 0.1]
    with pytest.raises(ValueError, match="both give the uncertainty of 'planet_mass'"):
        exosieve.compare(both, threads=1)
    alone = _split_frame([0.3, 0.0], [0.1, 0.0]).drop(columns=["planet_mass_sigma_lower [M_earth]"])
    with pytest.raises(ValueError, match="needs the column 'planet_mass_sigma_lower'"):
        exosieve.compare(alone, threads=1)
    wrong_unit = _split_frame([0.3, 0.0], [0.1, 0.0]).rename(
        columns={"planet_mass_sigma_upper [M_earth]": "planet_mass_sigma_upper [K]"}
    )
    with pytest.raises(ValueError, match="does not measure planet_mass_sigma_upper"):
        case_table_from_frame(wrong_unit)


def test_columns_list_the_split_normal(capsys):
    from exosieve.cli import main

    assert main(["columns"]) == 0
    assert "_sigma_upper+_sigma_lower" in capsys.readouterr().out
    readme = (ROOT / "README.md").read_text()
    assert "_sigma_upper" in readme


# --- the comparison, the map and the command line --------------------------------------------


def test_compare_takes_the_converted_table(sweep, converted):
    summary = sweep.summary
    assert set(summary["case"]) == set(converted.cases["case"])
    rocky = summary[(summary.case == "Ebrant c")]
    assert set(rocky.species) == {"N2", "CO2", "H2O"}
    assert (rocky.error == "").all()


def test_retention_map_colours_are_the_probabilities(sweep, converted):
    matplotlib = pytest.importorskip("matplotlib")
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    fig = plot.retention_map(sweep, converted.cases)
    panels = [ax for ax in fig.axes if ax.get_label() != "<colorbar>"]
    species = [ax.get_title().split(" ")[0] for ax in panels]
    assert species == ["N2", "CO2", "H2O", "H2", "He"]  # one per species, none empty
    assert all(ax.collections and len(ax.collections[0].get_offsets()) for ax in panels)
    table = load_cases(converted.cases)
    flux = table.column("star_luminosity") / (4 * np.pi * table.column("semi_major_axis") ** 2)
    summary = sweep.summary.set_index(["case", "species"])
    for ax, name in zip(panels, species, strict=True):
        assert "[" in ax.get_xlabel() and "[W m$^{-2}$]" in ax.get_ylabel()
        assert ax.get_xscale() == "log" and ax.get_yscale() == "log"
        offsets = np.asarray(ax.collections[0].get_offsets())
        colours = np.asarray(ax.collections[0].get_array())
        for (x, y), value in zip(offsets, colours, strict=True):
            at = np.isclose(flux, y, rtol=1e-12) & np.isclose(
                table.column("planet_radius") / R_EARTH, x, rtol=1e-12
            )
            assert at.sum() == 1
            k = int(np.nonzero(at)[0][0])
            assert value == summary.loc[(table.names[k], name), "probability_retained"]
    h2o = panels[2]
    assert "1 not placed" in h2o.get_title()  # Ordel b has no star
    colourbar = [ax for ax in fig.axes if ax.get_label() == "<colorbar>"][0]
    assert "[1]" in colourbar.get_ylabel()
    fig = plot.retention_map(sweep, converted.cases, species=["H2O"], x="mass")
    assert "M$_\\oplus$" in fig.axes[0].get_xlabel()
    with pytest.raises(ValueError, match="not the one the comparison was run on"):
        plot.retention_map(sweep, converted.cases.iloc[:3])
    with pytest.raises(ValueError, match="x must be 'radius' or 'mass'"):
        plot.retention_map(sweep, converted.cases, x="age")
    with pytest.raises(ValueError, match="species 'Xe' is not in the comparison"):
        plot.retention_map(sweep, converted.cases, species=["Xe"])
    plt.close("all")


def test_command_line_converts_and_maps(tmp_path):
    pytest.importorskip("matplotlib")
    # The child imports the package this test imports (the source tree or the installed one).
    package_parent = str(Path(exosieve.__file__).resolve().parents[1])
    env = dict(os.environ, PYTHONPATH=package_parent, MPLBACKEND="Agg")
    cases = tmp_path / "cases.csv"

    def run(*args):
        return subprocess.run(
            [sys.executable, "-m", "exosieve", *args],
            capture_output=True,
            text=True,
            env=env,
            cwd=tmp_path,
        )

    done = run("from-archive", str(archive_sample_path()), "-o", str(cases))
    assert done.returncode == 0, done.stderr
    assert "limit: Vessir d (line 22): pl_bmasse is an upper limit (3); dropped" in done.stdout
    assert "dropped: Ebrant b" in done.stdout and "default: homopause_altitude" in done.stdout
    assert read_case_table(cases).names[0] == "Vessir b"
    again = run("from-archive", str(archive_sample_path()), "-o", str(cases))
    assert again.returncode == 2 and "exists; pass --overwrite" in again.stderr
    sweep = run("sweep", str(cases), "-o", "sweep.h5", "--samples", "4", "--threads", "2")
    assert sweep.returncode == 0, sweep.stderr
    drawn = run("map", "sweep.h5", str(cases), "-o", "map.png")
    assert drawn.returncode == 0, drawn.stderr
    assert (tmp_path / "map.png").stat().st_size > 0


def test_docstring_examples_run():
    import doctest

    result = doctest.testmod(archive)
    assert result.attempted >= 2 and result.failed == 0
