"""Case-table rows whose upper atmosphere is a thermosphere, against single evolve() runs."""

from __future__ import annotations

import numpy as np
import pytest

import exosieve
from exosieve import constants as c
from exosieve.batch import compare
from exosieve.catalogue import case_table_template_path, load_cases
from exosieve.cli import main

pd = pytest.importorskip("pandas")

NAN = float("nan")
SPECIES = {"N2": 0.78, "O": 0.219898, "He": 1e-4, "H": 2e-6}
TIMES = [100 * c.MYR, 1 * c.GYR, 4.5 * c.GYR]
T_START, T_END = 10 * c.MYR, 4.5 * c.GYR
MASS, RADIUS = 0.4 * c.M_EARTH, 0.75 * c.R_EARTH
STAR = {"ratio": 10**-3.5, "time": 100 * c.MYR, "index": 1.23}

# Invented planets: isothermal and diffusion-limited; Bates with a rising temperature and
# diffusion limiting; the same Jeans only with Chapman-Enskog parameters; Bates with the XUV
# temperature law of a Sun-like star.
ROWS = [
    {"case": "iso", "T": 600.0, "diff": NAN, "source": ""},
    {"case": "bates", "T": 700.0, "T_end": 1000.0, "bates": True, "diff": 1.0, "source": ""},
    {
        "case": "bates jeans",
        "T": 700.0,
        "T_end": 1000.0,
        "bates": True,
        "diff": 0.0,
        "source": "chapman_enskog",
    },
    {"case": "xuv", "xuv": True, "bates": True, "diff": 1.0, "source": "measured"},
]


def frame() -> pd.DataFrame:
    n = len(ROWS)

    def col(key: str) -> list[float]:
        return [float(r[key]) if key in r else NAN for r in ROWS]  # type: ignore[arg-type]

    bates = [bool(r.get("bates")) for r in ROWS]
    xuv = [bool(r.get("xuv")) for r in ROWS]
    data = {
        "case": [r["case"] for r in ROWS],
        "planet_mass [M_earth]": [MASS / c.M_EARTH] * n,
        "planet_radius [km]": [RADIUS / 1e3] * n,
        "homopause_altitude [km]": [100.0] * n,
        "homopause_density [m-3]": [1e19] * n,
        "homopause_temperature [K]": [190.0 if b else NAN for b in bates],
        "bates_shape [km-1]": [1 / 45 if b else NAN for b in bates],
        "diffusion_limited [1]": col("diff"),
        "diffusion_source": [r["source"] for r in ROWS],
        "exobase_temperature [K]": [NAN if x else r["T"] for r, x in zip(ROWS, xuv, strict=True)],
        "exobase_temperature_end [K]": col("T_end"),
        "temperature_reference [K]": [800.0 if x else NAN for x in xuv],
        "temperature_reference_flux [W m-2]": [4.6e-3 if x else NAN for x in xuv],
        "temperature_exponent [1]": [0.3 if x else NAN for x in xuv],
        "temperature_min [K]": [400.0 if x else NAN for x in xuv],
        "temperature_max [K]": [900.0 if x else NAN for x in xuv],
        "semi_major_axis [au]": [1.0 if x else NAN for x in xuv],
        "star_mass [M_sun]": [1.0 if x else NAN for x in xuv],
        "star_luminosity [L_sun]": [1.0 if x else NAN for x in xuv],
        "xuv_saturation_ratio [1]": [STAR["ratio"] if x else NAN for x in xuv],
        "xuv_saturation_time [s]": [STAR["time"] if x else NAN for x in xuv],
        "xuv_decay_index [1]": [STAR["index"] if x else NAN for x in xuv],
        "surface_pressure [bar]": [1.0] * n,
    }
    for name, x in SPECIES.items():
        data[f"x_{name}"] = [x] * n
    return pd.DataFrame(data)


def single_run(row: dict[str, object]) -> exosieve.EvolutionResult:
    """The row's model built by hand and run with evolve()."""
    if row.get("xuv"):
        star = exosieve.Star(c.M_SUN, c.L_SUN, STAR["ratio"], STAR["time"], STAR["index"])
        planet = exosieve.Planet(MASS, RADIUS, c.AU, star)
        history: object = exosieve.XuvTemperature(800.0, 4.6e-3, 0.3, 400.0, 900.0)
        t0 = 800.0
    else:
        planet = exosieve.Planet(MASS, RADIUS)
        t0 = float(row["T"])  # type: ignore[arg-type]
        history = (
            exosieve.TabulatedTemperature([T_START, T_END], [t0, float(row["T_end"])])  # type: ignore[arg-type]
            if "T_end" in row
            else t0
        )
    bates = {"homopause_temperature": 190.0, "shape": 1 / 45e3} if row.get("bates") else {}
    source = row["source"] or "measured"
    thermosphere = exosieve.Thermosphere(
        planet, RADIUS + 100e3, 1e19, SPECIES, t0, diffusion_method=source, **bates
    )
    # Hydrostatic column: N = P 4 pi R^2 / (g m_mean), g = G M / R^2 (worked by hand).
    m_mean = sum(x * exosieve.species(n).mass for n, x in SPECIES.items())
    total = 1e5 * 4 * np.pi * RADIUS**2 / (c.G * MASS / RADIUS**2 * m_mean)
    return exosieve.evolve(
        planet,
        thermosphere,
        {n: total * x for n, x in SPECIES.items()},
        (T_START, T_END),
        t_eval=[T_START, *TIMES[:-1], T_END],
        rtol=1e-6,
        exobase_temperature=history,
        limit_by_diffusion=row["diff"] != 0.0,
    )


def test_thermosphere_rows_reproduce_evolve() -> None:
    result = compare(frame(), times=TIMES, t_start=T_START, t_end=T_END, rtol=1e-6, threads=2)
    assert list(result["error"]) == [""] * len(ROWS)
    worst = 0.0
    for k, row in enumerate(ROWS):
        single = single_run(row)
        for j, name in enumerate(result.species):
            expected = single.inventory[name] / single.inventory[name][0]
            got = result["retained_fraction"][k, :, j]
            np.testing.assert_allclose(got, expected[1:], rtol=1e-12, atol=0.0)
            nonzero = expected[1:] > 0
            if nonzero.any():
                ratio = got[nonzero] / expected[1:][nonzero]
                worst = max(worst, float(np.max(np.abs(ratio - 1))))
        assert result["exobase_radius"][k] == pytest.approx(single.exobase_radius[0], rel=1e-12)
    print(f"largest relative difference batch / evolve: {worst:.3g}")
    assert worst < 1e-12
    # Diffusion from the homopause limits the loss of He, so more of it stays: the rows
    # differ only in diffusion limiting (and the diffusion parameters' source).
    he = result.species.index("He")
    assert result["final_retained_fraction"][1, he] > result["final_retained_fraction"][2, he]


def test_thermosphere_and_prescribed_exobase_in_one_row_is_refused() -> None:
    table = frame().iloc[:1].copy()
    table["exobase_altitude [km]"] = [500.0]
    table["exobase_density [m-3]"] = [1e13]
    with pytest.raises(ValueError, match="'exobase_altitude', 'exobase_density'.*not both"):
        compare(table, times=TIMES)


def test_prescribed_rows_refuse_thermosphere_options() -> None:
    table = pd.DataFrame(
        {
            "case": ["P"],
            "planet_mass [M_earth]": [1.0],
            "planet_radius [R_earth]": [1.0],
            "exobase_altitude [km]": [500.0],
            "exobase_composition": ["bulk"],
            "exobase_density [m-3]": [1e13],
            "exobase_temperature [K]": [900.0],
            "inventory [particles]": [1e37],
            "diffusion_source": ["measured"],
            "x_N2": [0.9],
            "x_He": [0.1],
        }
    )
    with pytest.raises(ValueError, match="column 'diffusion_source': is for a thermosphere"):
        compare(table, times=TIMES)


def test_thermosphere_columns_take_uncertainties() -> None:
    table = frame().iloc[1:2].copy()
    table["homopause_density_lnsigma [1]"] = [0.3]
    table["bates_shape_sigma [km-1]"] = [1 / 450]
    result = compare(table, times=TIMES, samples=4, seed=7, rtol=1e-6)
    drawn = result["sample_retained_fraction"][0, :, result.species.index("He")]
    assert np.all(np.isfinite(drawn))
    assert len(set(drawn.tolist())) == 4  # every sample drew its own thermosphere


def test_bulk_gas_hydrodynamic_without_heating_efficiency_is_flagged() -> None:
    # lambda = G M m / (k T r) of pure H at r = 1.5 R_earth of an Earth mass, worked by hand
    # for lambda = 1.5 (at or below the hydrodynamic threshold 2.1 of Volkov et al. 2011).
    r = 1.5 * c.R_EARTH
    hot = c.G * c.M_EARTH * exosieve.species("H").mass / (c.K_B * r) / 1.5
    table = pd.DataFrame(
        {
            "case": ["hot", "hot, energy limited", "cool"],
            "planet_mass [M_earth]": [1.0] * 3,
            "planet_radius [R_earth]": [1.0] * 3,
            "exobase_altitude [R_earth]": [0.5] * 3,
            "exobase_composition": ["bulk"] * 3,
            "exobase_density [m-3]": [1e12] * 3,
            "exobase_temperature [K]": [hot, hot, 800.0],
            "heating_efficiency [1]": [NAN, 0.15, NAN],
            "semi_major_axis [au]": [1.0] * 3,
            "star_mass [M_sun]": [1.0] * 3,
            "star_luminosity [L_sun]": [1.0] * 3,
            "inventory [particles]": [1e40] * 3,
            "x_H": [1.0] * 3,
        }
    )
    result = compare(table, times=TIMES)
    assert result["bulk_jeans_parameter_start"][0] == pytest.approx(1.5, rel=1e-12)
    assert list(result["hydrodynamic_unmodelled"]) == [1, 0, 0]
    assert list(result.summary["hydrodynamic_unmodelled"]) == [True, False, False]


def test_template_has_a_thermosphere_row_that_runs() -> None:
    table = load_cases(case_table_template_path())
    rows = np.isfinite(table.columns["homopause_altitude"])
    assert rows.sum() == 1
    assert np.all(np.isnan(table.columns["exobase_altitude"][rows]))
    result = compare(case_table_template_path(), times=4)
    assert not result["error"][np.nonzero(rows)[0][0]]


def test_columns_command_lists_the_thermosphere(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["columns"]) == 0
    out = capsys.readouterr().out
    for name in (
        "homopause_altitude",
        "homopause_density",
        "homopause_temperature",
        "bates_shape",
        "diffusion_limited",
        "diffusion_source",
    ):
        assert name in out


def test_cli_names_hydrodynamic_cases_in_words(
    tmp_path: pytest.TempPathFactory, capsys: pytest.CaptureFixture[str]
) -> None:
    r = 1.5 * c.R_EARTH
    hot = c.G * c.M_EARTH * exosieve.species("H").mass / (c.K_B * r) / 1.5  # lambda = 1.5
    path = tmp_path / "hot.csv"  # type: ignore[operator]
    path.write_text(
        "case,planet_mass [M_earth],planet_radius [R_earth],exobase_altitude [R_earth],"
        "exobase_density [m-3],exobase_temperature [K],inventory [particles],x_H,exobase_x_H\n"
        f"hot,1,1,0.5,1e12,{hot!r},1e40,1,1\ncool,1,1,0.5,1e12,800,1e40,1,1\n"
    )
    out = tmp_path / "hot.h5"  # type: ignore[operator]
    assert main(["sweep", str(path), "-o", str(out), "--quiet", "--times", "3"]) == 0
    text = capsys.readouterr().out
    assert "1 case goes hydrodynamic (the bulk gas at or below the hydrodynamic threshold" in text
    assert "has no heating_efficiency, so no energy-limited model" in text
    assert "hot (row 0): bulk Jeans parameter 1.5 at the start, 1.5 at the end" in text
    assert "H: 100% of its loss outside the Jeans picture" in text
    assert "cool (row" not in text
    assert main(["summary", str(out)]) == 0
    assert "hot (row 0): bulk Jeans parameter 1.5" in capsys.readouterr().out
