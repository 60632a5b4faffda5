"""An H/He envelope inside evolve(): a sub-Neptune stripped to its rocky core, against an
independent scipy.integrate.solve_ivp integration of the same equations written out here from
the Lopez & Fortney (2014) fit and the energy-limited law (Watson et al. 1981), with a
terminal event; the result arrays and their file; bad input."""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest
import xarray as xr
from numpy.typing import NDArray
from scipy.integrate import solve_ivp

import exosieve as es
from exosieve import constants as c

# An invented sub-Neptune: a 4 Earth-mass core under a 2 % H/He envelope at 0.05 au from a
# Sun-like star (L_xuv / L_bol = 1e-3 until 100 Myr, then falling as t^-1.23).
CORE = 4 * c.M_EARTH
ORBIT = 0.05 * c.AU
SATURATION = 1e-3
T_SAT = 100 * c.MYR
DECAY = 1.23
ETA = 0.02  # heating efficiency [1], low so that stripping comes after saturation
STAR = es.Star(c.M_SUN, c.L_SUN, saturation_ratio=SATURATION, saturation_time=T_SAT)
T0, T1 = 10 * c.MYR, 10 * c.GYR


def _radius(m_env: float, t: float) -> float:
    """R_core + R_env [m], written out from Lopez & Fortney (2014) (coefficients from memory,
    as in exosieve/envelope.py): R_core = R_E (M_core/M_E)^0.25,
    R_env = 2.06 R_E (M_p/M_E)^-0.21 (f/0.05)^0.59 (F/F_E)^0.044 (age/5 Gyr)^-0.11."""
    m_env = max(m_env, 0.0)
    mp = CORE + m_env
    f = m_env / mp
    flux = c.L_SUN / (4 * math.pi * ORBIT**2)
    r_core = c.R_EARTH * (CORE / c.M_EARTH) ** 0.25
    if f == 0.0:
        return r_core
    r_env = (
        2.06
        * c.R_EARTH
        * (mp / c.M_EARTH) ** -0.21
        * (f / 0.05) ** 0.59
        * (flux / 1361.0) ** 0.044
        * (t / (5 * c.GYR)) ** -0.11
    )
    return float(r_core + r_env)


def _xuv_flux(t: float) -> float:
    level = SATURATION * c.L_SUN if t <= T_SAT else SATURATION * c.L_SUN * (t / T_SAT) ** -DECAY
    return float(level / (4 * math.pi * ORBIT**2))


def _mass_loss(m_env: float, t: float) -> float:
    """Energy-limited dM/dt = eta pi R_p^3 F_xuv / (G M_p) [kg s^-1] (XUV at R_p, K = 1)."""
    r = _radius(m_env, t)
    return ETA * math.pi * r**3 * _xuv_flux(t) / (c.G * (CORE + max(m_env, 0.0)))


def _reference(times: NDArray[np.float64], rtol: float) -> tuple[NDArray[np.float64], float]:
    """Envelope mass at `times` [kg] and the stripping time [s] by DOP853 with dense output,
    split at the end of saturation (the kink of the XUV history), with a terminal event at
    M_env = 0; zero after it."""
    m0 = CORE * 0.02 / 0.98
    out = np.zeros(times.size)

    def gone(time: float, y: NDArray[np.float64]) -> float:
        return float(y[0])

    gone.terminal = True  # type: ignore[attr-defined]
    m, start = m0, T0
    for end in (T_SAT, T1):
        sol = solve_ivp(
            lambda time, y: [-_mass_loss(float(y[0]), time)],
            (start, end),
            [m],
            method="DOP853",
            dense_output=True,
            events=gone,
            rtol=rtol,
            atol=rtol * 1e-6 * m0,
        )
        inside = (times >= start) & (times <= sol.t[-1])
        out[inside] = sol.sol(times[inside])[0]
        if sol.t_events[0].size:
            return out, float(sol.t_events[0][0])
        m, start = float(sol.y[0][-1]), end
    return out, math.nan


def _run(times: NDArray[np.float64], rtol: float, opacity: str = "solar") -> es.EvolutionResult:
    env = es.Envelope(CORE, 0.02, opacity=opacity)
    flux = c.L_SUN / (4 * math.pi * ORBIT**2)
    r0 = es.envelope_planet_radius(CORE, 0.02, flux, T0, opacity=opacity)
    planet = es.Planet(CORE, r0, semi_major_axis=ORBIT, star=STAR)
    exobase = es.PrescribedExobase(r0 + 500e3, 3000.0, {"H": 1e12}, scaling="fixed")
    hydro = es.EnergyLimitedEscape(efficiency=ETA, roche_lobe=False, activation="always")
    return es.evolve(
        planet,
        exobase,
        {"H": 1e52},
        (T0, T1),
        t_eval=times,
        rtol=rtol,
        hydrodynamic=hydro,
        envelope=env,
    )


TIMES = np.array([10, 30, 60, 100, 150, 200, 250, 300, 350, 1000, 10_000]) * c.MYR


def test_sub_neptune_stripped_at_the_time_scipy_finds() -> None:
    # The same equations by scipy's DOP853 at rtol 1e-12 (an independent integrator and event
    # location): the stripping times agree to 1e-8 relative at exosieve's rtol 1e-10.
    reference, stripped = _reference(TIMES, 1e-12)
    assert T_SAT < stripped < T1  # stripped after saturation: the kink lies inside the run
    r = _run(TIMES, 1e-10)
    assert r.stripping_time is not None
    assert r.stripping_time == pytest.approx(stripped, rel=1e-8)
    assert r.envelope_mass is not None and r.planet_radius is not None
    alive = reference > 0
    np.testing.assert_allclose(r.envelope_mass[alive], reference[alive], rtol=1e-8)
    assert np.all(r.envelope_mass[~alive] == 0.0)
    # From sub-Neptune to rocky core: above the 1.75 R_E dividing line of Lopez & Fortney
    # (2014, abstract) at the start, the bare core's R_E (M/M_E)^0.25 = sqrt(2) R_E after.
    assert r.planet_radius[0] > 2.0 * c.R_EARTH
    assert r.planet_radius[-1] == pytest.approx(math.sqrt(2) * c.R_EARTH, rel=1e-14)
    np.testing.assert_allclose(
        r.planet_radius[alive],
        [_radius(m, t) for m, t in zip(reference[alive], TIMES[alive], strict=True)],
        rtol=1e-8,
    )
    # The envelope's loss is the energy-limited rate at the evolving radius and mass.
    assert r.envelope_loss_rate is not None
    np.testing.assert_allclose(
        r.envelope_loss_rate[alive],
        [_mass_loss(m, t) for m, t in zip(r.envelope_mass[alive], TIMES[alive], strict=True)],
        rtol=1e-12,
    )
    # The same planet as the standalone envelope_loss() (its own integrator) sees it, with an
    # absolute tolerance (a fraction of the core mass) fine enough for the time of the zero.
    alone = es.envelope_loss(
        CORE, 0.02, ORBIT, STAR, TIMES, efficiency=ETA, rtol=1e-12, atol_fraction=1e-15
    )
    assert r.stripping_time == pytest.approx(alone.stripping_time, rel=1e-8)


@pytest.mark.parametrize("rtol", [1e-4, 1e-6, 1e-8, 1e-10])
def test_envelope_outputs_within_ten_rtol_of_scipy(rtol: float) -> None:
    # The accuracy rule of the inventories (tests/python/test_accuracy.py): every output within
    # 10 (rtol M_env + atol) of the reference, atol = rtol depletion_fraction M_env(start) the
    # envelope's absolute tolerance (depletion_fraction 1e-3); measured: within 0.04-0.09 of it.
    reference, stripped = _reference(TIMES, 1e-13)
    r = _run(TIMES, rtol)
    assert r.envelope_mass is not None and r.stripping_time is not None
    atol = rtol * 1e-3 * reference[0]
    assert np.all(np.abs(r.envelope_mass - reference) <= 10 * (rtol * reference + atol))
    assert abs(r.stripping_time - stripped) <= 10 * rtol * stripped


def test_envelope_results_in_the_file(tmp_path: Path) -> None:
    r = _run(TIMES, 1e-8, opacity="enhanced")
    path = tmp_path / "run.h5"
    r.to_hdf5(path)
    back = es.open_result(path)
    assert back.stripping_time == r.stripping_time
    assert back.core_mass == CORE
    for name in ("envelope_mass", "planet_radius", "envelope_loss_rate"):
        np.testing.assert_array_equal(getattr(back, name), getattr(r, name))
    ds = xr.open_dataset(path, engine="h5netcdf")
    assert ds["envelope_mass"].attrs["units"] == "kg"
    assert ds["planet_radius"].attrs["units"] == "m"
    assert ds["envelope_loss_rate"].attrs["units"] == "kg s-1"
    assert ds["stripping_time"].attrs["units"] == "s"
    assert "envelope" in ds["stripping_time"].attrs["long_name"]
    assert float(ds["stripping_time"]) == r.stripping_time
    ds.close()
    assert r.config["envelope"]["opacity"] == "enhanced"
    # The configuration records the planet the envelope makes at the start, not the unused
    # mass and radius the Planet was given (CORE and the solar-opacity radius here).
    assert r.config["planet"]["mass_kg"] == pytest.approx(CORE / 0.98, rel=1e-15)
    flux = c.L_SUN / (4 * math.pi * ORBIT**2)
    start = es.envelope_planet_radius(CORE, 0.02, flux, T0, opacity="enhanced")
    assert r.config["planet"]["radius_m"] == pytest.approx(start, rel=1e-15)
    assert r.config["hydrodynamic"]["xuv_radius"] == "the evolving planet radius"
    assert r.to_xarray()["planet_radius"].attrs["units"] == "m"
    assert ("envelope_mass", "") in r.to_pandas().columns
    # The enhanced-opacity envelope is larger at these ages (< 5 Gyr, age exponent -0.18
    # against -0.11), so it is lost sooner.
    solar = _run(TIMES, 1e-8)
    assert r.stripping_time is not None and solar.stripping_time is not None
    assert r.stripping_time < solar.stripping_time


def test_runs_without_an_envelope_have_none(tmp_path: Path) -> None:
    planet = es.Planet(c.M_EARTH, c.R_EARTH)
    exo = es.PrescribedExobase(c.R_EARTH + 500e3, 1000.0, {"H": 1e11})
    r = es.evolve(planet, exo, {"H": 1e40}, (0.0, c.GYR))
    assert r.envelope_mass is None and r.planet_radius is None and r.envelope_loss_rate is None
    assert r.core_mass is None and r.stripping_time is None
    r.to_hdf5(tmp_path / "plain.h5")
    back = es.open_result(tmp_path / "plain.h5")
    assert back.core_mass is None and back.envelope_mass is None


@pytest.mark.parametrize(
    ("envelope", "message"),
    [
        ({"core_mass": 0.0}, r"envelope core_mass must be finite and > 0 \[kg\], got 0"),
        ({"core_mass": -2.0}, r"envelope core_mass must be finite and > 0 \[kg\], got -2"),
        ({"envelope_fraction": 1.0}, r"envelope_fraction must be in \[0, 1\) \[1\], got 1"),
        ({"envelope_fraction": -0.5}, r"envelope_fraction must be in \[0, 1\) \[1\], got -0.5"),
        ({"opacity": "dusty"}, "opacity must be 'solar' or 'enhanced', got 'dusty'"),
    ],
)
def test_bad_envelope_raises_naming_the_argument(envelope: dict[str, object], message: str) -> None:
    arguments: dict[str, object] = {"core_mass": CORE, "envelope_fraction": 0.02}
    arguments.update(envelope)
    with pytest.raises(ValueError, match=message):
        es.Envelope(**arguments)  # type: ignore[arg-type]


def test_envelope_needs_the_star_and_the_hydrodynamic_option_before_any_step() -> None:
    calls: list[float] = []
    env = es.Envelope(CORE, 0.02)
    exobase = es.PrescribedExobase(3 * c.R_EARTH, 3000.0, {"H": 1e12})
    hydro = es.EnergyLimitedEscape(efficiency=ETA)
    no_star = es.Planet(CORE, 2 * c.R_EARTH)
    with pytest.raises(ValueError, match="an envelope needs the planet's semi_major_axis and star"):
        es.evolve(
            no_star,
            exobase,
            {"H": 1e52},
            (T0, T1),
            hydrodynamic=hydro,
            envelope=env,
            progress=calls.append,
            progress_every=1,
        )
    with_star = es.Planet(CORE, 2 * c.R_EARTH, semi_major_axis=ORBIT, star=STAR)
    with pytest.raises(ValueError, match="an envelope is lost at the hydrodynamic mass-loss rate"):
        es.evolve(
            with_star,
            exobase,
            {"H": 1e52},
            (T0, T1),
            envelope=env,
            progress=calls.append,
            progress_every=1,
        )
    with pytest.raises(ValueError, match="envelope must be an exosieve.Envelope, got 0.02"):
        es.evolve(with_star, exobase, {"H": 1e52}, (T0, T1), hydrodynamic=hydro, envelope=0.02)  # type: ignore[arg-type]
    assert calls == []
