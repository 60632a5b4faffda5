"""Time in each escape regime and where each species' loss went: evolve() results, their files,
the sweep variables (the same numbers as evolve() on each row), the extended
``hydrodynamic_unmodelled`` flag in the summary, the CLI's words and the retention chart."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
import test_table_losses as losses

import exosieve
from exosieve import _core
from exosieve import constants as c
from exosieve.batch import compare
from exosieve.catalogue import case_table_from_frame
from exosieve.cli import main

pd = pytest.importorskip("pandas")

NAN = float("nan")
PARTS = (*exosieve.REGIMES, "energy_limited", "given")


def test_sweep_regime_variables_are_evolves_number_by_number() -> None:
    # The rows of test_table_losses (given losses; energy-limited loss with absorption and the
    # recombination limit), whose evolve() runs are bitwise those of the sweep.
    table = losses.frame()
    result = compare(
        table,
        times=losses.TIMES,
        t_start=losses.T_START,
        t_end=losses.T_END,
        rtol=losses.RTOL,
        threads=2,
    )
    core_table = case_table_from_frame(table).to_core()
    for k in range(len(losses.ROWS)):
        single = losses.single_run(_core.case_values(core_table, k))
        shares = single.loss_shares()
        for j, name in enumerate(losses.SPECIES):
            i = single.species.index(name)
            for m, regime in enumerate(exosieve.REGIMES):
                assert result[f"regime_time_{regime}"][k, j] == single.regime_time[i, m]
            for part in PARTS:
                assert result[f"loss_share_{part}"][k, j] == shares[name][part]
            assert result["non_jeans_loss_share"][k, j] == single.non_jeans_loss_share[name]
            # Each species' regimes take the whole span, and its shares sum to 1.
            span = sum(result[f"regime_time_{r}"][k, j] for r in exosieve.REGIMES)
            assert span == pytest.approx(losses.T_END - losses.T_START, rel=1e-14)
            assert sum(shares[name].values()) == pytest.approx(1.0, rel=1e-14)
    summary = result.summary.set_index(["case", "species"])
    assert summary.loc[("given", "H"), "non_jeans_loss_share"] == pytest.approx(
        result["non_jeans_loss_share"][0, 0], rel=0
    )
    # The constant given loss of H (1e33 s^-1 over 4.49 Gyr) is a share of its loss; the
    # energy-limited rows take all of H's loss outside the Jeans picture.
    given_h = result["loss_share_given"][0, 0]
    assert 0.0 < given_h < 1.0
    assert np.all(result["loss_share_energy_limited"][1:, 0] > 0.0)


def test_loss_parts_sum_to_the_inventory_fall() -> None:
    # An invented planet whose exobase heats linearly from 800 to 4000 K: H crosses lambda =
    # 6, 3 and 2.1, each located; its loss parts are the fall of its inventory.
    planet = exosieve.Planet(c.M_EARTH, c.R_EARTH)
    history = exosieve.TabulatedTemperature([0.0, c.GYR], [800.0, 4000.0])
    exobase = exosieve.PrescribedExobase(c.R_EARTH + 500e3, history, {"H": 1e11, "O": 1e12})
    run = exosieve.evolve(planet, exobase, {"H": 1e36, "O": 1e38}, (0.0, c.GYR), rtol=1e-10)
    h = run.species.index("H")
    parts = run.regime_loss[h].sum() + run.energy_limited_loss[h] + run.given_loss[h]
    fall = run.initial_inventory[h] - run.inventory["H"][-1]
    assert parts == pytest.approx(fall, rel=1e-12)
    assert np.all(run.regime_time[h] > 0.0)  # every regime visited
    assert run.regime_time[h].sum() == pytest.approx(c.GYR, rel=1e-14)
    # lambda_H at 800 K is 8.8: the Jeans regime lasts until T = T(lambda = 6), on the table.
    lam_800 = exosieve.jeans_parameter(
        800.0, exosieve.species("H").mass, c.M_EARTH, c.R_EARTH + 500e3
    )
    t6 = (800.0 * lam_800 / 6.0 - 800.0) / 3200.0 * c.GYR
    assert run.regime_time[h, 0] == pytest.approx(t6, rel=1e-12)
    assert run.regime_time[run.species.index("O"), 0] == pytest.approx(c.GYR, rel=1e-14)
    assert run.non_jeans_loss_share["O"] == 0.0


def test_result_file_and_xarray_keep_the_regime_variables(tmp_path: Path) -> None:
    planet = exosieve.Planet(c.M_EARTH, c.R_EARTH)
    history = exosieve.TabulatedTemperature([0.0, c.GYR], [800.0, 2000.0])
    exobase = exosieve.PrescribedExobase(c.R_EARTH + 500e3, history, {"H": 1e11})
    run = exosieve.evolve(planet, exobase, {"H": 1e36}, (0.0, c.GYR), given_losses={"H": 1e20})
    path = tmp_path / "run.h5"
    run.to_hdf5(path)
    back = exosieve.open_result(path)
    np.testing.assert_array_equal(back.regime_time, run.regime_time)
    np.testing.assert_array_equal(back.regime_loss, run.regime_loss)
    np.testing.assert_array_equal(back.given_loss, run.given_loss)
    assert back.non_jeans_loss_share == run.non_jeans_loss_share
    assert back.loss_shares() == run.loss_shares()
    xr = pytest.importorskip("xarray")
    with xr.open_dataset(path, engine="h5netcdf") as ds:
        assert list(ds["escape_regime"].values) == list(exosieve.REGIMES)
        assert ds["regime_time"].dims == ("species", "escape_regime")
        assert ds["regime_time"].attrs["units"] == "s"
        assert (
            float(ds["regime_time"].sel(species="H", escape_regime="jeans"))
            == (run.regime_time[0, 0])
        )
    memory = run.to_xarray()
    assert memory["non_jeans_loss_share"].attrs["units"] == "1"
    np.testing.assert_array_equal(memory["bulk_regime_time"].values, run.bulk_regime_time)


def flag_table() -> pd.DataFrame:
    # Invented Earth-mass planets of pure H with an exobase half an Earth radius up: "heats up"
    # starts at lambda = 8 and ends at lambda = 1.5, worked by hand from lambda = G M m / (k T r)
    # (Volkov et al. 2011 threshold 2.1 crossed on the way); "cool" stays Jeans.
    r = 1.5 * c.R_EARTH
    t_of = c.G * c.M_EARTH * exosieve.species("H").mass / (c.K_B * r)
    n = 3
    return pd.DataFrame(
        {
            "case": ["heats up", "heats up, energy limited", "cool"],
            "planet_mass [M_earth]": [1.0] * n,
            "planet_radius [R_earth]": [1.0] * n,
            "exobase_altitude [R_earth]": [0.5] * n,
            "exobase_density [m-3]": [1e10] * n,
            "exobase_temperature [K]": [t_of / 8.0, t_of / 8.0, 700.0],
            "exobase_temperature_end [K]": [t_of / 1.5, t_of / 1.5, 700.0],
            "heating_efficiency [1]": [NAN, 0.15, NAN],
            "semi_major_axis [au]": [1.0] * n,
            "star_mass [M_sun]": [1.0] * n,
            "star_luminosity [L_sun]": [1.0] * n,
            "inventory [particles]": [1e44] * n,
            "x_H": [1.0] * n,
            "exobase_composition": ["bulk"] * n,
        }
    )


def test_a_case_that_goes_hydrodynamic_later_is_flagged() -> None:
    result = compare(flag_table(), times=[c.GYR, 4.5 * c.GYR])
    assert list(result["error"]) == [""] * 3
    assert result["bulk_jeans_parameter_start"][0] == pytest.approx(8.0, rel=1e-12)
    assert list(result["hydrodynamic_unmodelled"]) == [1, 0, 0]
    assert list(result.summary["hydrodynamic_unmodelled"]) == [True, False, False]
    h = result.species.index("H")
    assert result["regime_time_hydrodynamic"][0, h] > 0.0
    assert 0.0 < result["non_jeans_loss_share"][0, h] < 1.0
    assert result["loss_share_energy_limited"][1, h] > 0.0
    assert result["non_jeans_loss_share"][2, h] == 0.0


def test_cli_says_which_cases_go_hydrodynamic_later(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    path = tmp_path / "cases.csv"
    flag_table().to_csv(path, index=False)
    out = tmp_path / "cases.h5"
    assert main(["sweep", str(path), "-o", str(out), "--quiet", "--times", "3"]) == 0
    text = capsys.readouterr().out
    assert (
        "1 case goes hydrodynamic (the bulk gas at or below the hydrodynamic threshold of "
        "the Jeans parameter, at the start or later in the run)" in text
    )
    assert "heats up (row 0): bulk Jeans parameter 8 at the start, 1.5 at the end; H: " in text
    assert "of its loss outside the Jeans picture" in text
    assert "heats up, energy limited (row" not in text
    assert main(["summary", str(out)]) == 0
    shown = capsys.readouterr().out
    assert "non-Jeans [1]" in shown
    assert "heats up (row 0): bulk Jeans parameter 8 at the start" in shown


def test_retention_chart_rings_the_unmodelled_cases() -> None:
    pytest.importorskip("matplotlib")
    import matplotlib.pyplot as plt

    from exosieve.plot import retention_chart

    label = "goes hydrodynamic, no energy-limited model"
    fig = retention_chart(compare(flag_table(), times=[c.GYR, 4.5 * c.GYR]))
    rings = [
        coll
        for ax in fig.axes
        for coll in ax.collections
        if coll.get_gid() == "hydrodynamic_unmodelled"
    ]
    assert len(rings) == 1
    assert rings[0].get_offsets().shape == (1, 2)  # one case ringed
    legend = [t.get_text() for lg in fig.legends for t in lg.get_texts()]
    assert label in legend
    plt.close(fig)
    cool = flag_table().iloc[2:]
    fig = retention_chart(compare(cool, times=[c.GYR, 4.5 * c.GYR]))
    assert label not in [t.get_text() for lg in fig.legends for t in lg.get_texts()]
    plt.close(fig)
