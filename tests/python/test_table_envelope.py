"""Case-table rows with an H/He envelope (core_mass, envelope_fraction), against single
evolve() runs of the same invented sub-Neptunes."""

from __future__ import annotations

import math

import numpy as np
import pytest

import exosieve
from exosieve import constants as c
from exosieve.batch import compare
from exosieve.catalogue import case_table_template_path, load_cases
from exosieve.cli import main

pd = pytest.importorskip("pandas")

NAN = float("nan")
TIMES = [100 * c.MYR, 500 * c.MYR, 2 * c.GYR]
T_START, T_END = 10 * c.MYR, 4 * c.GYR
STAR_MASS, STAR_LUMINOSITY = 0.75 * c.M_SUN, 0.3 * c.L_SUN
ORBIT = 0.05 * c.AU
SPECIES = {"H2": 0.85, "He": 0.15}
# Invented sub-Neptunes of an invented star: a light core with a thin envelope (stripped), a
# heavier one with a thicker envelope (kept), and a rocky planet given by mass and radius in
# the same table (no envelope).
ROWS = [
    {"case": "thin", "core": 1.5, "f": 0.005},
    {"case": "thick", "core": 6.0, "f": 0.05},
    {"case": "rocky", "mass": 1.5, "radius": 1.14},
]


def frame() -> pd.DataFrame:
    n = len(ROWS)
    data = {
        "case": [r["case"] for r in ROWS],
        "planet_mass [M_earth]": [r.get("mass", NAN) for r in ROWS],
        "planet_radius [R_earth]": [r.get("radius", NAN) for r in ROWS],
        "core_mass [M_earth]": [r.get("core", NAN) for r in ROWS],
        "envelope_fraction [1]": [r.get("f", NAN) for r in ROWS],
        "semi_major_axis [au]": [ORBIT / c.AU] * n,
        "star_mass [M_sun]": [STAR_MASS / c.M_SUN] * n,
        "star_luminosity [L_sun]": [STAR_LUMINOSITY / c.L_SUN] * n,
        "exobase_altitude [km]": [1000.0] * n,
        "exobase_composition": ["bulk"] * n,
        "exobase_density [m-3]": [1e13] * n,
        "temperature_reference [K]": [1000.0] * n,
        "temperature_reference_flux [W m-2]": [4.6e-3] * n,
        "temperature_exponent [1]": [0.5] * n,
        "temperature_min [K]": [300.0] * n,
        "temperature_max [K]": [10_000.0] * n,
        "heating_efficiency [1]": [0.15] * n,
        "surface_pressure [bar]": [1e3] * n,
    }
    for name, x in SPECIES.items():
        data[f"x_{name}"] = [x] * n
    return pd.DataFrame(data)


def single_run(row: dict[str, object]) -> exosieve.EvolutionResult:
    """The row's model built by hand and run with evolve()."""
    star = exosieve.Star(STAR_MASS, STAR_LUMINOSITY)
    envelope = None
    if "core" in row:
        core = float(row["core"]) * c.M_EARTH  # type: ignore[arg-type]
        f = float(row["f"])  # type: ignore[arg-type]
        envelope = exosieve.Envelope(core, f)
        flux = STAR_LUMINOSITY / (4 * math.pi * ORBIT**2)
        mass = core / (1 - f)
        radius = float(exosieve.envelope_planet_radius(core, f, flux, T_START))
    else:
        mass = float(row["mass"]) * c.M_EARTH  # type: ignore[arg-type]
        radius = float(row["radius"]) * c.R_EARTH  # type: ignore[arg-type]
    planet = exosieve.Planet(mass, radius, semi_major_axis=ORBIT, star=star)
    history = exosieve.XuvTemperature(1000.0, 4.6e-3, 0.5, 300.0, 10_000.0)
    exobase = exosieve.PrescribedExobase(
        radius + 1000e3, history, {n: 1e13 * x for n, x in SPECIES.items()}
    )
    # Hydrostatic column of the planet at the start: N = P 4 pi R^2 / (g m_mean), g = G M / R^2.
    m_mean = sum(x * exosieve.species(n).mass for n, x in SPECIES.items())
    total = 1e8 * 4 * np.pi * radius**2 / (c.G * mass / radius**2 * m_mean)
    return exosieve.evolve(
        planet,
        exobase,
        {n: total * x for n, x in SPECIES.items()},
        (T_START, T_END),
        t_eval=[T_START, *TIMES, T_END],
        rtol=1e-6,
        hydrodynamic=exosieve.EnergyLimitedEscape(efficiency=0.15),
        envelope=envelope,
    )


def test_envelope_rows_reproduce_evolve() -> None:
    result = compare(frame(), times=TIMES, t_start=T_START, t_end=T_END, rtol=1e-6, threads=2)
    assert list(result["error"]) == [""] * len(ROWS)
    for k, row in enumerate(ROWS):
        single = single_run(row)
        for j, name in enumerate(result.species):
            expected = single.inventory[name] / single.inventory[name][0]
            np.testing.assert_allclose(
                result["retained_fraction"][k, :, j], expected[1:-1], rtol=1e-12, atol=0.0
            )
        assert result["planet_mass"][k] == pytest.approx(
            single.config["planet"]["mass_kg"], rel=1e-15
        )
        assert result["exobase_radius"][k] == pytest.approx(single.exobase_radius[0], rel=1e-15)
        if single.stripping_time is None:
            assert math.isnan(result["stripping_time"][k])
        else:
            assert result["stripping_time"][k] == pytest.approx(single.stripping_time, rel=1e-12)
        end = single.planet_radius[-1] if single.planet_radius is not None else None
        assert result["planet_radius_end"][k] == pytest.approx(
            end if end is not None else result["planet_radius"][k], rel=1e-15
        )
    # The thin envelope is lost, to the bare core's R_E (M/M_E)^0.25; the thick one is kept.
    assert np.isfinite(result["stripping_time"][0])
    assert T_START < result["stripping_time"][0] < T_END
    assert result["planet_radius_end"][0] == pytest.approx(1.5**0.25 * c.R_EARTH, rel=1e-14)
    assert math.isnan(result["stripping_time"][1])
    assert result["planet_radius_end"][1] < result["planet_radius"][1]
    assert math.isnan(result["stripping_time"][2])


def test_envelope_results_in_the_sweep_file(tmp_path: pytest.TempPathFactory) -> None:
    path = tmp_path / "sweep.h5"  # type: ignore[operator]
    compare(frame(), times=TIMES, t_start=T_START, t_end=T_END, output=path)
    back = exosieve.open_comparison(path)
    assert np.isfinite(back["stripping_time"][0])
    assert math.isnan(back["stripping_time"][2])
    import h5py

    with h5py.File(path, "r") as f:
        assert f["stripping_time"].attrs["units"] in ("s", b"s")
        assert f["planet_radius_end"].attrs["units"] in ("m", b"m")


@pytest.mark.parametrize(
    ("change", "message"),
    [
        ({"planet_mass [M_earth]": 2.0}, "column 'planet_mass': give either 'planet_mass'"),
        ({"envelope_fraction [1]": NAN}, "column 'envelope_fraction': no value given"),
        ({"envelope_fraction [1]": 1.0}, "column 'envelope_fraction': must be < 1, got 1"),
        ({"core_mass [M_earth]": -1.0}, r"column 'core_mass': must be > 0, got -1 M_earth"),
        ({"heating_efficiency [1]": NAN}, "column 'heating_efficiency': no value given"),
        ({"semi_major_axis [au]": NAN}, "column 'semi_major_axis': no value given"),
    ],
)
def test_bad_envelope_rows_are_refused_naming_the_column(
    change: dict[str, float], message: str
) -> None:
    table = frame().iloc[:1].copy()
    for column, value in change.items():
        table[column] = [value]
    with pytest.raises(ValueError, match=message):
        compare(table, times=TIMES, t_start=T_START, t_end=T_END)


def test_template_has_an_envelope_row_that_runs() -> None:
    table = load_cases(case_table_template_path())
    rows = np.isfinite(table.columns["core_mass"])
    assert rows.sum() == 1
    result = compare(case_table_template_path(), times=4)
    row = int(np.nonzero(rows)[0][0])
    assert not result["error"][row]
    assert np.isfinite(result["planet_radius_end"][row])


def test_columns_command_lists_the_envelope(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["columns"]) == 0
    out = capsys.readouterr().out
    assert "core_mass" in out and "envelope_fraction" in out
