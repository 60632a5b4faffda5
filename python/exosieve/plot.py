"""Plots for exosieve results (matplotlib, an optional dependency).

Every function draws on a given or new matplotlib ``Axes`` and returns it; every axis is
labelled with its unit.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np

from .jeans import escape_speed, jeans_flux, jeans_parameter
from .maxwell import fraction_faster, speed_pdf


def _axes(ax: Any) -> Any:
    if ax is not None:
        return ax
    import matplotlib.pyplot as plt

    return plt.subplots(figsize=(6.4, 4.0), layout="constrained")[1]


def speed_distributions(
    temperature: float,
    gases: Sequence[str],
    planet_mass: float | None = None,
    radius: float | None = None,
    ax: Any = None,
) -> Any:
    """Maxwell–Boltzmann speed pdfs of several gases at one temperature.

    With ``planet_mass`` [kg] and ``radius`` [m] a vertical line marks the escape speed and the
    legend gives each gas's fraction faster than it.

    Parameters
    ----------
    temperature : float
        Gas temperature [K].
    gases : sequence of str
        Species names.
    planet_mass, radius : float, optional
        Planet mass [kg] and radius of the exobase [m] for the escape-speed marker.
    ax : matplotlib Axes, optional
        Where to draw.
    """
    ax = _axes(ax)
    v_esc = None
    if planet_mass is not None and radius is not None:
        v_esc = float(escape_speed(planet_mass, radius))
    top = 0.0
    for gas in gases:
        v = np.linspace(0.0, 4.0 * np.sqrt(2 * 1.380649e-23 * temperature / _mass(gas)), 600)
        top = max(top, v[-1])
        label = gas
        if v_esc is not None:
            label += f" (above v_esc: {fraction_faster(v_esc, temperature, gas):.1e})"
        ax.plot(v / 1e3, speed_pdf(v, temperature, gas) * 1e3, label=label)
    if v_esc is not None:
        ax.axvline(v_esc / 1e3, color="0.3", linestyle="--", linewidth=1)
        ax.annotate(
            "escape speed",
            (v_esc / 1e3, ax.get_ylim()[1] * 0.9),
            rotation=90,
            ha="right",
            va="top",
            fontsize="small",
            color="0.3",
        )
    ax.set_xlim(0.0, max(top, 1.2 * (v_esc or 0.0)) / 1e3)
    ax.set_xlabel("speed [km s$^{-1}$]")
    ax.set_ylabel("probability density [s km$^{-1}$]")
    ax.set_title(f"Speed distributions at {temperature:.0f} K")
    ax.legend(fontsize="small")
    return ax


def jeans_flux_vs_temperature(
    temperatures: Any,
    gases: Sequence[str],
    density: float,
    planet_mass: float,
    radius: float,
    ax: Any = None,
) -> Any:
    """Jeans flux [m^-2 s^-1] of several gases against exobase temperature [K], log scale.

    The Jeans parameter at the lowest and highest temperature is given in the legend.
    """
    ax = _axes(ax)
    t = np.asarray(temperatures, dtype=float)
    for gas in gases:
        lam = jeans_parameter(t, gas, planet_mass, radius)
        ax.semilogy(
            t,
            jeans_flux(density, t, gas, planet_mass, radius),
            label=f"{gas} (lambda {lam[0]:.0f} to {lam[-1]:.1f})",
        )
    ax.set_xlabel("exobase temperature [K]")
    ax.set_ylabel("Jeans flux [m$^{-2}$ s$^{-1}$]")
    ax.set_title(f"Jeans flux at n = {density:.0e} m$^{{-3}}$")
    ax.legend(fontsize="small")
    return ax


def _mass(gas: str) -> float:
    from .species import species

    return species(gas).mass


_GYR = 3.15576e16  # Julian gigayear [s]


def histories(
    result: Any,
    quantity: str = "inventory",
    gases: Sequence[str] | None = None,
    relative: bool = True,
    ax: Any = None,
    linestyle: str = "-",
    label: str = "",
) -> Any:
    """Inventory or escape-rate histories of an evolution result on log axes.

    Parameters
    ----------
    result : EvolutionResult
        Output of :func:`exosieve.evolve` or :func:`exosieve.open_result`.
    quantity : {"inventory", "escape_rate"}
        What to draw: inventories [particles] or global escape rates [s^-1].
    gases : sequence of str, optional
        Species to draw (default: all).
    relative : bool
        Inventories as the fraction of the initial inventory [1] (default) or in particles.
    ax : matplotlib Axes, optional
        Where to draw.
    linestyle : str, optional
        Line style, to tell several runs apart on one Axes; each species keeps its colour.
    label : str, optional
        Text appended to each species name in the legend (e.g. ", run A").
    """
    if quantity not in ("inventory", "escape_rate"):
        raise ValueError(f"quantity must be 'inventory' or 'escape_rate', got {quantity!r}")
    ax = _axes(ax)
    t = np.asarray(result.time) / _GYR
    table = getattr(result, quantity)
    for gas in gases or result.species:
        values = np.asarray(table[gas], dtype=float)
        if quantity == "inventory" and relative:
            values = values / result.initial_inventory[result.species.index(gas)]
        color = f"C{result.species.index(gas) % 10}"
        ax.loglog(
            t,
            np.where(values > 0, values, np.nan),
            color=color,
            linestyle=linestyle,
            label=gas + label,
        )
        depleted = result.depletion_time.get(gas)
        if quantity == "inventory" and depleted is not None:
            ax.axvline(depleted / _GYR, color=color, linestyle=":", linewidth=1)
    ax.set_xlabel("time [Gyr]")
    if quantity == "inventory":
        ax.set_ylabel("retained fraction [1]" if relative else "inventory [particles]")
    else:
        ax.set_ylabel("escape rate [s$^{-1}$]")
    ax.legend(fontsize="small")
    return ax


def isotope_ratios(
    result: Any,
    ratios: Sequence[str] | None = None,
    normalise: bool = True,
    ax: Any = None,
    linestyle: str = "-",
    label: str = "",
) -> Any:
    """Isotope-ratio histories (e.g. D/H) of an evolution result.

    With ``normalise`` each ratio is divided by its initial value, so the curve shows the
    enrichment [1] that escape leaves behind. ``linestyle`` and ``label`` (appended to each
    ratio's name in the legend) tell several runs apart on one Axes.
    """
    ax = _axes(ax)
    t = np.asarray(result.time) / _GYR
    for name in ratios or list(result.isotope_ratio):
        values = np.asarray(result.isotope_ratio[name], dtype=float)
        if normalise:
            values = values / values[0]
        ax.semilogx(t, values, linestyle=linestyle, label=name + label)
    ax.set_xlabel("time [Gyr]")
    ax.set_ylabel("ratio / initial ratio [1]" if normalise else "isotope ratio [1]")
    ax.legend(fontsize="small")
    return ax


def exobase_history(result: Any, ax: Any = None) -> Any:
    """Exobase temperature [K] (left axis) and XUV flux [W m^-2] (right axis) over time."""
    ax = _axes(ax)
    t = np.asarray(result.time) / _GYR
    ax.semilogx(t, result.exobase_temperature, color="C3", label="exobase temperature")
    ax.set_xlabel("time [Gyr]")
    ax.set_ylabel("exobase temperature [K]", color="C3")
    xuv = np.asarray(result.xuv_flux, dtype=float)
    if np.any(np.isfinite(xuv)):
        right = ax.twinx()
        right.loglog(t, xuv, color="C0", linestyle="--", label="XUV flux")
        right.set_ylabel("XUV flux at the planet [W m$^{-2}$]", color="C0")
    return ax
