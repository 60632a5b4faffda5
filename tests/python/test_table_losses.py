"""Case-table rows with given losses, the XUV absorption radius and the recombination limit,
against single evolve() runs; the loss rates in sweep files; refusals of bad values."""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

import numpy as np
import pytest

import exosieve
from exosieve import _core
from exosieve import constants as c
from exosieve.batch import compare, open_comparison
from exosieve.batch_options import _core_options, _engine_options
from exosieve.catalogue import case_table_from_frame, case_table_template_path, load_cases
from exosieve.cli import main

pd = pytest.importorskip("pandas")

NAN = float("nan")
T_START, T_END = 10 * c.MYR, 4.5 * c.GYR
TIMES = [100 * c.MYR, 1 * c.GYR, T_END]
SPECIES = ("H", "He")
RTOL = 1e-6

# Invented hot sub-Neptunes of hydrogen and helium 0.3 au from an invented K star: given
# losses (constant for H, XUV power law for He); energy-limited loss with the XUV absorbed at
# the radius of optical depth one at a given temperature and mean mass, capped by the
# recombination limit with its defaults; the absorption radius at the exobase temperature
# along a chord, with the bulk gas's mean mass, and the limit with its own constants (there
# the cap acts: the start flux, ~1.9 W m-2, is above the flux where the two rates meet,
# ~0.1 W m-2); and all of it in one row.
ROWS: list[dict[str, Any]] = [
    {
        "case": "given",
        "T": 1500.0,
        "given_loss_H": 1e33,
        "given_loss_He": 2e32,
        "given_loss_exponent_He": 1.2,
        "given_loss_reference_flux": 0.25,
    },
    {
        "case": "absorbed",
        "T": 8000.0,
        "heating_efficiency": 0.15,
        "xuv_absorption_cross_section": 2e-22,
        "xuv_absorption_base_density": 1e17,
        "xuv_absorption_temperature": 1000.0,
        "xuv_absorption_molecular_mass": 2.3,  # [u]
        "xuv_absorption_chord": 0.0,
        "recombination_limit": 1.0,
    },
    {
        "case": "chord, capped",
        "T": 8000.0,
        "heating_efficiency": 0.2,
        "xuv_absorption_cross_section": 6e-22,
        "xuv_absorption_base_density": 1e19,
        "xuv_absorption_chord": 1.0,
        "recombination_limit": 1.0,
        "recombination_temperature": 8000.0,
        "recombination_coefficient": 3e-19,
        "recombination_photon_energy": 15.0,  # [eV]
    },
    {
        "case": "everything",
        "T": 8000.0,
        "heating_efficiency": 0.2,
        "xuv_absorption_cross_section": 6e-22,
        "xuv_absorption_base_density": 1e19,
        "recombination_limit": 1.0,
        "given_loss_He": 1e31,
        "given_loss_exponent_He": 0.5,
        "given_loss_reference_flux": 0.25,
    },
]

HEADERS = {
    "given_loss_H": "given_loss_H [s-1]",
    "given_loss_He": "given_loss_He [s-1]",
    "given_loss_exponent_He": "given_loss_exponent_He [1]",
    "given_loss_reference_flux": "given_loss_reference_flux [W m-2]",
    "heating_efficiency": "heating_efficiency [1]",
    "xuv_absorption_cross_section": "xuv_absorption_cross_section [m2]",
    "xuv_absorption_base_density": "xuv_absorption_base_density [m-3]",
    "xuv_absorption_temperature": "xuv_absorption_temperature [K]",
    "xuv_absorption_molecular_mass": "xuv_absorption_molecular_mass [u]",
    "xuv_absorption_chord": "xuv_absorption_chord [1]",
    "recombination_limit": "recombination_limit [1]",
    "recombination_temperature": "recombination_temperature [K]",
    "recombination_coefficient": "recombination_coefficient [m3 s-1]",
    "recombination_photon_energy": "recombination_photon_energy [eV]",
}


def frame(rows: list[dict[str, Any]] = ROWS) -> pd.DataFrame:
    n = len(rows)
    data: dict[str, Any] = {
        "case": [r["case"] for r in rows],
        "planet_mass [M_earth]": [5.0] * n,
        "planet_radius [R_earth]": [2.5] * n,
        "exobase_altitude [R_earth]": [0.25] * n,
        "exobase_composition": ["bulk"] * n,
        "exobase_density [m-3]": [1e13] * n,
        "exobase_temperature [K]": [r["T"] for r in rows],
        "semi_major_axis [au]": [0.3] * n,
        "star_mass [M_sun]": [0.8] * n,
        "star_luminosity [L_sun]": [0.4] * n,
        "inventory [particles]": [3e50] * n,
        "x_H": [0.9] * n,
        "x_He": [0.1] * n,
    }
    for key, header in HEADERS.items():
        if any(key in r for r in rows):
            data[header] = [r.get(key, NAN) for r in rows]
    return pd.DataFrame(data)


def single_run(v: dict[str, float], t_eval: list[float] | None = None) -> Any:
    """The row with SI values `v` (as the engine read them) built through evolve()'s options."""
    star = exosieve.Star(v["star_mass"], v["star_luminosity"])
    planet = exosieve.Planet(v["planet_mass"], v["planet_radius"], v["semi_major_axis"], star)
    x = {s: v[f"x_{s}"] for s in SPECIES}
    total = sum(x.values())
    exobase = exosieve.PrescribedExobase(
        v["planet_radius"] + v["exobase_altitude"],
        v["exobase_temperature"],
        {s: x[s] / total * v["exobase_density"] for s in SPECIES},
    )
    inventory = {s: v["inventory"] * x[s] / total for s in SPECIES}
    given: dict[str, Any] = {}
    for s in SPECIES:
        if f"given_loss_exponent_{s}" in v:
            given[s] = exosieve.GivenLoss.xuv_power_law(
                v[f"given_loss_{s}"], v["given_loss_reference_flux"], v[f"given_loss_exponent_{s}"]
            )
        elif f"given_loss_{s}" in v:
            given[s] = v[f"given_loss_{s}"]
    hydro = None
    if "heating_efficiency" in v:
        options: dict[str, Any] = {}
        if "xuv_absorption_cross_section" in v:
            mean = sum(x[s] * exosieve.species(s).mass for s in SPECIES) / total
            options["absorption"] = {
                "base_density": v["xuv_absorption_base_density"],
                "cross_section": v["xuv_absorption_cross_section"],
                "mean_molecular_mass": v.get("xuv_absorption_molecular_mass", mean),
                "temperature": v.get("xuv_absorption_temperature", 0.0),
                "chord": v.get("xuv_absorption_chord", 0.0) == 1.0,
            }
        if v.get("recombination_limit") == 1.0:
            keys = {
                "recombination_temperature": "temperature",
                "recombination_coefficient": "recombination_coefficient",
                "recombination_photon_energy": "photon_energy",
            }
            options["recombination_limit"] = {keys[k]: v[k] for k in keys if k in v} or True
        hydro = exosieve.EnergyLimitedEscape(v["heating_efficiency"], **options)
    return exosieve.evolve(
        planet,
        exobase,
        inventory,
        (T_START, T_END),
        t_eval=[T_START, *TIMES[:-1], T_END] if t_eval is None else t_eval,
        rtol=RTOL,
        given_losses=given or None,
        hydrodynamic=hydro,
    )


def engine_options(samples: int = 0, seed: int = 0) -> Any:
    grid = np.array(TIMES)
    options = _engine_options(
        list(SPECIES), grid, T_START, T_END, rtol=RTOL, samples=samples, seed=seed
    )
    return _core_options(options, threads=1, chunk_size=8)


def test_loss_rows_reproduce_evolve() -> None:
    result = compare(frame(), times=TIMES, t_start=T_START, t_end=T_END, rtol=RTOL, threads=2)
    assert list(result["error"]) == [""] * len(ROWS)
    core_table = case_table_from_frame(frame()).to_core()
    options = engine_options()
    for k in range(len(ROWS)):
        values = _core.case_values(core_table, k)
        single = single_run(values)
        # The same model: the engine's config and evolve()'s describe it alike, number by number.
        engine = json.loads(_core.case_config(core_table, k, options).to_json())
        assert engine == single.config
        for j, name in enumerate(SPECIES):
            initial = single.config["initial_inventory"][j]
            expected = single.inventory[name] / initial
            # The same path: bitwise the same fractions.
            np.testing.assert_array_equal(result["retained_fraction"][k, :, j], expected[1:])
            assert result["escape_rate_start"][k, j] == single.escape_rate[name][0]
            assert result["given_loss_rate_start"][k, j] == single.given_loss_rate[name][0]
    given = result["given_loss_rate_start"]
    # Constant, and L_ref (F/F_ref)^p at the start (F from the planet's XUV history).
    planet = exosieve.Planet(
        5 * c.M_EARTH, 2.5 * c.R_EARTH, 0.3 * c.AU, exosieve.Star(0.8 * c.M_SUN, 0.4 * c.L_SUN)
    )
    flux = float(planet.xuv_flux(T_START))
    assert given[0, 0] == 1e33
    assert given[0, 1] == pytest.approx(2e32 * (flux / 0.25) ** 1.2, rel=1e-13)
    assert np.all(given[1:3] == 0.0)
    # Each option changes the loss: the rows without them retain other fractions.
    keep = ("case", "T", "heating_efficiency")
    bare = [{k: v for k, v in r.items() if k in keep} for r in ROWS]
    plain = compare(frame(bare), times=TIMES, t_start=T_START, t_end=T_END, rtol=RTOL)
    changed = np.abs(result["final_retained_fraction"] / plain["final_retained_fraction"] - 1)
    assert np.all(changed[:, 0] > 1e-3), changed


def test_uncertain_loss_columns_are_drawn_like_the_others() -> None:
    rows = [dict(ROWS[0]), dict(ROWS[2])]
    table = frame(rows)
    table["given_loss_H_lnsigma [1]"] = [0.3, NAN]
    table["given_loss_exponent_He_sigma [1]"] = [0.1, NAN]
    table["xuv_absorption_cross_section_lnsigma [1]"] = [NAN, 0.3]
    table["recombination_temperature_sigma [K]"] = [NAN, 500.0]
    result = compare(table, times=TIMES, t_start=T_START, t_end=T_END, samples=3, seed=4)
    assert not any(result["error"]) and not result["sample_failed"].any()
    core_table = case_table_from_frame(table).to_core()
    # The drawn inputs are stored with their units, per-species ones too.
    inputs = result.inputs
    assert dict(zip(inputs, result.input_units, strict=True)) == {
        "given_loss_H": "s-1",
        "given_loss_exponent_He": "1",
        "xuv_absorption_cross_section": "m2",
        "recombination_temperature": "K",
    }
    for k, drawn_names in enumerate(
        [
            ("given_loss_H", "given_loss_exponent_He"),
            ("xuv_absorption_cross_section", "recombination_temperature"),
        ]
    ):
        nominal = _core.case_values(core_table, k)
        for sample in range(3):
            drawn = _core.case_values(core_table, k, 4, sample)
            for name in drawn_names:
                assert drawn[name] != nominal[name]
                assert result["sample_input"][k, sample, inputs.index(name)] == drawn[name]
            single = single_run(drawn, t_eval=[T_START, T_END])
            for j, name in enumerate(SPECIES):
                initial = single.config["initial_inventory"][j]
                assert result["sample_retained_fraction"][k, sample, j] == (
                    single.inventory[name][-1] / initial
                )
    with pytest.raises(ValueError, match="'recombination_limit' cannot be given an uncertainty"):
        bad = frame([ROWS[1]])
        bad["recombination_limit_sigma [1]"] = [0.1]
        compare(bad, times=TIMES)


def test_loss_rates_in_sweep_files_and_files_without_them(tmp_path: Path) -> None:
    path = tmp_path / "losses.h5"
    compare(frame(), times=TIMES, t_start=T_START, t_end=T_END, output=path)
    import h5py
    import xarray as xr

    with xr.open_dataset(path, engine="h5netcdf") as ds:
        for name in ("escape_rate_start", "given_loss_rate_start"):
            assert ds[name].attrs["units"] == "s-1"
            assert ds[name].dims == ("case", "species")
        assert "given" in ds["given_loss_rate_start"].attrs["long_name"]
        assert "thermal" in ds["escape_rate_start"].attrs["long_name"]
        assert float(ds["given_loss_rate_start"].sel(species="H")[0]) == 1e33
    back = open_comparison(path)
    summary = back.summary.set_index(["case", "species"])
    assert summary.loc[("given", "H"), "given_loss_rate_start"] == 1e33
    assert summary.attrs["units"]["given_loss_rate_start"] == "s-1"
    assert summary.loc[("absorbed", "H"), "escape_rate_start"] == back["escape_rate_start"][1, 0]
    # A sweep file written before these variables existed: no given losses where a species
    # ran, the thermal rate not recorded (NaN).
    old = tmp_path / "old.h5"
    old.write_bytes(path.read_bytes())
    with h5py.File(old, "a") as f:
        del f["given_loss_rate_start"]
        del f["escape_rate_start"]
    earlier = open_comparison(old)
    np.testing.assert_array_equal(earlier["given_loss_rate_start"], np.zeros((4, 2)))
    assert np.all(np.isnan(earlier["escape_rate_start"]))
    assert "given_loss_rate_start" in earlier.summarize().columns
    np.testing.assert_array_equal(earlier["retained_fraction"], back["retained_fraction"])
    assert main(["summary", str(old)]) == 0
    # It can be read, and opened again by a finished sweep, but not continued: its rows would
    # lack those variables.
    again = compare(frame(), times=TIMES, t_start=T_START, t_end=T_END, output=old)
    assert again.resumed_from == 4
    with h5py.File(old, "a") as f:
        f.attrs["completed"] = np.int64(2)
    with pytest.raises(
        ValueError,
        match=r"earlier version of exosieve, without "
        r"escape_rate_start, given_loss_rate_start; it cannot be continued",
    ):
        compare(frame(), times=TIMES, t_start=T_START, t_end=T_END, output=old)


ROW = r"\(case 'everything'\), "  # a row that cannot run; else the cell cannot be read

BAD_VALUES = [
    ("given_loss_H [s-1]", -1.0, ROW + r"column 'given_loss_H': must be >= 0, got -1 s-1"),
    ("given_loss_H [s-1]", "inf", r"column 'given_loss_H': value inf is not finite"),
    ("given_loss_H [s-1]", "fast", r"column 'given_loss_H': 'fast' is not a number"),
    (
        "given_loss_reference_flux [W m-2]",
        0.0,
        ROW + r"column 'given_loss_reference_flux': must be > 0, got 0 W m-2",
    ),
    (
        "given_loss_reference_flux [erg s-1 cm-2]",
        -4.0,
        ROW + r"column 'given_loss_reference_flux': must be > 0, got -4 erg s-1 cm-2 \(-0.004",
    ),
    (
        "xuv_absorption_cross_section [cm2]",
        0.0,
        ROW + r"column 'xuv_absorption_cross_section': must be > 0, got 0 cm2 \(0 m2\)",
    ),
    (
        "xuv_absorption_base_density [cm-3]",
        -1.0,
        ROW + r"column 'xuv_absorption_base_density': must be > 0, got -1 cm-3 \(-1000000 m-3\)",
    ),
    (
        "xuv_absorption_molecular_mass [u]",
        -2.0,
        ROW + r"column 'xuv_absorption_molecular_mass': must be > 0, got -2 u \(-3.32",
    ),
    (
        "xuv_absorption_chord [1]",
        0.5,
        ROW + "column 'xuv_absorption_chord': must be 0 or 1, got 0.5",
    ),
    ("recombination_limit [1]", 3.0, ROW + "column 'recombination_limit': must be 0 or 1, got 3"),
    (
        "recombination_temperature [K]",
        "-inf",
        r"column 'recombination_temperature': value -inf is not finite",
    ),
    (
        "recombination_photon_energy [eV]",
        0.0,
        ROW + r"column 'recombination_photon_energy': must be > 0, got 0 eV \(0 J\)",
    ),
]


@pytest.mark.parametrize(("header", "value", "message"), BAD_VALUES)
def test_bad_loss_values_are_refused_before_any_run(
    tmp_path: Path, header: str, value: object, message: str
) -> None:
    # The row of every option: the value goes into it, line 2 of the file.
    table = frame([ROWS[3]])
    table["xuv_absorption_temperature [K]"] = [900.0]
    table["xuv_absorption_molecular_mass [u]"] = [2.3]
    table["recombination_temperature [K]"] = [9000.0]
    table["recombination_photon_energy [eV]"] = [18.0]
    table["given_loss_H [s-1]"] = [1e30]
    if header not in table.columns:
        unit_free = header.split(" [")[0]
        table = table.drop(columns=[h for h in table.columns if h.split(" [")[0] == unit_free])
    table[header] = [value]
    path = tmp_path / "bad.csv"
    table.to_csv(path, index=False)
    out = tmp_path / "out.h5"
    with pytest.raises(ValueError, match=r"line 2 " + message):
        compare(path, times=TIMES, output=out)
    assert not out.exists()  # before any run


@pytest.mark.parametrize(
    ("change", "message"),
    [
        (
            {"given_loss_reference_flux": NAN},
            r"column 'given_loss_reference_flux': no value given \(the XUV power law of "
            r"'given_loss_exponent_He' needs it\)",
        ),
        (
            {"given_loss_He": NAN},
            r"column 'given_loss_exponent_He': got 0.5, but the XUV power law needs its rate",
        ),
        (
            {"given_loss_exponent_He": NAN},
            r"column 'given_loss_reference_flux': got 0.25 W m-2, but it is for the XUV power "
            r"law of a given loss",
        ),
        (
            {"heating_efficiency": NAN},
            r"column 'xuv_absorption_cross_section': got [0-9.]+e-22 m2, but it is for "
            r"energy-limited escape \('heating_efficiency'\)",
        ),
        (
            {"heating_efficiency": NAN, "xuv_absorption_cross_section": NAN,
             "xuv_absorption_base_density": NAN},
            r"column 'recombination_limit': got 1, but it caps energy-limited escape",
        ),
        (
            {"xuv_absorption_base_density": NAN},
            r"column 'xuv_absorption_base_density': no value given",
        ),
        (
            {"xuv_absorption_cross_section": NAN},
            r"column 'xuv_absorption_base_density': got 1e\+19 m-3, but it is for the XUV "
            r"absorption radius",
        ),
        (
            {"recombination_limit": 0.0, "recombination_temperature": 9000.0},
            r"column 'recombination_temperature': got 9000 K, but it is for the recombination "
            r"limit",
        ),
    ],
)  # fmt: skip
def test_loss_options_without_what_they_need_are_refused(change: dict, message: str) -> None:
    row = {**ROWS[3], **change}
    with pytest.raises(ValueError, match=r"row 0 \(case 'everything'\), " + message):
        compare(frame([row]), times=TIMES)
    # Reported instead, with bad_rows="report", while a good row runs.
    result = compare(frame([row, ROWS[0]]), times=TIMES, bad_rows="report")
    assert result["error"][1] == ""
    assert "column '" in result["error"][0]


def test_loss_columns_of_absent_or_unknown_species() -> None:
    table = frame([ROWS[0]])
    table["given_loss_O [s-1]"] = [1e20]
    with pytest.raises(ValueError, match="column 'given_loss_O' needs the column 'x_O'"):
        compare(table, times=TIMES)
    table = frame([ROWS[0]]).rename(columns={"given_loss_H [s-1]": "given_loss_Hx [s-1]"})
    with pytest.raises(ValueError, match="'given_loss_Hx'.*Hx"):
        compare(table, times=TIMES)
    table = frame([ROWS[0]]).rename(columns={"given_loss_H [s-1]": "given_loss_H [K]"})
    with pytest.raises(
        ValueError,
        match=r"unit 'K' does not measure given_loss_H \(which is in "
        r"s-1\)",
    ):
        compare(table, times=TIMES)
    # A species with mole fraction 0 is absent: its given loss changes nothing.
    table = frame([ROWS[0]])
    table["x_O"] = [0.0]
    table["given_loss_O [s-1]"] = [1e40]
    assert compare(table, times=TIMES)["error"][0] == ""


def test_columns_command_lists_the_loss_columns_in_their_groups(
    capsys: pytest.CaptureFixture[str],
) -> None:
    assert main(["columns"]) == 0
    lines = capsys.readouterr().out.splitlines()

    def at(text: str) -> int:
        return next(i for i, line in enumerate(lines) if line.startswith(text))

    heading = at("Energy-limited hydrodynamic escape:")
    given = at("Losses given beyond thermal escape")
    composition = at("Bulk atmosphere:")
    for name in (
        "xuv_absorption_cross_section",
        "xuv_absorption_base_density",
        "xuv_absorption_temperature",
        "xuv_absorption_molecular_mass",
        "xuv_absorption_chord",
        "recombination_limit",
        "recombination_temperature",
        "recombination_coefficient",
        "recombination_photon_energy",
    ):
        assert heading < at(f"  {name} ") < given, name
    for name in (
        "given_loss_reference_flux",
        "given_loss_<species>",
        "given_loss_exponent_<species>",
    ):
        assert given < at(f"  {name} ") < composition, name
    assert "[s-1]" in lines[at("  given_loss_<species> ")]


def test_template_has_a_loss_row_that_runs() -> None:
    table = load_cases(case_table_template_path())
    rows = np.nonzero(np.isfinite(table.columns["xuv_absorption_cross_section"]))[0]
    assert len(rows) == 1
    k = int(rows[0])
    for name in ("recombination_limit", "given_loss_reference_flux"):
        assert np.isfinite(table.columns[name][k])
    assert any(name.startswith("given_loss_exponent_") for name in table.columns)
    result = compare(case_table_template_path(), times=4)
    assert result["error"][k] == ""
    assert np.nanmax(result["given_loss_rate_start"][k]) > 0


def test_loss_options_with_an_envelope() -> None:
    # An invented sub-Neptune whose H/He envelope shrinks as it is lost (core_mass,
    # envelope_fraction): the absorption radius (at the evolving planet radius) and a given
    # loss as evolve(envelope=...) has them; the recombination limit is not supported with an
    # envelope and is refused naming its column.
    a = 0.1 * c.AU
    table = pd.DataFrame(
        {
            "case": ["enveloped"],
            "core_mass [M_earth]": [4.0],
            "envelope_fraction [1]": [0.02],
            "semi_major_axis [au]": [a / c.AU],
            "star_mass [M_sun]": [0.8],
            "star_luminosity [L_sun]": [0.4],
            "exobase_altitude [km]": [1000.0],
            "exobase_composition": ["bulk"],
            "exobase_density [m-3]": [1e13],
            "exobase_temperature [K]": [8000.0],
            "heating_efficiency [1]": [0.15],
            "xuv_absorption_cross_section [m2]": [2e-22],
            "xuv_absorption_base_density [m-3]": [1e17],
            "xuv_absorption_temperature [K]": [1000.0],
            "given_loss_He [s-1]": [1e31],
            "inventory [particles]": [1e48],
            "x_H2": [0.85],
            "x_He": [0.15],
        }
    )
    result = compare(table, times=TIMES, t_start=T_START, t_end=T_END, rtol=RTOL)
    assert result["error"][0] == ""
    v = _core.case_values(case_table_from_frame(table).to_core(), 0)
    core, f = v["core_mass"], v["envelope_fraction"]
    flux = v["star_luminosity"] / (4 * np.pi * v["semi_major_axis"] ** 2)
    radius = float(exosieve.envelope_planet_radius(core, f, flux, T_START))
    star = exosieve.Star(v["star_mass"], v["star_luminosity"])
    planet = exosieve.Planet(core / (1 - f), radius, v["semi_major_axis"], star)
    x = {"H2": v["x_H2"], "He": v["x_He"]}
    total = sum(x.values())
    exobase = exosieve.PrescribedExobase(
        radius + v["exobase_altitude"],
        v["exobase_temperature"],
        {s: x[s] / total * v["exobase_density"] for s in x},
    )
    mean = sum(x[s] * exosieve.species(s).mass for s in x) / total
    hydro = exosieve.EnergyLimitedEscape(
        v["heating_efficiency"],
        absorption={
            "base_density": v["xuv_absorption_base_density"],
            "cross_section": v["xuv_absorption_cross_section"],
            "mean_molecular_mass": mean,
            "temperature": v["xuv_absorption_temperature"],
        },
    )
    single = exosieve.evolve(
        planet,
        exobase,
        {s: v["inventory"] * x[s] / total for s in x},
        (T_START, T_END),
        t_eval=[T_START, *TIMES[:-1], T_END],
        rtol=RTOL,
        hydrodynamic=hydro,
        given_losses={"He": v["given_loss_He"]},
        envelope=exosieve.Envelope(core, f),
    )
    engine = json.loads(_core.case_config(case_table_from_frame(table).to_core(), 0,
                                          engine_options()).to_json())  # fmt: skip
    assert engine == single.config
    for j, name in enumerate(["H2", "He"]):
        expected = single.inventory[name] / single.config["initial_inventory"][j]
        np.testing.assert_array_equal(result["retained_fraction"][0, :, j], expected[1:])
    assert result["given_loss_rate_start"][0, 1] == 1e31
    assert result["planet_radius_end"][0] < result["planet_radius"][0]  # the envelope shrank
    table["recombination_limit [1]"] = [1.0]
    with pytest.raises(ValueError, match=r"column 'recombination_limit': got 1, but the "
                       r"recombination limit is not supported with an envelope"):  # fmt: skip
        compare(table, times=TIMES, t_start=T_START, t_end=T_END)


def test_catalogue_examples_run() -> None:
    import doctest

    from exosieve import catalogue

    result = doctest.testmod(catalogue)
    assert result.failed == 0 and result.attempted >= 11
