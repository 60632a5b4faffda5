"""Case tables that describe planets: the bulk composition shares the inventory, a prescribed
exobase has a composition of its own, and the options of evolve() that a row can hold (regime
thresholds, drag, the escaping species and when energy-limited loss acts, isotopes) reproduce
single evolve() runs. Also the study of notebook 3 as rows of a table."""

from __future__ import annotations

import json
from typing import Any

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import exosieve
from exosieve import _core
from exosieve import constants as c
from exosieve.batch import compare
from exosieve.batch_options import _core_options, _engine_options
from exosieve.catalogue import case_table_from_frame

pd = pytest.importorskip("pandas")

NAN = float("nan")
T_START, T_END = 10 * c.MYR, 4.5 * c.GYR
TIMES = [100 * c.MYR, 1 * c.GYR, T_END]
RTOL = 1e-6

# Earth's dry air by volume: N2 0.78084, O2 0.209476, Ar 0.00934, CO2 3.14e-4 (US Standard
# Atmosphere 1976, Table 3; from memory) and He 5.24e-6 (same table and the CRC Handbook of
# Chemistry and Physics, "Composition of dry air"; from memory). The CO2 is today's 4.2e-4
# instead (common practice); the sum is 1 within 1e-4.
EARTH_AIR = {"N2": 0.78084, "O2": 0.209476, "Ar": 0.00934, "CO2": 4.2e-4, "He": 5.24e-6}
# A realistic exobase composition of an Earth-like thermosphere at ~500 km (invented for the
# example, the order of what aeronomy textbooks show): atomic O dominant, light gases enriched.
EXOBASE = {"O": 0.90, "N2": 0.05, "He": 0.05}


def engine_options(species: list[str], times: list[float] = TIMES, **kwargs: Any) -> Any:
    options = _engine_options(species, np.array(times), T_START, T_END, rtol=RTOL, **kwargs)
    return _core_options(options, threads=1, chunk_size=8)


def earth_frame(exobase: dict[str, float] | None, bulk: dict[str, float]) -> pd.DataFrame:
    """An Earth-sized, Earth-mass planet with Earth's surface pressure (101325 Pa: US Standard
    Atmosphere 1976) and a prescribed exobase 500 km up."""
    data: dict[str, Any] = {
        "case": ["Earth-like"],
        "planet_mass [M_earth]": [1.0],
        "planet_radius [R_earth]": [1.0],
        "exobase_altitude [km]": [500.0],
        "exobase_density [m-3]": [1e13],
        "exobase_temperature [K]": [1000.0],
        "surface_pressure [Pa]": [101325.0],
    }
    species = list(dict.fromkeys([*bulk, *(exobase or {})]))
    for name in species:
        data[f"x_{name}"] = [bulk.get(name, 0.0)]
    if exobase is None:
        data["exobase_composition"] = ["bulk"]
    else:
        for name in species:
            data[f"exobase_x_{name}"] = [exobase.get(name, 0.0)]
    return pd.DataFrame(data)


def inventories(frame: pd.DataFrame) -> dict[str, float]:
    table = case_table_from_frame(frame)
    config = _core.case_config(table.to_core(), 0, engine_options(table.species))
    present = [s for s in table.species if frame[f"x_{s}"].iloc[0] > 0]
    return dict(zip(present, config.initial_inventory, strict=True))


# --- the composition trap ----------------------------------------------------------------------


def test_exobase_fractions_no_longer_fill_the_inventory_with_helium() -> None:
    bulk = {**EARTH_AIR, "O": 1e-6}  # a trace of atomic O, so that the exobase may hold it
    bulk["N2"] -= 1e-6
    new = inventories(earth_frame(EXOBASE, bulk))
    total = sum(new.values())
    # He takes exactly its bulk share of the inventory.
    assert new["He"] / total == pytest.approx(5.24e-6 / sum(bulk.values()), rel=1e-12)
    # The whole atmosphere: 5.15e18 kg (Trenberth & Smith 2005, J. Climate 18, 864; from memory)
    # of 28.96 u mean mass (US Standard Atmosphere 1976) is 1.07e44 molecules, so Earth holds
    # 5.6e38 He atoms; the hydrostatic column of 101325 Pa gives the same within ~3 %.
    earth_he = 5.15e18 / (28.96 * c.AMU) * 5.24e-6
    assert new["He"] == pytest.approx(earth_he, rel=0.05)
    # The old reading, the exobase fractions as the bulk ones (now only when the row says so),
    # put about 17 000 times Earth's helium into the inventory.
    old = inventories(earth_frame(None, {"O": 0.90, "N2": 0.05, "He": 0.05}))
    ratio = old["He"] / new["He"]
    print(f"He inventory: {new['He']:.3g} (Earth: {earth_he:.3g}); old reading x{ratio:.3g}")
    assert 1.6e4 < ratio < 1.9e4


@settings(max_examples=40, deadline=None)
@given(
    st.lists(st.floats(0.01, 1.0), min_size=3, max_size=3),
    st.lists(st.floats(0.0, 1.0), min_size=3, max_size=3),
)
def test_inventories_do_not_depend_on_the_exobase_fractions(a: list[float], b: list[float]) -> None:
    # Property: two rows that differ only in their exobase composition start from the same
    # inventories, bit for bit, and those are the bulk shares of the surface pressure's column.
    bulk = {"N2": 0.78, "O": 0.219994, "He": 6e-6}
    fractions = [np.array(a) / sum(a), np.array(b) / sum(b) if sum(b) > 0 else np.array(a) / sum(a)]
    first, second = (
        inventories(earth_frame(dict(zip(bulk, f.tolist(), strict=True)), bulk)) for f in fractions
    )
    assert first == second
    m_mean = sum(x * exosieve.species(s).mass for s, x in bulk.items()) / sum(bulk.values())
    g = c.G * c.M_EARTH / c.R_EARTH**2
    total = 101325.0 * 4 * np.pi * c.R_EARTH**2 / (g * m_mean)  # hydrostatic column, by hand
    for name, x in bulk.items():
        assert first[name] == pytest.approx(total * x / sum(bulk.values()), rel=1e-12)


def test_prescribed_row_reproduces_evolve_with_its_own_exobase_composition() -> None:
    bulk = {"N2": 0.78, "O": 0.219994, "He": 6e-6}
    frame = earth_frame(EXOBASE, bulk)
    result = compare(frame, times=TIMES, t_start=T_START, t_end=T_END, rtol=RTOL, threads=1)
    assert result["error"][0] == ""
    planet = exosieve.Planet(c.M_EARTH, c.R_EARTH)
    exobase = exosieve.PrescribedExobase(
        c.R_EARTH + 500e3, 1000.0, {s: EXOBASE[s] * 1e13 for s in bulk}
    )
    start = inventories(frame)
    single = exosieve.evolve(
        planet, exobase, start, (T_START, T_END), t_eval=[T_START, *TIMES[:-1], T_END], rtol=RTOL
    )
    for j, name in enumerate(result.species):
        np.testing.assert_array_equal(
            result["retained_fraction"][0, :, j], single.inventory[name][1:] / start[name]
        )
    # The sweep file's mole fraction is the bulk one.
    np.testing.assert_allclose(result["mole_fraction"][0], [bulk[s] for s in result.species])


def test_a_prescribed_row_without_an_exobase_composition_is_refused() -> None:
    frame = earth_frame(EXOBASE, {"N2": 0.78, "O": 0.219994, "He": 6e-6})
    frame = frame.drop(columns=[k for k in frame if k.startswith("exobase_x_")])
    with pytest.raises(
        ValueError,
        match=r"row 0 \(case 'Earth-like'\).*'exobase_x_N2', "
        r"'exobase_x_O', 'exobase_x_He'.*'exobase_composition' set to 'bulk'",
    ):
        compare(frame, times=TIMES)
    frame["exobase_composition"] = ["exobase"]
    with pytest.raises(ValueError, match="column 'exobase_composition': 'exobase' is not 'bulk'"):
        compare(frame, times=TIMES)


def test_thermosphere_rows_take_the_exobase_from_the_bulk_composition() -> None:
    # An invented Earth-like thermosphere: the exobase densities come from the bulk fractions
    # through diffusive equilibrium, as Thermosphere.exobase() finds them, so He is enriched
    # at the exobase far beyond its bulk share; no exobase composition is taken from the row.
    bulk = {"N2": 0.78, "O": 0.219994, "He": 6e-6}
    data: dict[str, Any] = {
        "case": ["thermosphere"],
        "planet_mass [M_earth]": [1.0],
        "planet_radius [R_earth]": [1.0],
        "homopause_altitude [km]": [100.0],
        "homopause_density [m-3]": [1e19],
        "exobase_temperature [K]": [1000.0],
        "surface_pressure [Pa]": [101325.0],
        **{f"x_{s}": [x] for s, x in bulk.items()},
    }
    result = compare(pd.DataFrame(data), times=TIMES, t_start=T_START, t_end=T_END, rtol=RTOL)
    assert result["error"][0] == ""
    planet = exosieve.Planet(c.M_EARTH, c.R_EARTH)
    thermosphere = exosieve.Thermosphere(planet, c.R_EARTH + 100e3, 1e19, bulk, 1000.0)
    exobase = thermosphere.exobase()
    assert result["exobase_radius"][0] == exobase.radius
    total = sum(exobase.densities.values())
    assert exobase.densities["He"] / total > 100 * bulk["He"]
    start = inventories(pd.DataFrame({**data, "exobase_composition": [""]}))
    single = exosieve.evolve(
        planet,
        thermosphere,
        start,
        (T_START, T_END),
        t_eval=[T_START, *TIMES[:-1], T_END],
        rtol=RTOL,
    )
    for j, name in enumerate(result.species):
        np.testing.assert_array_equal(
            result["retained_fraction"][0, :, j], single.inventory[name][1:] / start[name]
        )
    # An exobase composition on a thermosphere row is refused: it follows from the bulk one.
    with pytest.raises(ValueError, match="column 'exobase_x_He': is for a prescribed exobase"):
        compare(pd.DataFrame({**data, "exobase_x_He": [1.0]}), times=TIMES)


# --- options of evolve() as columns -------------------------------------------------------------

# An invented hot sub-Neptune of H2, He and H2O 0.05 au from an invented K star; its exobase
# composition its own. Each row sets the option named in its case label.
SUB_NEPTUNE = {"H2": 0.85, "He": 0.14, "H2O": 0.01}
SUB_NEPTUNE_EXOBASE = {"H2": 0.95, "He": 0.05, "H2O": 0.0}
OPTION_ROWS: list[dict[str, Any]] = [
    {"case": "defaults"},  # energy-limited loss acting throughout ("always")
    {"case": "acting while hydrodynamic", "energy_limited_activation": "hydrodynamic"},
    {
        "case": "thresholds",
        "energy_limited_activation": "hydrodynamic",
        "threshold_enhanced [1]": 9.0,
        "threshold_transition [1]": 7.0,
        "threshold_hydrodynamic [1]": 5.0,
    },
    {
        "case": "only the transition threshold",
        "threshold_transition [1]": 5.0,
        "energy_limited_activation": "transition",
    },
    {"case": "no drag", "drag [1]": 0.0},
    {
        "case": "drag laws",
        "drag_diffusion_He [m-1 s-1]": 2e21,
        "drag_diffusion_exponent_He [1]": 0.7,
        "drag_diffusion_H2O [m-1 s-1]": 0.0,
    },
    {"case": "no drag but a law", "drag [1]": 0.0, "drag_diffusion_He [m-1 s-1]": 1e21},
    {"case": "escaping He", "escaping_species": "He"},
]
# The row each row's option is measured against: it must change the outcome.
VERSUS = {
    "thresholds": "acting while hydrodynamic",
    "only the transition threshold": "acting while hydrodynamic",
    "no drag but a law": "no drag",
}


def options_frame(rows: list[dict[str, Any]] = OPTION_ROWS) -> pd.DataFrame:
    n = len(rows)
    data: dict[str, Any] = {
        "case": [r["case"] for r in rows],
        "planet_mass [M_earth]": [4.0] * n,
        "planet_radius [R_earth]": [2.2] * n,
        "semi_major_axis [au]": [0.05] * n,
        "star_mass [M_sun]": [0.75] * n,
        "star_luminosity [L_sun]": [0.3] * n,
        "exobase_altitude [km]": [3000.0] * n,
        "exobase_density [m-3]": [2e13] * n,
        "temperature_reference [K]": [1000.0] * n,
        "temperature_reference_flux [W m-2]": [4.6e-3] * n,
        "temperature_exponent [1]": [0.5] * n,
        "temperature_min [K]": [300.0] * n,
        "temperature_max [K]": [8000.0] * n,
        "heating_efficiency [1]": [0.15] * n,
        "surface_pressure [bar]": [1e4] * n,
    }
    for s, x in SUB_NEPTUNE.items():
        data[f"x_{s}"] = [x] * n
        data[f"exobase_x_{s}"] = [SUB_NEPTUNE_EXOBASE[s]] * n
    data["energy_limited_activation"] = [r.get("energy_limited_activation", "always") for r in rows]
    for key in dict.fromkeys(k for r in rows for k in r if k != "case"):
        if key != "energy_limited_activation":
            data[key] = [r.get(key, "" if key == "escaping_species" else NAN) for r in rows]
    return pd.DataFrame(data)


def option_run(row: dict[str, Any], start: dict[str, float]) -> Any:
    """The row built through evolve()'s own options."""
    star = exosieve.Star(0.75 * c.M_SUN, 0.3 * c.L_SUN)
    planet = exosieve.Planet(4 * c.M_EARTH, 2.2 * c.R_EARTH, 0.05 * c.AU, star)
    law = exosieve.XuvTemperature(1000.0, 4.6e-3, 0.5, 300.0, 8000.0)
    exobase = exosieve.PrescribedExobase(
        planet.radius + 3000e3, law, {s: SUB_NEPTUNE_EXOBASE[s] * 2e13 for s in SUB_NEPTUNE}
    )
    diffusion: dict[str, Any] = {}
    for s in SUB_NEPTUNE:
        if f"drag_diffusion_{s} [m-1 s-1]" in row:
            a = row[f"drag_diffusion_{s} [m-1 s-1]"]
            diffusion[s] = (a, row.get(f"drag_diffusion_exponent_{s} [1]", 0.0))
    hydro = exosieve.EnergyLimitedEscape(
        0.15,
        escaping_species=row.get("escaping_species") or None,
        activation=row.get("energy_limited_activation", "always"),
        diffusion=diffusion,
        drag=row.get("drag [1]", 1.0) == 1.0,
    )
    keys = ("enhanced", "transition", "hydrodynamic")
    thresholds = exosieve.RegimeThresholds(
        **{k: row.get(f"threshold_{k} [1]", d) for k, d in zip(keys, (6.0, 3.0, 2.1), strict=True)}
    )
    return exosieve.evolve(
        planet,
        exobase,
        start,
        (T_START, T_END),
        t_eval=[T_START, *TIMES[:-1], T_END],
        rtol=RTOL,
        hydrodynamic=hydro,
        thresholds=thresholds,
    )


def test_option_rows_reproduce_evolve() -> None:
    frame = options_frame()
    result = compare(frame, times=TIMES, t_start=T_START, t_end=T_END, rtol=RTOL, threads=2)
    assert list(result["error"]) == [""] * len(OPTION_ROWS)
    table = case_table_from_frame(frame).to_core()
    options = engine_options(list(SUB_NEPTUNE))
    finals = []
    for k, row in enumerate(OPTION_ROWS):
        config = _core.case_config(table, k, options)
        start = dict(zip(SUB_NEPTUNE, config.initial_inventory, strict=True))
        single = option_run(row, start)
        # The same model, number by number, and bitwise the same fractions.
        engine = json.loads(config.to_json())
        assert engine == single.config, row["case"]
        for j, name in enumerate(result.species):
            np.testing.assert_array_equal(
                result["retained_fraction"][k, :, j], single.inventory[name][1:] / start[name]
            )
        # The row's thresholds also classify its regime at the start.
        lam = single.jeans_parameter
        for j, name in enumerate(result.species):
            expected = exosieve.classify_regime(
                lam[name][0],
                _core.RegimeThresholds(
                    *(
                        engine["regime_thresholds"][q]
                        for q in ("enhanced", "transition", "hydrodynamic")
                    )
                ),
            )
            assert result["regime_start"][k, j] == expected
        finals.append(result["final_retained_fraction"][k].copy())
    # Every option changes the outcome: none of them is ignored.
    names = [r["case"] for r in OPTION_ROWS]
    for k in range(1, len(OPTION_ROWS)):
        base = names.index(VERSUS.get(names[k], "defaults"))
        assert not np.array_equal(finals[k], finals[base]), names[k]


def test_option_columns_are_refused_where_they_mean_nothing() -> None:
    frame = options_frame([{"case": "x"}]).drop(columns=["heating_efficiency [1]"])
    for column, value, message in (
        ("drag [1]", 1.0, "column 'drag': got 1, but it is for energy-limited"),
        ("drag_diffusion_He [m-1 s-1]", 1e21, "column 'drag_diffusion_He': got 1e"),
        ("escaping_species", "H2", "column 'escaping_species': 'H2', but it is for"),
    ):
        with pytest.raises(ValueError, match=message):
            compare(frame.assign(**{column: [value]}), times=TIMES)
    full = options_frame([{"case": "x"}])
    with pytest.raises(ValueError, match="column 'escaping_species': 'N2' is not a species"):
        compare(full.assign(escaping_species=["N2"]), times=TIMES)
    with pytest.raises(ValueError, match="column 'energy_limited_activation': 'sometimes' is not"):
        compare(full.assign(energy_limited_activation=["sometimes"]), times=TIMES)
    with pytest.raises(ValueError, match=r"row 0 \(case 'x'\), column 'threshold_hydrodynamic'"):
        compare(full.assign(**{"threshold_hydrodynamic [1]": [3.5]}), times=TIMES)
    with pytest.raises(ValueError, match="column 'drag': must be 0 or 1, got 0.5"):
        compare(full.assign(**{"drag [1]": [0.5]}), times=TIMES)


# --- isotopes as species, and the study of notebook 3 -----------------------------------------

# Notebook 3: the invented small world Maraud c (0.11 Earth masses, 0.53 Earth radii, 1.3 au
# from the invented K star Maraud), a CO2-N2 thermosphere with trace H and D, the XUV
# temperature law of 220 K at today's flux, clamped to 200-700 K, diffusion-limited or not.
NB3_COMPOSITION = {"CO2": 0.95, "N2": 0.049998, "H": 2e-6, "D": 4e-10}
NB3_INVENTORY = {"CO2": 3e41, "N2": 1.5e40, "H": 1e44, "D": 1.5e40}


def notebook3_table(planet: Any, times: Any) -> pd.DataFrame:
    f_now = float(planet.xuv_flux(times)[-1])
    data: dict[str, Any] = {
        "case": ["Maraud c, diffusion-limited", "Maraud c, Jeans only"],
        "star": ["Maraud"] * 2,
        "planet_mass [M_earth]": [0.11] * 2,
        "planet_radius [R_earth]": [0.53] * 2,
        "semi_major_axis [au]": [1.3] * 2,
        "star_mass [M_sun]": [0.82] * 2,
        "star_luminosity [L_sun]": [0.45] * 2,
        "age_start [Myr]": [10.0] * 2,
        "age_end [Gyr]": [4.5] * 2,
        "homopause_altitude [km]": [100.0] * 2,
        "homopause_density [m-3]": [2e17] * 2,
        "diffusion_limited [1]": [1.0, 0.0],
        "temperature_reference [K]": [220.0] * 2,
        "temperature_reference_flux [W m-2]": [f_now] * 2,
        "temperature_exponent [1]": [0.4] * 2,
        "temperature_min [K]": [200.0] * 2,
        "temperature_max [K]": [700.0] * 2,
        "rtol [1]": [1e-8] * 2,
    }
    for s, x in NB3_COMPOSITION.items():
        data[f"x_{s}"] = [x] * 2
        data[f"inventory_{s} [particles]"] = [NB3_INVENTORY[s]] * 2
    return pd.DataFrame(data)


def test_notebook3_study_runs_as_rows_of_a_table() -> None:
    star = exosieve.Star(0.82 * c.M_SUN, 0.45 * c.L_SUN)
    planet = exosieve.Planet(
        0.11 * c.M_EARTH, 0.53 * c.R_EARTH, semi_major_axis=1.3 * c.AU, star=star
    )
    times = np.geomspace(10 * c.MYR, 4.5 * c.GYR, 200)
    # The notebook's reference flux, planet.xuv_flux(times)[-1], is today's: 4.5 Gyr.
    history = exosieve.XuvTemperature(220.0, planet.xuv_flux(times)[-1], 0.4, 200.0, 700.0)
    thermosphere = exosieve.Thermosphere(
        planet,
        homopause_radius=planet.radius + 100e3,
        homopause_density=2e17,
        composition=NB3_COMPOSITION,
        exobase_temperature=300.0,
    )
    result = compare(notebook3_table(planet, times), times=times, threads=2)
    assert list(result["error"]) == ["", ""]
    h, d = result.species.index("H"), result.species.index("D")
    for k, limited in enumerate((True, False)):
        run = exosieve.evolve(
            planet,
            thermosphere,
            NB3_INVENTORY,
            (10 * c.MYR, 4.5 * c.GYR),
            t_eval=times,
            exobase_temperature=history,
            limit_by_diffusion=limited,
        )
        for j, name in enumerate(result.species):
            # Within rounding (4e-14 seen): the row's fractions are normalised by their sum.
            np.testing.assert_allclose(
                result["retained_fraction"][k, :, j],
                run.inventory[name] / NB3_INVENTORY[name],
                rtol=1e-12,
                atol=0.0,
            )
        # D/H from the retained fractions of the two isotopes as species, as evolve() has it.
        enrichment = result["retained_fraction"][k, :, d] / result["retained_fraction"][k, :, h]
        ratio = run.isotope_ratio["D/H"]
        np.testing.assert_allclose(enrichment, ratio / ratio[0], rtol=1e-12)
    # The notebook's numbers: diffusion keeps most of the hydrogen (0.935 of it), Jeans escape
    # fed without limit strips it (4e-4 left).
    kept = result["final_retained_fraction"][:, h]
    assert kept[0] == pytest.approx(0.935, abs=0.01)
    assert kept[1] == pytest.approx(4e-4, rel=0.3)


def test_columns_command_groups_the_new_columns(capsys: pytest.CaptureFixture[str]) -> None:
    from exosieve.cli import main

    assert main(["columns"]) == 0
    out = capsys.readouterr().out
    prescribed = out.index("Upper atmosphere, one of two kinds: a prescribed exobase:")
    thermosphere = out.index("Upper atmosphere, one of two kinds: a thermosphere")
    assert prescribed < out.index("exobase_x_<species>") < thermosphere
    regimes = out.index("Escape regimes: thresholds of the Jeans parameter")
    energy = out.index("Energy-limited hydrodynamic escape:")
    assert regimes < out.index("threshold_hydrodynamic") < energy
    assert energy < out.index("drag_diffusion_exponent_<species>")
    for text in ("exobase_composition", "escaping_species", "energy_limited_activation"):
        assert f"  {text} " in out


def test_template_shows_each_kind_of_row() -> None:
    from exosieve.catalogue import case_table_template_path, load_cases

    table = load_cases(case_table_template_path())
    own = np.isfinite(table.columns["exobase_x_He"]) & np.isfinite(
        table.columns["exobase_altitude"]
    )
    bulk = np.array([t == "bulk" for t in table.text_columns["exobase_composition"]])
    thermosphere = np.isfinite(table.columns["homopause_altitude"])
    rules = np.isfinite(table.columns["threshold_hydrodynamic"]) & np.isfinite(
        table.columns["drag_diffusion_He"]
    )
    assert own.any() and bulk.any() and thermosphere.any() and rules.any()
    # Every prescribed row states its exobase composition one way or the other.
    prescribed = np.isfinite(table.columns["exobase_altitude"])
    stated = bulk | np.isfinite(table.columns["exobase_x_H2"]) | own
    assert np.all(stated[prescribed])
