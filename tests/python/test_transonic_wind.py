"""The transonic (Parker) wind as a cap of energy-limited escape: in evolve() against the
closed form of linear loss, its case-table columns against evolve(), refusals of bad values."""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

import numpy as np
import pytest

import exosieve
from exosieve import _core
from exosieve import constants as c
from exosieve.batch import compare
from exosieve.batch_options import _core_options, _engine_options
from exosieve.catalogue import case_table_from_frame
from exosieve.cli import main

NAN = float("nan")
M_H = exosieve.species("H").mass


def sub_neptune() -> Any:
    """An invented sub-Neptune 0.02 au from an invented Sun-like star, saturated to 100 Myr."""
    star = exosieve.Star(c.M_SUN, c.L_SUN)
    return exosieve.Planet(5 * c.M_EARTH, 2.5 * c.R_EARTH, 0.02 * c.AU, star)


def hydrogen_run(wind: dict[str, float] | None, recombination: bool = False) -> Any:
    planet = sub_neptune()
    exobase = exosieve.PrescribedExobase(1.1 * planet.radius, 3000.0, {"H": 1e13})
    hydro = exosieve.EnergyLimitedEscape(
        activation="always",
        roche_lobe=False,
        recombination_limit=recombination,
        transonic_wind=wind,
    )
    times = np.linspace(10 * c.MYR, 2 * c.GYR, 21)
    return exosieve.evolve(
        planet,
        exobase,
        {"H": 1e50},
        (times[0], times[-1]),
        t_eval=times,
        rtol=1e-10,
        hydrodynamic=hydro,
    )


def test_a_smaller_wind_rate_gives_linear_loss_at_the_parker_rate() -> None:
    # Worked: the wind's constant rate Mdot takes Mdot / m_H hydrogen atoms per second from the
    # one escaping species, N(t) = N0 - Mdot (t - t0) / m_H, while the energy-limited rate stays
    # larger throughout (checked at the end, where the flux is lowest).
    planet = sub_neptune()
    wind = {"temperature": 5000.0, "base_density": 1e13}
    mdot = float(exosieve.parker_mass_loss(planet.radius, 1e13, 5000.0, M_H, planet.mass))
    limited = float(
        exosieve.energy_limited_mass_loss(
            0.15, planet.radius, planet.radius, planet.xuv_flux(2 * c.GYR), planet.mass
        )
    )
    assert mdot < 0.5 * limited
    r = hydrogen_run(wind)
    np.testing.assert_allclose(r.escape_rate["H"] * M_H, mdot, rtol=1e-14, atol=0)
    exact = 1e50 - mdot * (r.time - r.time[0]) / M_H
    np.testing.assert_allclose(r.inventory["H"], exact, rtol=10 * 1e-10, atol=0)
    assert r.inventory["H"][-1] < 0.95e50
    assert r.config["hydrodynamic"]["transonic_wind"] == {
        "temperature_K": 5000.0,
        "base_density_m-3": 1e13,
        "mean_molecular_mass": "the escaping species' mass",
        "base_radius": "the planet radius",
    }
    # A given mean molecular mass replaces the escaping species' mass.
    heavy = hydrogen_run({**wind, "mean_molecular_mass": 2 * M_H})
    expected = float(exosieve.parker_mass_loss(planet.radius, 1e13, 5000.0, 2 * M_H, planet.mass))
    assert heavy.escape_rate["H"][0] * M_H == pytest.approx(expected, rel=1e-14)


@pytest.mark.parametrize("recombination", [False, True])
def test_a_larger_wind_rate_changes_nothing(recombination: bool) -> None:
    with_wind = hydrogen_run({"temperature": 5000.0, "base_density": 1e25}, recombination)
    without = hydrogen_run(None, recombination)
    np.testing.assert_array_equal(with_wind.inventory["H"], without.inventory["H"])
    np.testing.assert_array_equal(with_wind.escape_rate["H"], without.escape_rate["H"])


@pytest.mark.parametrize(
    ("wind", "message"),
    [
        ({"temperature": 0.0, "base_density": 1e13}, r"transonic temperature must be .*> 0, got 0"),
        (
            {"temperature": 5000.0, "base_density": -1.0},
            r"transonic base_density must be .*> 0, got -1",
        ),
        (
            {"temperature": 5000.0, "base_density": 1e13, "mean_molecular_mass": NAN},
            r"transonic mean_molecular_mass must be .*>= 0, got nan",
        ),
        ({"temperature": 5000.0}, r"transonic_wind: missing base_density"),
        ({"temperature": 5000.0, "base_density": 1e13, "speed": 1.0}, r"unknown keys \['speed'\]"),
    ],
)
def test_bad_wind_options_are_refused_by_name(wind: dict[str, float], message: str) -> None:
    with pytest.raises(ValueError, match=message):
        exosieve.EnergyLimitedEscape(transonic_wind=wind)


def test_options_survive_pickling() -> None:
    import pickle

    h = exosieve.EnergyLimitedEscape(transonic_wind={"temperature": 5000.0, "base_density": 1e13})
    back = pickle.loads(pickle.dumps(h))
    assert back.transonic_wind == {"temperature": 5000.0, "base_density": 1e13}
    assert "transonic_wind=" in repr(back)


# Case-table rows: invented hot sub-Neptunes of hydrogen and helium 0.3 au from an invented K
# star, their wind rate (~2e5 kg/s) below the energy-limited one at the start (~2e6 kg/s) and
# above it once the flux has fallen; the wind with the recombination limit and a given mass.
T_START, T_END = 10 * c.MYR, 4.5 * c.GYR
TIMES = [100 * c.MYR, 1 * c.GYR, T_END]
SPECIES = ("H", "He")
RTOL = 1e-6
ROWS: list[dict[str, Any]] = [
    {
        "case": "wind",
        "transonic_wind": 1.0,
        "transonic_temperature": 5000.0,
        "transonic_base_density": 1e13,
    },
    {
        "case": "wind, recombination",
        "transonic_wind": 1.0,
        "transonic_temperature": 6000.0,
        "transonic_base_density": 2e13,
        "transonic_molecular_mass": 1.2,  # [u]
        "recombination_limit": 1.0,
    },
    {"case": "energy-limited"},
]
HEADERS = {
    "transonic_wind": "transonic_wind [1]",
    "transonic_temperature": "transonic_temperature [K]",
    "transonic_base_density": "transonic_base_density [m-3]",
    "transonic_molecular_mass": "transonic_molecular_mass [u]",
    "recombination_limit": "recombination_limit [1]",
}


def frame(rows: list[dict[str, Any]] = ROWS) -> Any:
    pd = pytest.importorskip("pandas")
    n = len(rows)
    data: dict[str, Any] = {
        "case": [r["case"] for r in rows],
        "planet_mass [M_earth]": [5.0] * n,
        "planet_radius [R_earth]": [2.5] * n,
        "exobase_altitude [R_earth]": [0.25] * n,
        "exobase_composition": ["bulk"] * n,
        "exobase_density [m-3]": [1e13] * n,
        "exobase_temperature [K]": [8000.0] * n,
        "semi_major_axis [au]": [0.3] * n,
        "star_mass [M_sun]": [0.8] * n,
        "star_luminosity [L_sun]": [0.4] * n,
        "heating_efficiency [1]": [0.15] * n,
        "inventory [particles]": [3e50] * n,
        "x_H": [0.9] * n,
        "x_He": [0.1] * n,
    }
    for key, header in HEADERS.items():
        if any(key in r for r in rows):
            data[header] = [r.get(key, NAN) for r in rows]
    return pd.DataFrame(data)


def single_run(v: dict[str, float]) -> Any:
    """The row with SI values `v` (as the engine read them) built through evolve()'s options."""
    star = exosieve.Star(v["star_mass"], v["star_luminosity"])
    planet = exosieve.Planet(v["planet_mass"], v["planet_radius"], v["semi_major_axis"], star)
    exobase = exosieve.PrescribedExobase(
        v["planet_radius"] + v["exobase_altitude"],
        v["exobase_temperature"],
        {s: v[f"x_{s}"] * v["exobase_density"] for s in SPECIES},
    )
    wind = None
    if v.get("transonic_wind") == 1.0:
        wind = {
            "temperature": v["transonic_temperature"],
            "base_density": v["transonic_base_density"],
        }
        if "transonic_molecular_mass" in v:
            wind["mean_molecular_mass"] = v["transonic_molecular_mass"]
    hydro = exosieve.EnergyLimitedEscape(
        v["heating_efficiency"],
        recombination_limit=v.get("recombination_limit") == 1.0,
        transonic_wind=wind,
    )
    return exosieve.evolve(
        planet,
        exobase,
        {s: v["inventory"] * v[f"x_{s}"] for s in SPECIES},
        (T_START, T_END),
        t_eval=[T_START, *TIMES],
        rtol=RTOL,
        hydrodynamic=hydro,
    )


def test_wind_rows_reproduce_evolve() -> None:
    result = compare(frame(), times=TIMES, t_start=T_START, t_end=T_END, rtol=RTOL)
    assert list(result["error"]) == [""] * len(ROWS)
    core_table = case_table_from_frame(frame()).to_core()
    options = _core_options(
        _engine_options(list(SPECIES), np.array(TIMES), T_START, T_END, rtol=RTOL),
        threads=1,
        chunk_size=8,
    )
    for k in range(len(ROWS)):
        values = _core.case_values(core_table, k)
        single = single_run(values)
        engine = json.loads(_core.case_config(core_table, k, options).to_json())
        assert engine == single.config
        for j, name in enumerate(SPECIES):
            expected = single.inventory[name] / single.config["initial_inventory"][j]
            np.testing.assert_array_equal(result["retained_fraction"][k, :, j], expected[1:])
            assert result["escape_rate_start"][k, j] == single.escape_rate[name][0]
    # The mass in u read as kg, the unit the engine works in (CODATA 2018 atomic mass constant).
    assert values_mass(core_table) == pytest.approx(1.2 * c.AMU, rel=1e-15)
    # The wind caps the loss: less hydrogen lost than by the energy-limited row.
    lost = 1 - result["final_retained_fraction"][:, 0]
    assert lost[0] < 0.9 * lost[2] and lost[1] < 0.9 * lost[2], lost


def values_mass(core_table: Any) -> float:
    return float(_core.case_values(core_table, 1)["transonic_molecular_mass"])


@pytest.mark.parametrize(
    ("change", "message"),
    [
        ({"transonic_temperature": -5.0}, r"column 'transonic_temperature': must be > 0, got -5 K"),
        (
            {"transonic_base_density": 0.0},
            r"column 'transonic_base_density': must be > 0, got 0 m-3",
        ),
        ({"transonic_wind": 2.0}, r"column 'transonic_wind': must be 0 or 1, got 2"),
        (
            {"transonic_base_density": NAN},
            r"column 'transonic_base_density': no value given \(the transonic wind of "
            r"'transonic_wind' 1 needs it\)",
        ),
        (
            {"transonic_wind": 0.0},
            r"column 'transonic_temperature': got 5000 K, but it is for the transonic wind",
        ),
    ],
)
def test_bad_wind_columns_are_refused_before_any_run(
    tmp_path: Path, change: dict[str, float], message: str
) -> None:
    table = frame([{**ROWS[0], **change}])
    path = tmp_path / "bad.csv"
    table.to_csv(path, index=False)
    out = tmp_path / "out.h5"
    with pytest.raises(ValueError, match=r"line 2 .*" + message):
        compare(path, times=TIMES, output=out)
    assert not out.exists()


def test_wind_columns_are_listed(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["columns"]) == 0
    out = capsys.readouterr().out
    for name in (
        "transonic_wind",
        "transonic_temperature",
        "transonic_base_density",
        "transonic_molecular_mass",
    ):
        assert name in out
    # In the group of energy-limited escape, after the recombination limit.
    assert out.index("recombination_photon_energy") < out.index("transonic_wind")
    assert out.index("transonic_molecular_mass") < out.index("given_loss_reference_flux")
