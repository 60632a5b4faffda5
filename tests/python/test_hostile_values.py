"""Hostile values at every public array entry point and the main constructors.

Property: a non-finite, boolean, complex, huge, tiny, wrong-type or wrong-shape value for any
one argument gives a ValueError naming that argument; finite valid inputs never give NaN.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from typing import Any

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import exosieve
from exosieve.constants import M_EARTH, M_SUN, R_EARTH

# derandomize: every machine draws the same examples, so a run here and in CI try the same.
SETTINGS = settings(
    max_examples=50,
    deadline=None,
    derandomize=True,
    suppress_health_check=[HealthCheck.too_slow],
)

H = exosieve.species("H").mass

# name -> (callable taking keyword arguments, valid keyword arguments, scalar-only names)
Entry = tuple[Callable[..., Any], dict[str, Any], frozenset[str]]
NONE: frozenset[str] = frozenset()
FLUX = {
    "density": 1e12,
    "temperature": 1000.0,
    "mass": H,
    "planet_mass": M_EARTH,
    "radius": R_EARTH,
}
ENTRIES: dict[str, Entry] = {
    "most_probable_speed": (exosieve.most_probable_speed, {"temperature": 300.0, "mass": H}, NONE),
    "mean_speed": (exosieve.mean_speed, {"temperature": 300.0, "mass": H}, NONE),
    "rms_speed": (exosieve.rms_speed, {"temperature": 300.0, "mass": H}, NONE),
    "speed_pdf": (exosieve.speed_pdf, {"speed": 1e3, "temperature": 300.0, "mass": H}, NONE),
    "fraction_faster": (
        exosieve.fraction_faster,
        {"speed": 1e3, "temperature": 300.0, "mass": H},
        NONE,
    ),
    "log_fraction_faster": (
        exosieve.log_fraction_faster,
        {"speed": 1e3, "temperature": 300.0, "mass": H},
        NONE,
    ),
    "escape_speed": (exosieve.escape_speed, {"planet_mass": M_EARTH, "radius": R_EARTH}, NONE),
    "jeans_parameter": (
        exosieve.jeans_parameter,
        {"temperature": 1000.0, "mass": H, "planet_mass": M_EARTH, "radius": R_EARTH},
        NONE,
    ),
    "jeans_flux": (exosieve.jeans_flux, FLUX, NONE),
    "log_jeans_flux": (exosieve.log_jeans_flux, FLUX, NONE),
    "jeans_energy_flux": (exosieve.jeans_energy_flux, FLUX, NONE),
    "jeans_escape_rate": (exosieve.jeans_escape_rate, FLUX, NONE),
    "log_jeans_escape_rate": (exosieve.log_jeans_escape_rate, FLUX, NONE),
    "binary_diffusion_parameter": (
        lambda **k: exosieve.binary_diffusion_parameter("H", "N2", **k),
        {"temperature": 300.0},
        NONE,
    ),
    "diffusion_limited_flux": (
        lambda **k: exosieve.diffusion_limited_flux("H2", "N2", **k),
        {
            "mixing_ratio": 1e-5,
            "temperature": 200.0,
            "planet_mass": M_EARTH,
            "radius": R_EARTH + 1e5,
        },
        NONE,
    ),
    "coupled_escape_flux": (
        exosieve.coupled_escape_flux,
        {
            "jeans_flux_eq": 1e10,
            "diffusion_parameter": 1e21,
            "mixing_ratio": 1e-5,
            "beta": 1e-4,
            "thickness": 4e5,
        },
        NONE,
    ),
    "classify_regime": (exosieve.classify_regime, {"jeans_parameter": 5.0}, NONE),
    "roche_lobe_factor": (exosieve.roche_lobe_factor, {"xi": 2.0}, NONE),
    "roche_lobe_ratio": (
        exosieve.roche_lobe_ratio,
        {"planet_mass": M_EARTH, "star_mass": M_SUN, "semi_major_axis": 1.5e11, "radius": R_EARTH},
        NONE,
    ),
    "energy_limited_mass_loss": (
        exosieve.energy_limited_mass_loss,
        {
            "efficiency": 0.15,
            "planet_radius": R_EARTH,
            "xuv_radius": R_EARTH,
            "xuv_flux": 10.0,
            "planet_mass": M_EARTH,
        },
        NONE,
    ),
    "Star": (
        exosieve.Star,
        {"mass": M_SUN, "luminosity": 3.8e26, "saturation_time": 3e15, "decay_index": 1.2},
        None,
    ),
    "Planet": (exosieve.Planet, {"mass": M_EARTH, "radius": R_EARTH}, None),
    "XuvTemperature": (
        exosieve.XuvTemperature,
        {
            "reference_temperature": 1000.0,
            "reference_flux": 1e-3,
            "exponent": 0.5,
            "minimum": 500.0,
            "maximum": 5000.0,
        },
        None,
    ),
    "XuvTemperature.temperature": (
        lambda **k: exosieve.XuvTemperature(1000.0, 1e-3, 0.5, 500.0, 5000.0).temperature(**k),
        {"xuv_flux": 1e-3},
        None,
    ),
    "TabulatedTemperature": (
        exosieve.TabulatedTemperature,
        {"times": [0.0, 1e16], "temperatures": [900.0, 1000.0]},
        NONE,
    ),
    "TabulatedTemperature.__call__": (
        lambda **k: exosieve.TabulatedTemperature([0.0, 1e16], [900.0, 1000.0])(**k),
        {"t": 5e15},
        None,
    ),
    "TabulatedSource": (
        exosieve.TabulatedSource,
        {"times": [0.0, 1e16], "rates": [1e20, 0.0]},
        NONE,
    ),
    "TabulatedSource.__call__": (
        lambda **k: exosieve.TabulatedSource([0.0, 1e16], [1e20, 0.0])(**k),
        {"t": 5e15},
        None,
    ),
    "Thermosphere": (
        lambda **k: exosieve.Thermosphere((M_EARTH, R_EARTH), composition={"N2": 1.0}, **k),
        {
            "homopause_radius": R_EARTH + 1e5,
            "homopause_density": 1e19,
            "exobase_temperature": 1000.0,
        },
        None,
    ),
    "ocean_depth_to_water": (
        exosieve.ocean_depth_to_water,
        {"depth": 2700.0, "radius": R_EARTH, "density": 1000.0},
        NONE,
    ),
    "water_to_ocean_depth": (
        exosieve.water_to_ocean_depth,
        {"molecules": 4.6e46, "radius": R_EARTH, "density": 1000.0},
        NONE,
    ),
    "ocean_depth_to_hydrogen": (
        exosieve.ocean_depth_to_hydrogen,
        {"depth": 2700.0, "radius": R_EARTH, "density": 1000.0},
        NONE,
    ),
    "hydrogen_to_ocean_depth": (
        exosieve.hydrogen_to_ocean_depth,
        {"atoms": 9.2e46, "radius": R_EARTH, "density": 1000.0},
        NONE,
    ),
}


def scalar_only(entry: Entry) -> frozenset[str]:
    _, valid, only = entry
    return frozenset(valid) if only is None else only


# (class, value, text the message must hold besides the argument's name, or None)
HOSTILE: list[tuple[str, Any, str | None]] = [
    ("nan", math.nan, "nan"),
    ("inf", math.inf, "inf"),
    ("-inf", -math.inf, "inf"),
    ("numpy nan", np.float64("nan"), "nan"),
    ("array with nan", np.array([2.0, np.nan]), "nan"),
    ("True", True, "True"),
    ("False", False, "False"),
    ("numpy bool", np.bool_(True), "True"),
    ("bool array", np.array([True, False]), None),
    ("list with a bool", [1.0, True], None),
    ("complex", 1.0 + 2.0j, "complex"),
    ("complex array", np.array([1.0 + 0.5j]), "complex"),
    ("complex, zero imaginary", np.complex128(5.0), "complex"),
    ("huge int", 10**400, "401 digits"),
    ("huge int in a list", [1.0, 10**400], None),
    ("str", "hot", None),
    ("numeric str", "300", None),
    ("None", None, None),
    ("object", object(), None),
    ("dict", {"a": 1.0}, None),
    ("ragged", [[1.0, 2.0], [3.0]], None),
]
SHAPE_ONLY: list[tuple[str, Any, str | None]] = [("array for a scalar", np.ones(3), None)]

# Arguments whose value may legitimately be zero or negative: a bool False or 0-valued item
# is still refused as a bool; a finite negative is checked elsewhere.
CASES = [
    (entry_name, arg, label, value, text)
    for entry_name, entry in ENTRIES.items()
    for arg in entry[1]
    for label, value, text in HOSTILE + (SHAPE_ONLY if arg in scalar_only(entry) else [])
]


@pytest.mark.parametrize(
    ("entry_name", "arg", "label", "value", "text"),
    CASES,
    ids=[f"{e}-{a}-{label}" for e, a, label, _, _ in CASES],
)
def test_hostile_value_is_refused_naming_the_argument(entry_name, arg, label, value, text):
    function, valid, _ = ENTRIES[entry_name]
    kwargs = dict(valid)
    kwargs[arg] = value
    with pytest.raises(ValueError) as caught:
        function(**kwargs)
    message = str(caught.value)
    assert arg.split("_")[-1] in message, (entry_name, arg, label, message)
    if text is not None and not (arg in scalar_only(ENTRIES[entry_name]) and np.ndim(value)):
        assert text in message, (entry_name, arg, label, message)


# Property over every argument of every entry point: one hostile value drawn at random, in an
# array of random length or alone; the others valid.
hostile_scalars = st.one_of(
    st.sampled_from([math.nan, -math.inf, math.inf, True, False, 10**400, -(10**309)]),
    st.complex_numbers(allow_nan=False, allow_infinity=False).filter(lambda z: z.imag != 0),
    # a species name ("H") is a valid mass for the functions that take species names
    st.text(min_size=1, max_size=5).filter(lambda s: s not in set(exosieve.species_names())),
)


@pytest.mark.parametrize("entry_name", sorted(ENTRIES))
@SETTINGS
@given(data=st.data())
def test_property_hostile_values(entry_name, data):
    function, valid, _ = ENTRIES[entry_name]
    arg = data.draw(st.sampled_from(sorted(valid)))
    bad = data.draw(hostile_scalars)
    kwargs = dict(valid)
    if arg not in scalar_only(ENTRIES[entry_name]) and data.draw(st.booleans()):
        good = np.atleast_1d(np.asarray(valid[arg], dtype=float)).tolist()
        bad = [*good, bad]
    kwargs[arg] = bad
    with pytest.raises(ValueError) as caught:
        function(**kwargs)
    assert arg.split("_")[-1] in str(caught.value)


positive = st.floats(min_value=1e-300, max_value=1e300, allow_nan=False, allow_infinity=False)
JEANS = [
    exosieve.jeans_flux,
    exosieve.log_jeans_flux,
    exosieve.jeans_energy_flux,
    exosieve.jeans_escape_rate,
    exosieve.log_jeans_escape_rate,
]


@pytest.mark.parametrize("function", JEANS, ids=lambda f: f.__name__)
@SETTINGS
@given(n=positive, T=positive, m=positive, M=positive, r=positive)
def test_property_finite_inputs_give_no_nan(function, n, T, m, M, r):
    value = function(n, T, m, M, r)
    assert not math.isnan(value)
    if function.__name__.startswith("log_"):
        # ln n + ln v0 + ln(1 + lambda) - lambda: finite (or -inf when lambda overflows)
        assert value < math.inf


@SETTINGS
@given(T=positive, m=positive, M=positive, r=positive)
def test_property_jeans_parameter_matches_its_logarithm(T, m, M, r):
    # lambda = G M m / (k T r): the kernel keeps products that over- or underflow in logs.
    lam = exosieve.jeans_parameter(T, m, M, r)
    log_lam = (
        math.log(exosieve.constants.G)
        + math.log(M)
        + math.log(m)
        - math.log(exosieve.constants.K_B)
        - math.log(T)
        - math.log(r)
    )
    if -700 < log_lam < 700:
        assert math.isclose(math.log(lam), log_lam, rel_tol=1e-12, abs_tol=1e-12)
    assert not math.isnan(lam)


def test_log_jeans_flux_at_the_largest_temperatures():
    # At T = 1e308 lambda ~ 0: ln Phi = ln n + ln sqrt(2 k T / m) - ln(2 sqrt(pi)) (closed form)
    T = 1e308
    expected = (
        math.log(1e12)
        + 0.5 * (math.log(2 * exosieve.constants.K_B) + math.log(T) - math.log(H))
        - math.log(2 * math.sqrt(math.pi))
    )
    value = exosieve.log_jeans_flux(1e12, T, H, M_EARTH, R_EARTH)
    assert math.isclose(value, expected, rel_tol=1e-12)
    rate = exosieve.log_jeans_escape_rate(1e12, T, H, M_EARTH, 1e300)
    assert math.isfinite(rate)


def test_species_names_only_for_mass_arguments():
    assert exosieve.jeans_parameter(1000.0, "H", M_EARTH, R_EARTH) == pytest.approx(
        exosieve.jeans_parameter(1000.0, H, M_EARTH, R_EARTH), rel=1e-15
    )
    with pytest.raises(ValueError, match="planet_mass must be a number"):
        exosieve.jeans_parameter(1000.0, "H", "N2", R_EARTH)
    with pytest.raises(ValueError, match="light_mass must be a number"):
        exosieve.crossover_mass("H", 1000.0, 1e12, 1e21, 9.8, 0.1)


def test_compare_refuses_bad_output_times_percentiles_and_progress(tmp_path, monkeypatch):
    from exosieve import batch

    header = (
        "case,planet_mass [M_earth],planet_radius [R_earth],exobase_altitude [km],"
        "exobase_density [m-3],exobase_temperature [K],inventory [particles],x_N2,x_He,x_H,"
        "exobase_composition"
    )
    path = tmp_path / "cases.csv"  # an invented Earth-like case
    path.write_text(f"{header}\nP0,1.0,1.0,500,1e13,1000,1e37,0.7,0.25,0.05,bulk\n")
    runs = []
    monkeypatch.setattr(batch._core, "run_batch", lambda *a, **k: runs.append(a))
    gyr = 1e9 * exosieve.constants.YEAR
    bad = [
        ({"times": 16.0}, "times must be a count >= 2 or a 1-D array of at least one output age"),
        ({"times": []}, r"times must be .*got shape \(0,\)"),
        ({"times": [1e15, np.nan]}, r"times must be finite, got nan \(element 1\)"),
        ({"times": [1e15, 100 * gyr]}, r"times must lie within the ages run.*\(element 1\)"),
        ({"times": [True, 1e16]}, "times must be a count"),
        ({"percentiles": (150,)}, r"percentiles must be numbers in \[0, 100\], got \(150,\)"),
        ({"percentiles": ()}, r"percentiles must be numbers in \[0, 100\]"),
        ({"percentiles": (True,)}, r"percentiles must be numbers in \[0, 100\]"),
        ({"progress": "yes"}, r"progress must be True, False or a callable"),
        ({"progress": 1}, r"progress must be True, False or a callable"),
    ]
    for kwargs, message in bad:
        with pytest.raises(ValueError, match=message):
            exosieve.compare(path, t_start=1e15, t_end=gyr, **kwargs)
    assert runs == []  # refused before any run


def test_jeans_parameter_keeps_its_digits_where_k_t_is_subnormal():
    # k T = 1.4e-323 J at T = 1e-300 K is subnormal (3 significant digits); lambda itself,
    # ~ e^685, is an ordinary double. Closed form in logarithms.
    T, m, M, r = 1.0000000000000002e-300, 1.0, 1.0, 1501199875790166.0
    log_lam = (
        math.log(exosieve.constants.G)
        + math.log(M)
        + math.log(m)
        - math.log(exosieve.constants.K_B)
        - math.log(T)
        - math.log(r)
    )
    lam = exosieve.jeans_parameter(T, m, M, r)
    assert math.isclose(math.log(lam), log_lam, rel_tol=1e-12, abs_tol=1e-12)


# Case-table columns of the loss options, and hostile cells: not numbers, non-finite, the
# extremes of the double range, subnormals, signed zeros.
LOSS_COLUMNS = [
    "given_loss_H [s-1]",
    "given_loss_He [s-1]",
    "given_loss_exponent_He [1]",
    "given_loss_reference_flux [W m-2]",
    "xuv_absorption_cross_section [m2]",
    "xuv_absorption_base_density [m-3]",
    "xuv_absorption_temperature [K]",
    "xuv_absorption_molecular_mass [u]",
    "xuv_absorption_chord [1]",
    "recombination_limit [1]",
    "recombination_temperature [K]",
    "recombination_coefficient [m3 s-1]",
    "recombination_photon_energy [eV]",
]
HOSTILE_CELLS = ["1e999", "-1e999", "True", "0x10", "1e308", "-1e308", "1e300", "1e-300"]
HOSTILE_CELLS += ["1e-320", "-1e-320", "0", "-0"]


@pytest.mark.parametrize("column", LOSS_COLUMNS)
def test_hostile_loss_cells_are_refused_by_column_or_run_to_a_defined_end(tmp_path, column):
    # A row with every loss option (line 2) and a good row (line 3). A hostile cell is refused
    # before any run, naming the line, the column and the value, or the rows run: to finite
    # retained fractions, or to the run's own numerical error for that case alone.
    from test_table_losses import ROWS, TIMES, frame

    everything = {
        **ROWS[3],
        "given_loss_H": 1e30,
        "xuv_absorption_temperature": 900.0,
        "xuv_absorption_molecular_mass": 2.3,
        "xuv_absorption_chord": 0.0,
        "recombination_temperature": 9000.0,
        "recombination_coefficient": 3e-19,
        "recombination_photon_energy": 18.0,
    }
    base = column.split(" [")[0]
    outcomes: dict[str, str] = {}
    for k, cell in enumerate(HOSTILE_CELLS):
        table = frame([everything, ROWS[0]]).astype({column: object})
        table.loc[0, column] = cell
        path, out = tmp_path / f"{k}.csv", tmp_path / f"{k}.h5"
        table.to_csv(path, index=False)
        try:
            result = exosieve.compare(path, times=TIMES, output=out)
        except ValueError as err:
            text = str(err)
            # The column itself, or one that its value leaves without a use.
            assert "line 2 " in text and "column '" in text, (cell, text)
            assert not out.exists(), cell  # before any run
            outcomes[cell] = "refused" if f"column '{base}'" in text else text
            continue
        assert result["error"][1] == "", (cell, result["error"][1])
        error = str(result["error"][0])
        if error:
            assert "no progress" in error or "not finite" in error, (cell, error)
            outcomes[cell] = "numerical error"
        else:
            fractions = result["retained_fraction"][0]
            assert np.all((fractions >= 0.0) & (fractions <= 1.001)), (cell, fractions)
            outcomes[cell] = "ran"
    # The cells that are not numbers, not finite or below the range are refused by column.
    refused = ["1e999", "-1e999", "True", "0x10"]
    if base != "given_loss_exponent_He":  # the only one that may be negative
        refused += ["-1e308", "-1e-320"]
    for cell in refused:
        assert outcomes[cell] == "refused", (cell, outcomes[cell])
