"""Plots: every axis names its unit, the drawn data are the results', bad input is refused."""

import numpy as np
import pytest

import exosieve
from exosieve import plot
from exosieve.constants import GYR, M_EARTH, MYR, R_EARTH

matplotlib = pytest.importorskip("matplotlib")
matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402


@pytest.fixture(scope="module")
def run():
    planet = exosieve.Planet(M_EARTH, R_EARTH)
    exobase = exosieve.PrescribedExobase(
        R_EARTH + 500e3, 1000.0, {"H": 1e11, "D": 1e7, "O": 1e13}, scaling="inventory"
    )
    inventory = {"H": 1e44, "D": 1e40, "O": 1e45}
    times = np.geomspace(10 * MYR, 4 * GYR, 50)
    return exosieve.evolve(planet, exobase, inventory, (10 * MYR, 4 * GYR), t_eval=times)


def _has_unit(text):
    return "[" in text and "]" in text


def test_histories_draw_the_results(run):
    ax = plot.histories(run, gases=["H", "O"], linestyle="--", label=", run A")
    assert _has_unit(ax.get_xlabel()) and _has_unit(ax.get_ylabel())
    line = ax.get_lines()[0]
    assert line.get_label() == "H, run A" and line.get_linestyle() == "--"
    assert np.allclose(line.get_ydata(), run.inventory["H"] / run.initial_inventory[0])
    ax = plot.histories(run, "escape_rate")
    assert np.allclose(ax.get_lines()[1].get_ydata(), run.escape_rate["D"])
    with pytest.raises(ValueError, match="quantity must be"):
        plot.histories(run, "pressure")
    plt.close("all")


def test_isotope_ratio_and_exobase_panels(run):
    ax = plot.isotope_ratios(run, ["D/H"])
    ratio = run.isotope_ratio["D/H"]
    assert np.allclose(ax.get_lines()[0].get_ydata(), ratio / ratio[0])
    assert _has_unit(ax.get_ylabel())
    ax = plot.exobase_history(run)
    assert _has_unit(ax.get_ylabel()) and _has_unit(ax.get_xlabel())
    plt.close("all")


def test_retention_intervals_need_samples(tmp_path):
    from exosieve.catalogue import demo_catalogue_path

    nominal = exosieve.compare(demo_catalogue_path(), times=4)
    with pytest.raises(ValueError, match="samples > 0"):
        plot.retention_intervals(nominal, "He")
    sampled = exosieve.compare(demo_catalogue_path(), times=4, samples=8, seed=2)
    with pytest.raises(ValueError, match="gas 'Xe' is not in the comparison"):
        plot.retention_intervals(sampled, "Xe")
    ax = plot.retention_intervals(sampled, "He")
    assert _has_unit(ax.get_xlabel())
    assert [t.get_text() for t in ax.get_yticklabels()] == list(sampled["case"])
    plt.close("all")
