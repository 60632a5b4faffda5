"""Hostile values at the public entry points that test_hostile_values.py does not reach: the
remaining functions, constructors and methods of ``exosieve.__all__`` that take numbers.

Same property: a non-finite, boolean, complex, huge, wrong-type or wrong-shape value for any
one argument gives a ValueError naming that argument, before any work; a tiny (subnormal)
value is either used without giving NaN or refused by name.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from typing import Any
from unittest import mock

import numpy as np
import pytest
import test_hostile_values
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from test_hostile_values import HOSTILE, SHAPE_ONLY, hostile_scalars

import exosieve
from exosieve import batch
from exosieve.constants import AU, GYR, M_EARTH, M_SUN, R_EARTH

SETTINGS = settings(max_examples=30, deadline=None, suppress_health_check=[HealthCheck.too_slow])

H = exosieve.species("H").mass
N2 = exosieve.species("N2").mass
HEADER = (
    "case,planet_mass [M_earth],planet_radius [R_earth],exobase_altitude [km],"
    "exobase_density [m-3],exobase_temperature [K],inventory [particles],x_N2,x_He,x_H,"
    "exobase_composition"
)
CASES_CSV = f"{HEADER}\nP0,1.0,1.0,500,1e13,1000,1e37,0.7,0.25,0.05,bulk\n"  # invented


def _star() -> exosieve.Star:
    return exosieve.Star(M_SUN, 3.8e26)


def _planet() -> exosieve.Planet:
    return exosieve.Planet(M_EARTH, R_EARTH, semi_major_axis=AU, star=_star())


def _thermosphere() -> exosieve.Thermosphere:
    return exosieve.Thermosphere(
        (M_EARTH, R_EARTH), R_EARTH + 1e5, 1e19, {"N2": 0.99, "H": 0.01}, exobase_temperature=1000.0
    )


def _exobase(**k: Any) -> exosieve.PrescribedExobase:
    return exosieve.PrescribedExobase(k["radius"], k["temperature"], {"H": k["density"]})


def _evolve(**k: Any) -> Any:
    exobase = exosieve.PrescribedExobase(R_EARTH + 5e5, 1000.0, {"H": 1e11})
    return exosieve.evolve(
        exosieve.Planet(M_EARTH, R_EARTH),
        exobase,
        {"H": k["inventory"]},
        k["t_span"],
        rtol=k["rtol"],
        depletion_fraction=k["depletion_fraction"],
        max_steps=k["max_steps"],
        progress_every=k["progress_every"],
        progress=k.get("progress"),
    )


def _invert_ratio(**k: Any) -> Any:
    exobase = exosieve.PrescribedExobase(R_EARTH + 5e5, 1000.0, {"H": 1e11, "D": 1.5e7})
    return exosieve.invert_ratio(
        exosieve.Planet(M_EARTH, R_EARTH),
        exobase,
        {"H": 1e38, "D": 1.5e34},
        (0.0, GYR),
        ratio="D/H",
        **k,
    )


def _invert_case(**k: Any) -> Any:
    if not TABLE:
        raise RuntimeError("the table fixture did not run")
    return exosieve.invert_case(TABLE[0], "P0", ratio="He/H", **k)


def _compare(path_holder: list[Any]) -> Callable[..., Any]:
    def run(**k: Any) -> Any:
        if not path_holder:
            raise RuntimeError("the table fixture did not run")
        with mock.patch.object(batch._core, "run_batch", lambda *a, **kw: None):
            return exosieve.compare(path_holder[0], **k)

    return run


TABLE: list[Any] = []


@pytest.fixture(autouse=True, scope="module")
def _case_table(tmp_path_factory: pytest.TempPathFactory) -> None:
    path = tmp_path_factory.mktemp("cases") / "cases.csv"
    path.write_text(CASES_CSV)
    TABLE.append(path)


def _summarize(**k: Any) -> Any:
    return _comparison().summarize(**k)


_COMPARISON: list[Any] = []


def _comparison() -> Any:
    if not _COMPARISON:
        _COMPARISON.append(exosieve.compare(TABLE[0], t_start=1e15, t_end=GYR, threads=1))
    return _COMPARISON[0]


Entry = tuple[Callable[..., Any], dict[str, Any], frozenset[str] | None]
ENTRIES: dict[str, Entry] = {
    "Star(saturation_ratio)": (
        exosieve.Star,
        {"mass": M_SUN, "luminosity": 3.8e26, "saturation_ratio": 1e-3},
        None,
    ),
    "Star.xuv_luminosity": (lambda **k: _star().xuv_luminosity(**k), {"t": 1e16}, frozenset()),
    "Planet(semi_major_axis)": (
        lambda **k: exosieve.Planet(M_EARTH, R_EARTH, star=_star(), **k),
        {"semi_major_axis": AU},
        None,
    ),
    "Planet.xuv_flux": (lambda **k: _planet().xuv_flux(**k), {"t": 1e16}, frozenset()),
    "PrescribedExobase": (
        _exobase,
        {"radius": R_EARTH + 5e5, "temperature": 1000.0, "density": 1e11},
        None,
    ),
    "EnergyLimitedEscape": (
        exosieve.EnergyLimitedEscape,
        {"efficiency": 0.15, "xuv_radius": R_EARTH},
        None,
    ),
    "RegimeThresholds": (
        exosieve.RegimeThresholds,
        {"enhanced": 6.0, "transition": 3.0, "hydrodynamic": 2.1},
        None,
    ),
    "energy_limited_mass_loss(roche_factor)": (
        lambda **k: exosieve.energy_limited_mass_loss(0.15, R_EARTH, R_EARTH, 10.0, M_EARTH, **k),
        {"roche_factor": 1.0},
        frozenset(),
    ),
    "crossover_mass": (
        exosieve.crossover_mass,
        {
            "light_mass": H,
            "temperature": 1000.0,
            "light_flux": 1e12,
            "diffusion_parameter": 1e21,
            "gravity": 9.8,
            "light_mole_fraction": 0.1,
        },
        frozenset(),
    ),
    "dragged_flux": (
        exosieve.dragged_flux,
        {
            "mass": 4 * H,
            "mole_fraction": 0.05,
            "light_mass": H,
            "light_flux": 1e12,
            "light_mole_fraction": 0.1,
            "crossover_mass": 20 * H,
        },
        frozenset(),
    ),
    "register_species": (
        lambda **k: exosieve.register_species("Xhostile", **k),
        {
            "mass": 50 * H,
            "lj_diameter": 3e-10,
            "lj_well_depth": 100.0,
            "cross_section": 3e-19,
            "thermal_diffusion_factor": 0.0,
        },
        None,
    ),
    "Thermosphere(outer_radius, shape, homopause_temperature)": (
        lambda **k: exosieve.Thermosphere(
            (M_EARTH, R_EARTH), R_EARTH + 1e5, 1e19, {"N2": 1.0}, exobase_temperature=1000.0, **k
        ),
        {"homopause_temperature": 200.0, "shape": 2e-5, "outer_radius": 10 * R_EARTH},
        None,
    ),
    "Thermosphere.temperature": (
        lambda **k: _thermosphere().temperature(**k),
        {"radius": R_EARTH + 2e5},
        frozenset(),
    ),
    "Thermosphere.density": (
        lambda **k: _thermosphere().density("H", **k),
        {"radius": R_EARTH + 2e5},
        frozenset(),
    ),
    "solve_thermospheres": (
        lambda **k: exosieve.solve_thermospheres(composition={"N2": 1.0}, **k),
        {
            "planet_mass": M_EARTH,
            "planet_radius": R_EARTH,
            "homopause_radius": R_EARTH + 1e5,
            "homopause_density": 1e19,
            "exobase_temperature": 1000.0,
        },
        frozenset(),
    ),
    "evolve": (
        _evolve,
        {
            "inventory": 1e30,
            "t_span": [0.0, GYR],
            "rtol": 1e-6,
            "depletion_fraction": 1e-3,
            "max_steps": 10_000,
            "progress_every": 5,
        },
        None,
    ),
    "compare": (
        _compare(TABLE),
        {
            "t_start": 1e15,
            "t_end": GYR,
            "samples": 2,
            "seed": 1,
            "retain": 0.5,
            "depletion_fraction": 1e-3,
            "rtol": 1e-6,
            "max_steps": 10_000,
            "threads": 1,
            "chunk_size": 8,
            "progress_every": 2,
        },
        None,
    ),
    "Comparison.summarize": (_summarize, {"retain": 0.5}, None),
    "invert_ratio": (
        _invert_ratio,
        {
            "measured": 2e-4,
            "sigma": 1e-5,
            "inventory_min": 1e30,
            "inventory_max": 1e45,
            "search_factor": 1e10,
            "tolerance": 1e-9,
            "max_runs": 200,
            "samples": 2,
            "seed": 1,
            "threads": 1,
            "progress_every": 1,
            "rtol": 1e-8,
        },
        None,
    ),
    "invert_ratio(lnsigma)": (_invert_ratio, {"measured": 2e-4, "lnsigma": 0.1}, None),
    "invert_case": (
        _invert_case,
        {
            "measured": 1e3,
            "samples": 1,
            "seed": 1,
            "t_start": 1e15,
            "t_end": GYR,
            "rtol": 1e-6,
            "max_steps": 10_000,
            "depletion_fraction": 1e-3,
        },
        None,
    ),
    "archive_cases": (
        lambda **k: exosieve.archive_cases(exosieve.archive.archive_sample_path(), **k),
        {
            "radius_valley": 1.7 * R_EARTH,
            "exobase_temperature_factor": 4.0,
            "homopause_density": 1e19,
            "homopause_scale_heights": 13.0,
            "surface_pressure": 1e5,
            "envelope_mass_fraction": 0.01,
        },
        None,
    ),
}


# Arguments whose default is None (None means "the default" there, so it is not hostile).
OPTIONAL = {
    ("compare", "threads"),
    ("compare", "chunk_size"),
    ("compare", "progress_every"),
    ("EnergyLimitedEscape", "xuv_radius"),
    ("Thermosphere(outer_radius, shape, homopause_temperature)", "outer_radius"),
    ("Comparison.summarize", "retain"),
    ("evolve", "progress_every"),
    ("invert_ratio", "sigma"),
    ("invert_ratio", "inventory_min"),
    ("invert_ratio", "inventory_max"),
    ("invert_ratio", "threads"),
    ("invert_ratio", "progress_every"),
    ("invert_ratio(lnsigma)", "lnsigma"),
}


def scalar_only(entry: Entry) -> frozenset[str]:
    _, valid, only = entry
    return frozenset(valid) if only is None else only


def hostile_for(entry_name: str, entry: Entry, arg: str) -> list[tuple[str, Any, str | None]]:
    """The hostile values for one argument: an array's NaN sits beside a valid value of it."""
    out = []
    for label, value, text in HOSTILE + (SHAPE_ONLY if arg in scalar_only(entry) else []):
        if label == "None" and (entry_name, arg) in OPTIONAL:
            continue
        if label == "array with nan":
            good = np.asarray(entry[1][arg], dtype=float).reshape(-1)[0]
            value = np.array([good, np.nan])
        out.append((label, value, text))
    return out


CASES = [
    (entry_name, arg, label, value, text)
    for entry_name, entry in ENTRIES.items()
    for arg in entry[1]
    for label, value, text in hostile_for(entry_name, entry, arg)
]


def _named(arg: str, message: str) -> bool:
    return arg in message or arg.split("_")[-1] in message


def test_every_valid_call_works():
    for function, valid, _ in ENTRIES.values():
        function(**valid)  # the baseline of each entry is valid


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
    assert _named(arg, message), (entry_name, arg, label, message)
    if text is not None and not (arg in scalar_only(ENTRIES[entry_name]) and np.ndim(value)):
        assert text in message, (entry_name, arg, label, message)


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
    assert _named(arg, str(caught.value))


TINY = [5e-324, 1e-310]  # subnormal: 2 k T / m and similar products underflow


ALL = {**test_hostile_values.ENTRIES, **ENTRIES}


@pytest.mark.parametrize("entry_name", sorted(ALL))
def test_tiny_values_give_no_nan_or_are_refused_by_name(entry_name):
    function, valid, _ = ALL[entry_name]
    for arg, good in valid.items():
        if not isinstance(good, float) or good == 0.0:
            continue
        for tiny in TINY:
            kwargs = dict(valid)
            kwargs[arg] = tiny
            try:
                value = function(**kwargs)
            except ValueError as err:
                assert _named(arg, str(err)), (entry_name, arg, str(err))
                continue
            except exosieve.NumericalError as err:
                # A result beyond the double range (e.g. a loss rate per particle of 1e353
                # s^-1 for an inventory of 5e-324): refused, never returned as NaN.
                assert "not finite" in str(err), (entry_name, arg, str(err))
                continue
            if isinstance(value, (float, np.ndarray)):
                assert not np.any(np.isnan(value)), (entry_name, arg, tiny)


def test_evolve_refuses_a_progress_that_is_not_callable_before_running(monkeypatch):
    from exosieve import evolution

    runs: list[Any] = []
    monkeypatch.setattr(evolution._core, "evolve", lambda *a, **k: runs.append(a))
    for progress in ("yes", 1, True, [print]):
        with pytest.raises(ValueError, match="progress must be a callable progress"):
            _evolve(**{**ENTRIES["evolve"][1], "progress_every": None}, progress=progress)
    assert runs == []  # refused before any step


@pytest.mark.parametrize(
    ("call", "public", "internal"),
    [
        (
            lambda: exosieve.crossover_mass(H, 1000.0, 1e12, -1.0, 9.8, 0.1),
            "diffusion_parameter",
            "b ",
        ),
        (
            lambda: exosieve.coupled_escape_flux(1e10, -1.0, 1e-5, 1e-4, 4e5),
            "diffusion_parameter",
            "b ",
        ),
        (
            lambda: exosieve.Thermosphere(
                (M_EARTH, R_EARTH),
                -1.0,
                1e19,
                {"N2": 1.0},
                exobase_temperature=1000.0,
                homopause_temperature=200.0,
                shape=2e-5,
            ),
            "homopause_radius",
            "base_radius",
        ),
        (
            lambda: exosieve.TabulatedTemperature([math.nan, 1e16], [900.0, 1000.0]),
            "times must be finite",
            "times[0]",
        ),
        (
            lambda: _compare(TABLE)(t_start=1e15, t_end=GYR, times=[math.nan, 1e16]),
            "times must be finite",
            "times[0]",
        ),
    ],
    ids=[
        "crossover_mass",
        "coupled_escape_flux",
        "Thermosphere",
        "TabulatedTemperature",
        "compare",
    ],
)
def test_messages_name_the_argument_the_caller_gave(call, public, internal):
    with pytest.raises(ValueError) as caught:
        call()
    message = str(caught.value)
    assert public in message and internal not in message, message
