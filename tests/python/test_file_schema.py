"""Result files hold exactly the variables of the core's schema lists, with their units, long
names and flags, and the in-memory xarray views match the files as xarray opens them."""

from __future__ import annotations

from pathlib import Path

import h5py
import numpy as np
import pytest

import exosieve as es
from exosieve import _core
from exosieve import constants as c

xr = pytest.importorskip("xarray")

SWEEP_HEADER = (
    "case,planet_mass [M_earth],planet_radius [R_earth],exobase_altitude [km],"
    "exobase_density [m-3],exobase_temperature [K],exobase_temperature_sigma [K],"
    "inventory [particles],x_N2,x_He,x_H,exobase_composition"
)


def _text(value: object) -> str:
    return value.decode() if isinstance(value, bytes) else str(value)


def _datasets(path: Path) -> dict[str, dict[str, object]]:
    with h5py.File(path, "r", locking=False) as f:
        return {name: {k: v for k, v in f[name].attrs.items()} for name in f}


def _expected(schema: list[dict], conditions: set[str]) -> list[dict]:
    return [v for v in schema if v["present_when"] in conditions]


def _check_described(found: dict[str, dict[str, object]], variables: list[dict]) -> None:
    for v in variables:
        attrs = found[v["name"]]
        assert _text(attrs["units"]) == v["units"], v["name"]
        assert _text(attrs["long_name"]) == v["long_name"], v["name"]
        if v["flag_values"]:
            assert list(attrs["flag_values"]) == v["flag_values"]
            assert _text(attrs["flag_meanings"]) == v["flag_meanings"]


def _run(envelope: bool) -> es.EvolutionResult:
    if envelope:
        star = es.Star(c.M_SUN, c.L_SUN)
        orbit = 0.1 * c.AU
        r0 = es.envelope_planet_radius(
            5 * c.M_EARTH, 0.01, c.L_SUN / (4 * np.pi * orbit**2), 100 * c.MYR
        )
        planet = es.Planet(5 * c.M_EARTH, r0, semi_major_axis=orbit, star=star)
        exobase = es.PrescribedExobase(r0 + 500e3, 3000.0, {"H": 1e12}, scaling="fixed")
        hydro = es.EnergyLimitedEscape(efficiency=0.1, roche_lobe=False, activation="always")
        return es.evolve(
            planet,
            exobase,
            {"H": 1e52},
            (100 * c.MYR, c.GYR),
            hydrodynamic=hydro,
            envelope=es.Envelope(5 * c.M_EARTH, 0.01),
        )
    planet = es.Planet(c.M_EARTH, c.R_EARTH)
    exobase = es.PrescribedExobase(c.R_EARTH + 500e3, 1000.0, {"H": 1e11, "D": 1e7})
    return es.evolve(planet, exobase, {"H": 1e40, "D": 1e36}, (0.0, c.GYR))


@pytest.mark.parametrize("envelope", [False, True], ids=["isotopes", "envelope"])
def test_an_evolution_file_holds_the_schema_variables_and_no_others(tmp_path, envelope):
    result = _run(envelope)
    path = tmp_path / "run.h5"
    result.to_hdf5(path)
    conditions = {"", "envelope"} if envelope else {"", "ratios"}
    variables = _expected(_core.evolution_file_variables(), conditions)
    coordinates = [x["name"] for x in _core.evolution_file_coordinates()]
    if envelope:
        coordinates.remove("ratio")
    found = _datasets(path)
    assert set(found) == {v["name"] for v in variables} | set(coordinates)
    _check_described(found, variables)
    # The in-memory view has the file's variables, attributes and values.
    opened = xr.open_dataset(path, engine="h5netcdf")
    view = result.to_xarray()
    assert set(view.data_vars) == set(opened.data_vars)
    for name in view.data_vars:
        assert view[name].dims == opened[name].dims, name
        assert view[name].attrs["units"] == opened[name].attrs["units"], name
        np.testing.assert_array_equal(view[name].values, opened[name].values)
    opened.close()


def test_a_sweep_file_holds_the_schema_variables_and_no_others(tmp_path):
    lines = [
        f"P{i},{0.6 + 0.1 * i},1.0,500,1e13,{800 + 100 * i},30,1e37,0.7,0.25,0.05,bulk"
        for i in range(4)
    ]
    table = tmp_path / "cases.csv"
    table.write_text("\n".join([SWEEP_HEADER, *lines]) + "\n")
    out = tmp_path / "sweep.h5"
    result = es.compare(table, output=out, threads=1, samples=3)
    variables = _expected(_core.sweep_file_variables(), {"", "samples", "inputs"})
    coordinates = {x["name"] for x in _core.sweep_file_coordinates()}
    found = _datasets(out)
    assert set(found) == {v["name"] for v in variables} | coordinates
    _check_described(found, variables)
    with h5py.File(out, "r", locking=False) as f:
        for v in variables:  # every stored value within its valid range (NaN: missing)
            if v["range"] is not None:
                values = f[v["name"]][()].astype(float)
                values = values[~np.isnan(values)]
                assert ((values >= v["range"][0]) & (values <= v["range"][1])).all(), v["name"]
    opened = xr.open_dataset(out, engine="h5netcdf")
    view = result.to_xarray()
    assert set(view.data_vars) == set(opened.data_vars)
    for name in view.data_vars:
        for key in ("units", "long_name", "flag_meanings"):
            assert view[name].attrs.get(key) == opened[name].attrs.get(key), (name, key)
        np.testing.assert_array_equal(view[name].values, opened[name].values)
    opened.close()


def test_the_regime_names_are_the_cores():
    assert es.REGIMES == ("jeans", "enhanced_jeans", "transition", "hydrodynamic")
    regime = next(v for v in _core.evolution_file_variables() if v["name"] == "regime")
    assert regime["flag_meanings"].split() == list(es.REGIMES)
    start = next(v for v in _core.sweep_file_variables() if v["name"] == "regime_start")
    assert start["flag_values"] == [-1, 0, 1, 2, 3]
    assert start["flag_meanings"].split() == ["none", *es.REGIMES]
