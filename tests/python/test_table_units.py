"""Units of case tables beyond the built-in words (any astropy unit of the right dimension),
astropy Table and QTable inputs, and Quantity arguments in any unit of their dimension.

Expected values come from astropy itself (its unit conversions; astropy.constants for the
IAU 2015 Resolution B3 nominal values and the CODATA Avogadro constant), not from exosieve.
"""

from __future__ import annotations

import os
import subprocess
import sys

import numpy as np
import pytest

import exosieve
from exosieve import _units
from exosieve import constants as c
from exosieve.archive import archive_cases, archive_sample_path, read_archive
from exosieve.batch import compare
from exosieve.catalogue import (
    case_table_from_frame,
    frame_from_table,
    load_cases,
    read_case_table,
)

pd = pytest.importorskip("pandas")
u = pytest.importorskip("astropy.units")
const = pytest.importorskip("astropy.constants")
table_module = pytest.importorskip("astropy.table")
QTable, Table, MaskedColumn = table_module.QTable, table_module.Table, table_module.MaskedColumn

VALUES = np.array([0.3, 1.7, 42.0])


def _frame(column: str, values: np.ndarray) -> pd.DataFrame:
    """A minimal table around one column (three invented cases)."""
    frame = pd.DataFrame({"case": ["A", "B", "C"], "x_N2": [1.0, 1.0, 1.0]})
    frame[column] = values
    return frame


@pytest.mark.parametrize(
    ("quantity", "unit", "expected_per_unit"),
    [
        # IAU 2015 Resolution B3 nominal masses (GM / G) and radii, through astropy.constants
        ("planet_mass", "Mjup", lambda: (const.GM_jup / const.G).to_value(u.kg)),
        ("planet_mass", "Mearth", lambda: (const.GM_earth / const.G).to_value(u.kg)),
        ("planet_mass", "earthMass", lambda: (const.GM_earth / const.G).to_value(u.kg)),
        ("planet_radius", "Rjup", lambda: const.R_jup.to_value(u.m)),
        ("star_mass", "solMass", lambda: (const.GM_sun / const.G).to_value(u.kg)),
        ("star_luminosity", "solLum", lambda: const.L_sun.to_value(u.W)),
        # astropy's own conversions
        ("semi_major_axis", "AU", lambda: u.AU.to(u.m)),
        ("semi_major_axis", "pc", lambda: u.pc.to(u.m)),
        ("age_start", "kyr", lambda: u.kyr.to(u.s)),
        ("exobase_altitude", "Mm", lambda: u.Mm.to(u.m)),
        ("homopause_density", "1e17 m-3", lambda: 1e17),
        ("exobase_density", "1 / cm3", lambda: u.Unit("cm-3").to(u.Unit("m-3"))),
        (
            "temperature_reference_flux",
            "erg / (s cm2)",
            lambda: (u.erg / u.s / u.cm**2).to(u.W / u.m**2),
        ),
        ("surface_pressure", "hPa", lambda: u.hPa.to(u.Pa)),
        ("surface_pressure", "mbar", lambda: u.mbar.to(u.Pa)),
        ("given_loss_reference_flux", "mW / m2", lambda: (u.mW / u.m**2).to(u.W / u.m**2)),
        ("recombination_photon_energy", "keV", lambda: u.keV.to(u.J)),
        # a count in kmol: astropy's kmol -> mol times the Avogadro constant (CODATA, exact)
        ("inventory", "kmol", lambda: u.kmol.to(u.mol) * const.N_A.value),
        ("x_N2_sigma", "%", lambda: u.percent.to(u.one)),
    ],
)
def test_astropy_unit_header_gives_astropys_si_values(quantity, unit, expected_per_unit):
    frame = _frame(f"{quantity} [{unit}]", VALUES)
    si = case_table_from_frame(frame).column(quantity)
    np.testing.assert_allclose(si, VALUES * expected_per_unit(), rtol=1e-15, atol=0)


def test_mjup_column_equals_the_same_column_in_kg():
    # IAU 2015 B3: M_jup = GM_jup / G, values from astropy.constants
    kg = VALUES * (const.GM_jup / const.G).to_value(u.kg)
    in_mjup = case_table_from_frame(_frame("planet_mass [Mjup]", VALUES))
    in_kg = case_table_from_frame(_frame("planet_mass [kg]", kg))
    np.testing.assert_allclose(in_mjup.column("planet_mass"), in_kg.column("planet_mass"), 1e-15)
    assert in_mjup.units["planet_mass"] == "Mjup"  # messages show the unit as typed


def test_csv_header_with_astropy_units(tmp_path):
    path = tmp_path / "cases.csv"
    path.write_text(
        "case,planet_mass [Mearth],given_loss_reference_flux [erg / (s cm2)],star_age [Myr],x_N2\n"
        "A,2,500,30,1\n"
    )
    table = read_case_table(path)
    # astropy's conversions (Mearth: IAU 2015 B3 GM_earth / G)
    assert table.column("planet_mass")[0] == pytest.approx(2 * u.Mearth.to(u.kg), rel=1e-15)
    flux = 500 * (u.erg / u.s / u.cm**2).to(u.W / u.m**2)
    assert table.column("given_loss_reference_flux")[0] == pytest.approx(flux, rel=1e-15)
    assert table.column("star_age")[0] == pytest.approx(30 * u.Myr.to(u.s), rel=1e-15)
    assert table.units["given_loss_reference_flux"] == "erg / (s cm2)"


def test_built_in_words_do_not_import_astropy(tmp_path):
    # The fixed words keep their fast path: reading them never imports astropy.
    path = tmp_path / "cases.csv"
    path.write_text("case,planet_mass [M_earth],exobase_altitude [km],star_age [Myr],x_N2\n")
    script = (
        "import sys; from exosieve.catalogue import read_case_table; "
        f"read_case_table({str(path)!r}); print('astropy' in sys.modules)"
    )
    out = subprocess.run(
        [sys.executable, "-c", script], capture_output=True, text=True, check=True, env=os.environ
    )
    assert out.stdout.strip() == "False"


def test_wrong_dimension_is_refused_naming_column_unit_and_dimension():
    with pytest.raises(ValueError) as caught:
        case_table_from_frame(_frame("planet_mass [km / s]", VALUES))
    message = str(caught.value)
    assert "column 'planet_mass [km / s]'" in message
    assert "unit 'km / s' does not measure planet_mass (which is in kg)" in message
    assert "speed" in message  # astropy's physical type of km / s
    with pytest.raises(ValueError, match=r"'deg_C' is not a multiple of K \(an offset scale\)"):
        case_table_from_frame(_frame("exobase_temperature [deg_C]", VALUES))
    with pytest.raises(ValueError, match="unit 'K' does not measure planet_mass"):
        case_table_from_frame(_frame("planet_mass [K]", VALUES))  # a built-in word


def test_unknown_unit_names_the_closest_units():
    with pytest.raises(ValueError) as caught:
        case_table_from_frame(_frame("planet_mass [Mearht]", VALUES))
    message = str(caught.value)
    assert "column 'planet_mass [Mearht]': unknown unit 'Mearht'" in message
    assert "Did you mean Mearth?" in message  # astropy's suggestion
    assert "built-in words: kg, M_earth" in message
    with pytest.raises(ValueError, match=r"unknown unit '-1 kg'|not a positive multiple"):
        case_table_from_frame(_frame("planet_mass [-1 kg]", VALUES))


def test_without_astropy_the_message_says_it_is_needed(monkeypatch):
    _units.factor.cache_clear()
    monkeypatch.setitem(sys.modules, "astropy.units", None)  # import astropy.units fails
    try:
        with pytest.raises(ValueError, match=r"unknown unit 'Mearth': units other than the bui"):
            case_table_from_frame(_frame("planet_mass [Mearth]", VALUES))
        with pytest.raises(ValueError, match=r"need astropy \(pip install astropy\)"):
            case_table_from_frame(_frame("planet_mass [Mearth]", VALUES))
        table = case_table_from_frame(_frame("planet_mass [M_earth]", VALUES))  # built in
        assert table.units["planet_mass"] == "M_earth"
    finally:
        _units.factor.cache_clear()


def _earth_like(mass_header: str, mass: float) -> pd.DataFrame:
    """One invented Earth-like case with a prescribed exobase."""
    return pd.DataFrame(
        {
            "case": ["A"],
            mass_header: [mass],
            "planet_radius [R_earth]": [1.0],
            "exobase_altitude [km]": [500.0],
            "exobase_composition": ["bulk"],
            "exobase_density [cm-3]": [1e7],
            "exobase_temperature [K]": [900.0],
            "inventory [particles]": [1e37],
            "x_N2": [1.0],
        }
    )


def test_bad_value_is_shown_in_the_astropy_unit_typed(tmp_path):
    shown = r"column 'planet_mass': must be > 0, got -1 Mjup \(-1.898"  # astropy's M_jup
    with pytest.raises(ValueError, match=shown):
        compare(_earth_like("planet_mass [Mjup]", -1.0), times=[c.GYR])
    path = tmp_path / "bad.csv"
    _earth_like("planet_mass [Mjup]", -1.0).to_csv(path, index=False)
    with pytest.raises(ValueError, match=r"line 2 \(case 'A'\), " + shown):
        compare(path, times=[c.GYR])
    table = QTable.from_pandas(
        _earth_like("planet_mass [kg]", -1.0).drop(columns="planet_mass [kg]")
    )
    table.add_column([-2.0] * u.Mjup, name="planet_mass", index=1)
    with pytest.raises(
        ValueError,
        match=r"row 0 \(case 'A'\), column 'planet_mass': must "
        r"be > 0, got -2 jupiterMass \(-3.79",
    ):
        compare(table, times=[c.GYR])


def test_qtable_in_km_equals_the_dataframe_in_km():
    frame = _earth_like("planet_mass [M_earth]", 1.0)
    table = QTable.from_pandas(frame.drop(columns="exobase_altitude [km]"))
    table.add_column([500.0] * u.km, name="exobase_altitude", index=3)
    assert frame_from_table(table).columns[3] == "exobase_altitude [km]"
    from_table, from_frame = load_cases(table), load_cases(frame)
    assert from_table.columns.keys() == from_frame.columns.keys()
    for name, values in from_frame.columns.items():
        np.testing.assert_array_equal(from_table.columns[name], values, err_msg=name)
    assert from_table.text_columns == from_frame.text_columns
    assert from_table.source == "QTable"
    # and the runs are the same, bit for bit
    a = compare(table, times=[c.GYR]).summary
    b = compare(frame, times=[c.GYR]).summary
    pd.testing.assert_frame_equal(a, b, check_exact=True)


def test_table_columns_with_units_and_masked_cells():
    # A Table (not a QTable): Column.unit gives the header's unit; a masked cell is empty.
    table = Table(
        {
            "case": ["A", "B"],
            "planet_mass": MaskedColumn([1.0, 2.0], mask=[False, True], unit=u.Mjup),
            "planet_radius [R_earth]": [1.0, 1.1],  # no unit: the header as it is
            "x_N2": [1.0, 1.0],
        }
    )
    cases = load_cases(table)
    mass = cases.column("planet_mass")
    assert mass[0] == pytest.approx((const.GM_jup / const.G).to_value(u.kg), rel=1e-15)
    assert np.isnan(mass[1])
    np.testing.assert_allclose(
        cases.column("planet_radius"), np.array([1.0, 1.1]) * const.R_earth.value, rtol=1e-15
    )
    assert cases.source == "Table"


def test_scaled_unit_that_prints_rounded_is_converted_exactly():
    scale = 1.234567890123456e17  # astropy writes it as 1.23457e+17
    table = QTable(
        {"case": ["A"], "homopause_density": [2.0] * u.Unit(scale / u.m**3), "x_N2": [1.0]}
    )
    expected = (2.0 * u.Unit(scale / u.m**3)).to_value(u.Unit("m-3"))  # astropy's conversion
    assert load_cases(table).column("homopause_density")[0] == pytest.approx(expected, rel=1e-15)


def test_table_refusals_name_the_column():
    both = QTable({"case": ["A"], "planet_mass [kg]": [1.0] * u.kg})
    with pytest.raises(ValueError, match=r"QTable column 'planet_mass \[kg\]' has the unit"):
        load_cases(both)
    speed = QTable({"case": ["A"], "planet_mass": [1.0] * (u.km / u.s)})
    with pytest.raises(
        ValueError, match=r"column 'planet_mass \[km / s\]': unit 'km / s' does not"
    ):
        load_cases(speed)
    wide = QTable({"case": ["A"], "planet_mass": [[1.0, 2.0]] * u.kg})
    with pytest.raises(ValueError, match=r"QTable column 'planet_mass' holds values of shape"):
        load_cases(wide)
    with pytest.raises(
        ValueError, match="cases must be a CSV path, a pandas DataFrame, an astropy"
    ):
        load_cases(3)


def test_archive_qtable_with_units_equals_the_archive_dataframe():
    frame, _, _ = read_archive(archive_sample_path())
    table = QTable.from_pandas(frame)
    for name in ("pl_bmasse", "pl_bmasseerr1", "pl_bmasseerr2"):  # given in Jupiter masses
        table[name] = (np.asarray(frame[name], dtype=float) * u.Mearth).to(u.Mjup)
    table["pl_orbsmax"] = (np.asarray(frame["pl_orbsmax"], dtype=float) * u.AU).to(u.km)
    table["st_lum"] = u.Dex(np.asarray(frame["st_lum"], dtype=float), u.dex(u.Lsun))
    table["st_age"] = np.asarray(frame["st_age"], dtype=float) * u.Gyr
    from_table = archive_cases(table).cases
    from_frame = archive_cases(frame).cases
    assert list(from_table.columns) == list(from_frame.columns)
    for name in from_frame.columns:
        if from_frame[name].dtype.kind == "f":
            np.testing.assert_allclose(from_table[name], from_frame[name], rtol=1e-14, err_msg=name)
        else:
            assert from_table[name].tolist() == from_frame[name].tolist(), name
    table["pl_rade"] = np.asarray(frame["pl_rade"], dtype=float) * u.s
    with pytest.raises(ValueError, match=r"QTable column 'pl_rade': unit 's' does not measure"):
        archive_cases(table)


def test_quantity_arguments_take_any_unit_of_their_dimension():
    # escape speed sqrt(2 G M / r): the same from Mjup/Rjup quantities as from their SI values
    # (astropy's conversion), and a quantity of the wrong dimension is refused by name
    in_si = exosieve.escape_speed(2.0 * u.Mjup.to(u.kg), 1.3 * u.Rjup.to(u.m))
    assert exosieve.escape_speed(2.0 * u.Mjup, 1.3 * u.Rjup) == pytest.approx(in_si, rel=1e-15)
    grams = exosieve.escape_speed((2.0 * u.Mjup).to(u.g), (1.3 * u.Rjup).to(u.cm))
    assert grams == pytest.approx(in_si, rel=1e-15)
    with pytest.raises(ValueError, match=r"planet_mass: cannot convert .* to \[kg\]"):
        exosieve.escape_speed(2.0 * u.km, 1.0 * u.m)


def test_dimensionless_count_in_a_qtable_is_particles():
    # astropy has no "particles": a count is dimensionless (u.one, or scaled: 1e30)
    frame = _earth_like("planet_mass [M_earth]", 1.0)
    table = QTable.from_pandas(frame.drop(columns="inventory [particles]"))
    table["inventory"] = [1e37] * u.one
    assert frame_from_table(table).columns[-1] == "inventory [particles]"
    assert load_cases(table).column("inventory")[0] == 1e37
    table["inventory"] = [1e7] * u.Unit(1e30)
    assert frame_from_table(table).columns[-1] == "inventory [1e+30]"
    assert load_cases(table).column("inventory")[0] == pytest.approx(1e37, rel=1e-15)
    with pytest.raises(ValueError, match=r"unit '1' does not measure inventory"):
        load_cases(frame.rename(columns={"inventory [particles]": "inventory [1]"}))  # as before
