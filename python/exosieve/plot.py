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
    decades: float = 25.0,
    thresholds: Any = None,
) -> Any:
    """Jeans flux [m^-2 s^-1] of several gases against exobase temperature [K], log scale.

    The flux axis spans ``decades`` decades below the largest flux drawn; a gas whose flux
    stays below that everywhere says so in the legend. Each line is solid where the gas's
    Jeans parameter is at or above the transition threshold (the Jeans picture holds), dashed
    in the transition range and dotted where the gas flows away hydrodynamically (there the
    Jeans flux is not its loss); the legend gives each gas's Jeans parameter at the lowest and
    highest temperature.

    Parameters
    ----------
    temperatures : array_like
        Exobase temperatures [K].
    gases : sequence of str
        Species names.
    density, planet_mass, radius : float
        Exobase density [m^-3], planet mass [kg], exobase radius [m].
    ax : matplotlib Axes, optional
        Where to draw.
    decades : float
        Span of the flux axis [decades] below the largest flux (default 25).
    thresholds : RegimeThresholds, optional
        Regime thresholds of the Jeans parameter (default: Volkov et al. 2011).
    """
    from ._arrays import real_number

    decades = real_number(decades, "decades", "1")
    if not decades > 0:
        raise ValueError(f"decades must be finite and > 0, got {decades}")
    ax = _axes(ax)
    limits = _thresholds(thresholds)
    t = np.asarray(temperatures, dtype=float)
    fluxes = [np.asarray(jeans_flux(density, t, gas, planet_mass, radius)) for gas in gases]
    top = max((float(np.max(f[f > 0])) for f in fluxes if np.any(f > 0)), default=1.0)
    floor = top / 10.0**decades
    drawn: set[int] = set()
    for k, (gas, flux) in enumerate(zip(gases, fluxes, strict=True)):
        lam = np.asarray(jeans_parameter(t, gas, planet_mass, radius))
        label = f"{gas} (lambda {lam[0]:.3g} to {lam[-1]:.3g})"
        if not np.any(flux >= floor):
            label = f"{gas}: below the axis throughout"
        shown = np.where(flux >= floor, flux, np.nan)
        drawn |= _regime_line(ax, t, shown, lam, limits, f"C{k % 10}", label)
    ax.set_yscale("log")
    ax.set_ylim(floor, top * 10.0)
    _regime_legend(ax, limits, drawn)
    ax.set_xlabel("exobase temperature [K]")
    ax.set_ylabel("Jeans flux [m$^{-2}$ s$^{-1}$]")
    ax.set_title(f"Jeans flux at n = {density:.0e} m$^{{-3}}$")
    return ax


def _mass(gas: str) -> float:
    from .species import species

    return species(gas).mass


def _label_points(ax: Any, labels: Any, x: Any, y: Any) -> None:
    """Write each point's label just above and right of it, small."""
    for label, xi, yi in zip(labels, x, y, strict=True):
        ax.annotate(
            str(label), (xi, yi), xytext=(3, 3), textcoords="offset points", fontsize="x-small"
        )


def retention_chart(
    comparison: Any,
    species: Sequence[str] | None = None,
    retain: float | None = None,
    fig: Any = None,
) -> Any:
    """Which cases keep which species: one panel per species placing each case by its escape
    speed at the exobase [km/s] and its exobase temperature at the start [K].

    Lines mark where the species' Jeans parameter ``lambda = m v_esc^2 / (2 k T)`` equals the
    regime thresholds of the run (Volkov et al. 2011 by default): below a line (cooler, or a
    faster escape speed) lambda is larger. Above the transition and hydrodynamic lines the
    panel is shaded: there the species, were it the bulk gas, would be in that regime (a run's
    regime is that of its densest species). Markers: filled circles for cases that keep more than
    ``retain`` of the species' inventory at the end, crosses for those that do not; with Monte
    Carlo samples the colour gives the probability of keeping it. Orange squares ring the
    cases that go hydrodynamic without an energy-limited model (``hydrodynamic_unmodelled``):
    their retention is that of Jeans escape, which does not describe their loss. Failed cases
    are left out (their number is in the panel title).

    Parameters
    ----------
    comparison : Comparison
        From :func:`exosieve.compare` or :func:`exosieve.open_comparison`.
    species : sequence of str, optional
        Species to draw (default: all present in some case).
    retain : float, optional
        Retained-fraction threshold [1] (default: the run's).
    fig : matplotlib Figure, optional
        Where to draw (a new one by default).

    Returns
    -------
    matplotlib.figure.Figure
    """
    import matplotlib.pyplot as plt
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch
    from matplotlib.ticker import FuncFormatter

    from .constants import K_B
    from .species import species as _species

    summary = comparison.summary if retain is None else comparison.summarize(retain=retain)
    retain = float(summary.attrs["retain"])
    present = comparison["mole_fraction"] > 0.0
    names = list(comparison.species)
    chosen = (
        [s for s in names if present[:, names.index(s)].any()] if species is None else list(species)
    )
    for name in chosen:
        if name not in names:
            raise ValueError(f"species '{name}' is not in the comparison (have {names})")
    if not chosen:
        raise ValueError("no species to draw: no case ran")
    speed = comparison["escape_speed"] / 1e3  # [km/s]
    temperature = comparison["exobase_temperature_start"]  # [K]
    ok = (np.asarray(comparison["error"], dtype=object) == "") & np.isfinite(temperature)
    thresholds = comparison.config["options"]["regime_thresholds"]
    levels = [
        (thresholds["enhanced"], "-"),
        (thresholds["transition"], "--"),
        (thresholds["hydrodynamic"], ":"),
    ]
    columns = min(3, len(chosen))
    rows = -(-len(chosen) // columns)
    if fig is None:
        fig = plt.figure(figsize=(4.2 * columns + 0.8, 3.6 * rows), layout="constrained")
    axes = np.atleast_1d(fig.subplots(rows, columns, squeeze=False)).ravel()
    good = speed[ok & np.isfinite(speed)]
    v_lo = float(np.min(good)) / 1.5 if good.size else 1.0
    v_hi = float(np.max(good)) * 1.5 if good.size else 100.0
    t_good = temperature[ok]
    t_lo = float(np.min(t_good)) / 1.5 if t_good.size else 100.0
    t_hi = float(np.max(t_good)) * 1.5 if t_good.size else 1e4
    v = np.geomspace(v_lo, v_hi, 200)
    with_samples = comparison.samples > 0 and "probability_retained" in summary
    colour_map = plt.get_cmap("viridis")
    index = summary.set_index(["row", "species"])
    any_unmodelled = False
    for ax, name in zip(axes, chosen, strict=False):
        j = names.index(name)
        mass = _species(name).mass
        for value, style in levels:
            ax.plot(v, mass * (v * 1e3) ** 2 / (2.0 * K_B * value), color="0.35", ls=style, lw=1)
        # Where the species, as a bulk gas, would leave the Jeans regime (above the lines).
        for value, shade in (
            (thresholds["transition"], "0.9"),
            (thresholds["hydrodynamic"], "0.8"),
        ):
            line = mass * (v * 1e3) ** 2 / (2.0 * K_B * value)
            ax.fill_between(v, line, t_hi * 10.0, color=shade, lw=0, zorder=0)
        here = ok & present[:, j]
        failed = int((~ok & present[:, j]).sum())
        rows_here = comparison["row"][here]
        keys = [(int(r), name) for r in rows_here]
        kept = index.loc[keys, "retained"].to_numpy(dtype=bool) if keys else np.zeros(0, bool)
        if with_samples and keys:
            colour = colour_map(index.loc[keys, "probability_retained"].to_numpy(dtype=float))
        else:
            colour = np.array([[0.1, 0.5, 0.2, 1.0] if k else [0.75, 0.15, 0.1, 1.0] for k in kept])
        x, y = speed[here], temperature[here]
        if kept.any():
            ax.scatter(
                x[kept],
                y[kept],
                c=colour[kept],
                marker="o",
                s=36,
                edgecolors="k",
                linewidths=0.5,
                zorder=3,
            )
        if (~kept).any():
            ax.scatter(
                x[~kept],
                y[~kept],
                c=colour[~kept],
                marker="X",
                s=44,
                edgecolors="k",
                linewidths=0.4,
                zorder=3,
            )
        # Cases that go hydrodynamic without an energy-limited model: their Jeans retention
        # does not describe their loss, so they are ringed.
        unmodelled = here & (np.asarray(comparison["hydrodynamic_unmodelled"]) == 1)
        if unmodelled.any():
            ax.scatter(
                speed[unmodelled],
                temperature[unmodelled],
                s=170,
                marker="s",
                facecolors="none",
                edgecolors="darkorange",
                linewidths=1.6,
                zorder=4,
                gid="hydrodynamic_unmodelled",
            )
            any_unmodelled = True
        if here.sum() <= 20:
            _label_points(ax, np.asarray(comparison["case"])[here], x, y)
        ax.set_xscale("log")
        ax.set_yscale("log")
        for axis in (ax.xaxis, ax.yaxis):
            axis.set_major_formatter(FuncFormatter(_plain))
            axis.set_minor_formatter(FuncFormatter(_plain_minor))
        ax.set_xlim(v_lo, v_hi)
        ax.set_ylim(t_lo, t_hi)
        ax.set_xlabel("escape speed at the exobase [km s$^{-1}$]")
        ax.set_ylabel("exobase temperature at the start [K]")
        title = name + (f" ({failed} failed)" if failed else "")
        ax.set_title(title)
    for ax in axes[len(chosen) :]:
        ax.set_visible(False)
    handles: list[Any] = [
        Line2D([], [], color="0.35", ls=style, label=f"$\\lambda$ = {value:g}")
        for value, style in levels
    ]
    handles += [
        Patch(
            color="0.9",
            label=f"its $\\lambda$ in [{thresholds['hydrodynamic']:g}, "
            f"{thresholds['transition']:g}): transition as a bulk gas",
        ),
        Patch(
            color="0.8",
            label=f"its $\\lambda$ < {thresholds['hydrodynamic']:g}: hydrodynamic as a bulk gas",
        ),
    ]
    handles += [
        Line2D(
            [],
            [],
            marker="o",
            ls="",
            color="0.5",
            markeredgecolor="k",
            label=f"keeps > {retain:g} of its inventory",
        ),
        Line2D([], [], marker="X", ls="", color="0.5", markeredgecolor="k", label="loses more"),
    ]
    if any_unmodelled:
        handles.append(
            Line2D(
                [],
                [],
                marker="s",
                ls="",
                markerfacecolor="none",
                markeredgecolor="darkorange",
                markersize=11,
                label="goes hydrodynamic, no energy-limited model",
            )
        )
    fig.legend(handles=handles, loc="outside lower center", ncols=5, fontsize="small")
    if with_samples:
        from matplotlib.cm import ScalarMappable
        from matplotlib.colors import Normalize

        fig.colorbar(
            ScalarMappable(norm=Normalize(0.0, 1.0), cmap=colour_map),
            ax=list(axes[: len(chosen)]),
            label=f"probability of keeping > {retain:g} [1]",
            shrink=0.8,
        )
    fig.suptitle(f"Retention after {_span_text(comparison)}")
    return fig


def _plain(value: float, _: Any = None) -> str:
    return f"{value:g}"


def _plain_minor(value: float, _: Any = None) -> str:
    # Label 2, 3 and 5 times a power of ten; the others would crowd the axis.
    if value <= 0:
        return ""
    lead = value / 10 ** np.floor(np.log10(value))
    return f"{value:g}" if int(round(lead)) in (2, 3, 5) else ""


def _span_text(comparison: Any) -> str:
    from .constants import GYR

    end = comparison["age_end"]
    end = end[np.isfinite(end)]
    if end.size == 0:
        return "the run"
    lo, hi = float(end.min()) / GYR, float(end.max()) / GYR
    return (
        f"evolution to {hi:.3g} Gyr"
        if np.isclose(lo, hi)
        else f"evolution to {lo:.3g}-{hi:.3g} Gyr"
    )


_GYR = 3.15576e16  # Julian gigayear [s]


def histories(
    result: Any,
    quantity: str = "inventory",
    gases: Sequence[str] | None = None,
    relative: bool = True,
    ax: Any = None,
    linestyle: str = "-",
    label: str = "",
    decades: float = 25.0,
) -> Any:
    """Inventory or escape-rate histories of an evolution result on log axes.

    The value axis reaches at most ``decades`` decades below the largest value on the Axes
    (a depleted species' rate can fall by hundreds); depletion times are labelled vertical
    lines, and a line another covers is widened so that both show.

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
    decades : float
        Largest span of the value axis [decades] (default 25).
    """
    from ._arrays import real_number

    decades = real_number(decades, "decades", "1")
    if not decades > 0:
        raise ValueError(f"decades must be finite and > 0, got {decades}")
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
            fraction = float(result.config.get("depletion_fraction", 1e-3))
            _labelled_marker(ax, depleted / _GYR, f"{gas}{label} < {fraction:g}", color)
    drawn = [np.asarray(ln.get_ydata(), dtype=float) for ln in ax.get_lines()]
    positive = np.concatenate([y[np.isfinite(y) & (y > 0)] for y in drawn] + [np.zeros(0)])
    if positive.size:
        top = float(positive.max())
        bottom, _ = ax.get_ylim()
        if bottom < top / 10.0**decades:
            ax.set_ylim(top / 10.0**decades, None)
    _show_hidden(ax)
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
    temperature = np.asarray(result.exobase_temperature, dtype=float)
    lines = ax.semilogx(t, temperature, color="C3", label="exobase temperature")
    ax.set_xlabel("time [Gyr]")
    ax.set_ylabel("exobase temperature [K]", color="C3")
    # Temperature from 0 K on its linear axis, the flux in the lower part of its log axis:
    # both scale to their data, so without this the two curves lie on top of each other.
    ax.set_ylim(0.0, 1.1 * float(np.nanmax(temperature)))
    xuv = np.asarray(result.xuv_flux, dtype=float)
    if np.any(np.isfinite(xuv) & (xuv > 0)):
        right = ax.twinx()
        lines += right.loglog(t, xuv, color="C0", linestyle="--", label="XUV flux")
        right.set_ylabel("XUV flux at the planet [W m$^{-2}$]", color="C0")
        low, high = float(np.nanmin(xuv[xuv > 0])), float(np.nanmax(xuv))
        right.set_ylim(low / 2.0, high * 100.0)
    ax.legend(handles=lines, fontsize="small", loc="upper right")
    return ax


def retention_intervals(comparison: Any, gas: str, ax: Any = None) -> Any:
    """Monte Carlo uncertainty of the retained fraction of one species in every case.

    For each case a bar spans the 5th to 95th percentile of the retained fraction at the end
    over the samples [1] (log scale), with a dot at the median and a cross at the nominal run.
    The axis reaches four decades below the run's depletion fraction (a labelled vertical
    line); smaller values are drawn at its left end, marked as such.

    Parameters
    ----------
    comparison : Comparison
        From :func:`exosieve.compare` with ``samples > 0``.
    gas : str
        Species name.
    ax : matplotlib Axes, optional
        Where to draw.
    """
    if not comparison.samples:
        raise ValueError("retention_intervals needs a comparison run with samples > 0")
    if gas not in comparison.species:
        raise ValueError(f"gas {gas!r} is not in the comparison (have {comparison.species})")
    ax = _axes(ax)
    j = comparison.species.index(gas)
    names = [str(n) for n in comparison["case"]]
    samples = np.asarray(comparison["sample_retained_fraction"], dtype=float)[:, :, j]
    nominal = np.asarray(comparison["final_retained_fraction"], dtype=float)[:, j]
    depletion = float(comparison.config["options"].get("depletion_fraction", 1e-3))
    floor = 1e-4 * depletion  # retained fractions below this are drawn at the axis floor
    y = np.arange(len(names))
    present = ~np.all(np.isnan(samples), axis=1)
    low, mid, high = (
        np.clip(np.nanpercentile(samples[present], q, axis=1), floor, None)
        for q in (5.0, 50.0, 95.0)
    )
    ax.hlines(
        y[present], low, high, color="C0", linewidth=4, alpha=0.5, label="5th to 95th percentile"
    )
    ax.plot(mid, y[present], "o", color="C0", label="median")
    ax.plot(np.clip(nominal[present], floor, None), y[present], "x", color="k", label="nominal run")
    ax.set_xscale("log")
    ax.set_xlim(floor / 2.0, 3.0)
    _labelled_marker(ax, depletion, f"depletion fraction {depletion:g}", "0.4")
    for k in np.flatnonzero(low <= floor):  # at or below the floor: drawn at it, and said so
        ax.annotate(
            f"$\\leq${floor:.0e}",
            (floor, y[present][k]),
            xytext=(4, 5),
            textcoords="offset points",
            fontsize="x-small",
            color="0.3",
        )
    ax.set_yticks(y, names)
    ax.invert_yaxis()
    ax.set_xlabel(f"retained fraction of {gas} at the end [1]")
    ax.set_title(f"{gas}: Monte Carlo spread over {comparison.samples} samples per case")
    ax.legend(fontsize="small", loc="best")
    return ax


def sensitivity_chart(
    indices: Any,
    case: str | None = None,
    species: Sequence[str] | None = None,
    axes: Sequence[Any] | None = None,
) -> list[Any]:
    """What drives each species' retention in one case: Sobol' indices as horizontal bars.

    One panel per species; per uncertain input (largest total index on top) a dark bar for
    the first-order index (the input's share of the output's variance alone) and a light bar
    for the total index (with its interactions), each with its confidence interval as a
    whisker. Indices are shares of the variance [1]; an input with a total index near 0 does
    not matter, whatever it is set to within its uncertainty.

    Parameters
    ----------
    indices : pandas.DataFrame or Comparison
        From :meth:`exosieve.Comparison.sensitivity`, or a Saltelli-design comparison (whose
        default indices are then computed).
    case : str, optional
        Case label; default: the first case with indices.
    species : sequence of str, optional
        Species to show; default: those of the case whose output varies.
    axes : sequence of matplotlib Axes, optional
        One per species shown; default: a new figure.

    Returns
    -------
    list of matplotlib Axes
    """
    if not hasattr(indices, "columns"):
        indices = indices.sensitivity()
    frame = indices
    if case is None:
        ok = frame[np.isfinite(frame["total"].to_numpy(dtype=float))]
        if ok.empty:
            raise ValueError(
                "no case has indices: every output is constant over its samples "
                "(species kept, or lost, in every run)"
            )
        case = str(ok["case"].iloc[0])
    rows = frame[frame["case"] == case]
    if rows.empty:
        cases = ", ".join(dict.fromkeys(str(c) for c in frame["case"]))
        raise ValueError(f"case {case!r} is not in the indices (have {cases})")
    if species is None:
        varies = rows[np.isfinite(rows["total"].to_numpy(dtype=float))]
        gases = list(dict.fromkeys(str(s) for s in varies["species"])) or [
            str(rows["species"].iloc[0])
        ]
    else:
        gases = [str(s) for s in species]
        unknown = [g for g in gases if g not in set(rows["species"])]
        if unknown:
            raise ValueError(f"species {unknown} are not in case {case!r}")
    if axes is None:
        import matplotlib.pyplot as plt

        height = 1.0 + 0.45 * rows["input"].nunique()
        fig, grid = plt.subplots(
            1,
            len(gases),
            figsize=(max(6.4, 4.6 * len(gases) + 1.8), height + 1.0),
            layout="constrained",
            squeeze=False,
        )
        axes = list(grid[0])
    else:
        axes = list(axes)
        if len(axes) != len(gases):
            raise ValueError(f"axes: {len(gases)} needed (one per species), got {len(axes)}")
    output = frame.attrs.get("output", "retained")
    retain = float(frame.attrs.get("retain", 0.5))
    level = 100.0 * float(frame.attrs.get("confidence", 0.95))
    for ax, gas in zip(axes, gases, strict=True):
        part = rows[rows["species"] == gas]
        total = part["total"].to_numpy(dtype=float)
        order = np.argsort(np.where(np.isfinite(total), -total, np.inf), kind="stable")
        part = part.iloc[order]
        pairs = zip(part["input"], part["unit"], strict=True)
        names = [f"{str(n).replace('_', ' ')} [{u}]" for n, u in pairs]
        y = np.arange(len(part))
        for column, offset, colour, label in (
            ("first_order", -0.19, "C0", "first order: alone"),
            ("total", 0.19, "C1", "total: with interactions"),
        ):
            value = part[column].to_numpy(dtype=float)
            low = part[f"{column}_low"].to_numpy(dtype=float)
            high = part[f"{column}_high"].to_numpy(dtype=float)
            whisker = np.vstack([np.clip(value - low, 0, None), np.clip(high - value, 0, None)])
            ax.barh(
                y + offset,
                np.nan_to_num(value),
                height=0.38,
                color=colour,
                alpha=0.85 if column == "first_order" else 0.55,
                xerr=np.nan_to_num(whisker),
                error_kw={"elinewidth": 1, "capsize": 2},
                label=label,
            )
        for k in np.flatnonzero(~np.isfinite(part["total"].to_numpy(dtype=float))):
            fixed = not bool(part["uncertain"].iloc[k])
            why = "held fixed" if fixed else "no spread over the samples"
            ax.text(0.02, y[k], why, va="center", fontsize="small", color="0.4")
        ax.set_yticks(y, names)
        ax.invert_yaxis()
        ax.axvline(0.0, color="0.3", linewidth=0.8)
        ax.set_xlim(-0.05, 1.05)
        mean = float(part["output_mean"].iloc[0]) if len(part) else float("nan")
        if output == "retained":
            title = f"{case}, {gas}: kept (> {retain:g} left) with P = {mean:.2f}"
            ax.set_xlabel("share of the variance of kept / lost [1]")
        else:
            title = f"{case}, {gas}: retained fraction, mean {mean:.3g}"
            ax.set_xlabel("share of the variance of the retained fraction [1]")
        ax.set_title(title, fontsize="medium")
    axes[0].legend(fontsize="small", loc="best", title=f"{level:g} % intervals")
    return axes


def retention_map(
    comparison: Any,
    cases: Any,
    species: Sequence[str] | None = None,
    x: str = "radius",
    retain: float | None = None,
    fig: Any = None,
) -> Any:
    """Retention across a catalogue: one panel per species placing each case by its planet
    radius [R_earth] (or mass [M_earth]) and its instellation ``L / (4 pi a^2)`` [W m-2], both
    on log axes, coloured by the probability of keeping more than ``retain`` of the species'
    inventory [1] (with Monte Carlo samples; without them 1 or 0 from the nominal run).

    Cases without a star (no instellation) or without a result for the species are left out
    and counted in the panel's title; a species no case can be placed for gets no panel.

    Parameters
    ----------
    comparison : Comparison
        From :func:`exosieve.compare` or :func:`exosieve.open_comparison`.
    cases : str, Path, pandas.DataFrame, astropy Table or CaseTable
        The case table the comparison was run on (its fingerprint must match), for the
        instellation (``star_luminosity``, ``semi_major_axis``).
    species : sequence of str, optional
        Species to draw (default: every species some case can be placed for).
    x : {"radius", "mass"}
        The horizontal axis: planet radius [R_earth] or planet mass [M_earth].
    retain : float, optional
        Retained-fraction threshold [1] (default: the run's).
    fig : matplotlib Figure, optional
        Where to draw (a new one by default).

    Returns
    -------
    matplotlib.figure.Figure
        One scatter per panel; its colour values (``get_array()``) are the probabilities of
        the cases drawn, in table order.
    """
    import matplotlib.pyplot as plt
    from matplotlib.colors import Normalize
    from matplotlib.ticker import FuncFormatter

    from .catalogue import load_cases
    from .constants import M_EARTH, R_EARTH

    if x not in ("radius", "mass"):
        raise ValueError(f"x must be 'radius' or 'mass', got {x!r}")
    table = load_cases(cases)
    expected = comparison.config.get("table", {}).get("sha256")
    if expected is not None and table.fingerprint() != expected:
        raise ValueError(
            f"cases: the table {table.source!r} is not the one the comparison was run on "
            "(its fingerprint differs)"
        )
    summary = comparison.summary if retain is None else comparison.summarize(retain=retain)
    retain = float(summary.attrs["retain"])
    with_samples = comparison.samples > 0 and "probability_retained" in summary
    rows = np.asarray(comparison["row"], dtype=np.int64)
    n_table = len(table)
    if rows.size and int(rows.max()) >= n_table:
        raise ValueError(
            f"cases: the table has {n_table} rows, the comparison has row {int(rows.max())}"
        )

    def column(name: str) -> Any:
        values = table.columns.get(name)
        return values[rows] if values is not None else np.full(len(rows), np.nan)

    with np.errstate(invalid="ignore", divide="ignore"):
        flux = column("star_luminosity") / (4.0 * np.pi * column("semi_major_axis") ** 2)
    name_si, scale, label = (
        ("planet_radius", R_EARTH, "planet radius [R$_\\oplus$]")
        if x == "radius"
        else ("planet_mass", M_EARTH, "planet mass [M$_\\oplus$]")
    )
    position = np.where(
        np.isfinite(column(name_si)), column(name_si), np.asarray(comparison[name_si], float)
    )
    position = position / scale
    names = list(comparison.species)
    present = np.asarray(comparison["mole_fraction"]) > 0.0
    placed = np.isfinite(flux) & (flux > 0.0) & np.isfinite(position) & (position > 0.0)
    value_column = "probability_retained" if with_samples else "retained"
    index = summary.set_index(["row", "species"])[value_column]

    def values_of(name: str) -> Any:
        j = names.index(name)
        out = np.full(len(rows), np.nan)
        here = np.nonzero(present[:, j])[0]
        keys = [(int(rows[k]), name) for k in here]
        if keys:
            got = index.reindex(keys).to_numpy(dtype=float)
            out[here] = got
        if not with_samples:  # a failed nominal run has no result, not "lost"
            error = np.asarray(comparison["error"], dtype=object) != ""
            out[error] = np.nan
        return out

    for name in species or []:
        if name not in names:
            raise ValueError(f"species '{name}' is not in the comparison (have {names})")
    chosen = [
        name
        for name in (names if species is None else list(species))
        if (placed & np.isfinite(values_of(name))).any()
    ]
    if not chosen:
        raise ValueError(
            "no case to draw: none has a star (star_luminosity, semi_major_axis) and a result "
            + (f"for {list(species)}" if species else "")
        )
    columns = min(3, len(chosen))
    panel_rows = -(-len(chosen) // columns)
    if fig is None:
        fig = plt.figure(figsize=(4.2 * columns + 1.0, 3.6 * panel_rows), layout="constrained")
    axes = np.atleast_1d(fig.subplots(panel_rows, columns, squeeze=False)).ravel()
    for ax in axes[len(chosen) :]:
        ax.remove()  # no empty panels
    axes = axes[: len(chosen)]
    colour_map = plt.get_cmap("viridis")
    norm = Normalize(0.0, 1.0)
    scatter = None
    x_good, y_good = position[placed], flux[placed]
    x_lim = (float(x_good.min()) / 1.4, float(x_good.max()) * 1.4)
    y_lim = (float(y_good.min()) / 2.0, float(y_good.max()) * 2.0)
    for ax, name in zip(axes, chosen, strict=True):
        value = values_of(name)
        draw = placed & np.isfinite(value)
        left_out = int((present[:, names.index(name)] & ~draw).sum())
        scatter = ax.scatter(
            position[draw],
            flux[draw],
            c=value[draw],
            cmap=colour_map,
            norm=norm,
            s=40,
            edgecolors="k",
            linewidths=0.5,
            zorder=3,
        )
        if draw.sum() <= 20:
            _label_points(
                ax, np.asarray(comparison["case"], dtype=object)[draw], position[draw], flux[draw]
            )
        ax.set_xscale("log")
        ax.set_yscale("log")
        ax.xaxis.set_major_formatter(FuncFormatter(_plain))
        ax.xaxis.set_minor_formatter(FuncFormatter(_plain_minor))
        ax.set_xlim(*x_lim)
        ax.set_ylim(*y_lim)
        ax.set_xlabel(label)
        ax.set_ylabel("instellation [W m$^{-2}$]")
        ax.set_title(name + (f" ({left_out} not placed)" if left_out else ""))
    what = (
        f"probability of keeping > {retain:g} of the inventory [1]"
        if with_samples
        else f"kept > {retain:g} of the inventory (nominal run: 1 yes, 0 no) [1]"
    )
    fig.colorbar(scatter, ax=list(axes), label=what, shrink=0.85)
    fig.suptitle(f"Retention map after {_span_text(comparison)}")
    return fig


# --- regime styles, labelled markers, one case's history across species ----------------------

# Line styles by regime of the Jeans parameter: holds, transition, hydrodynamic.
_REGIME_STYLES = ("-", "--", ":")


def _thresholds(thresholds: Any) -> tuple[float, float]:
    """(transition, hydrodynamic) thresholds [1] from a RegimeThresholds, a dict or None."""
    if thresholds is None:
        from .hydrodynamic import RegimeThresholds

        thresholds = RegimeThresholds()
    if isinstance(thresholds, dict):
        return float(thresholds["transition"]), float(thresholds["hydrodynamic"])
    return float(thresholds.transition), float(thresholds.hydrodynamic)


def _regime_line(
    ax: Any,
    x: Any,
    y: Any,
    lam: Any,
    limits: tuple[float, float],
    color: str,
    label: str,
    linewidth: float = 1.5,
) -> Any:
    """Draw y(x) solid where ``lam`` is at or above the transition threshold, dashed in the
    transition range, dotted below the hydrodynamic threshold; the legend entry (``label``)
    is a solid line of the colour. Returns the regimes drawn, as a set of 0, 1, 2."""
    transition, hydrodynamic = limits
    lam = np.asarray(lam, dtype=float)
    y = np.asarray(y, dtype=float)
    regime = np.where(lam >= transition, 0, np.where(lam >= hydrodynamic, 1, 2))
    regime = np.where(np.isfinite(lam), regime, 0)  # no Jeans parameter: drawn as it is
    drawn = set()
    for code, style in enumerate(_REGIME_STYLES):
        inside = regime == code
        joined = inside.copy()
        joined[1:] |= inside[:-1]  # one point more, so the pieces meet
        if np.any(inside & np.isfinite(y)):
            ax.plot(x, np.where(joined, y, np.nan), color=color, ls=style, lw=linewidth)
            drawn.add(code)
    ax.plot([], [], color=color, lw=linewidth, label=label)
    return drawn


def _regime_legend(
    ax: Any, limits: tuple[float, float], drawn: Any, bulk: bool = True, **legend: Any
) -> None:
    """Legend entries (grey) for the line styles of the regimes in ``drawn`` beyond Jeans.

    ``bulk``: each line is a gas of its own (its lambda says its regime); otherwise the lines
    are species of a mixture, whose regime is that of the densest gas (a trace gas with a
    small lambda still escapes molecule by molecule), so the entries say only what lambda is.
    """
    transition, hydrodynamic = limits
    texts = {
        1: f"transition, {hydrodynamic:g} $\\leq \\lambda$ < {transition:g}",
        2: f"hydrodynamic, $\\lambda$ < {hydrodynamic:g}: Jeans not the loss",
    }
    if not bulk:
        texts = {
            1: f"its $\\lambda$ in [{hydrodynamic:g}, {transition:g}): transition as a bulk gas",
            2: f"its $\\lambda$ < {hydrodynamic:g}: hydrodynamic as a bulk gas",
        }
    for code in sorted(set(drawn) - {0}):
        ax.plot([], [], color="0.4", ls=_REGIME_STYLES[code], label=texts[code])
    ax.legend(fontsize="small", **legend)


def _labelled_marker(ax: Any, x: float, text: str, color: str) -> None:
    """A dotted vertical line at ``x`` (data) with ``text`` written along it near the bottom."""
    ax.axvline(x, color=color, linestyle=":", linewidth=1)
    ax.text(
        x,
        0.03,
        text,
        transform=ax.get_xaxis_transform(),
        rotation=90,
        ha="right",
        va="bottom",
        fontsize="x-small",
        color=color,
    )


def _show_hidden(ax: Any, tolerance: float = 0.01) -> None:
    """Widen every line that a later one covers, so that it shows as a band around it.

    Two lines with the same abscissae coincide when they differ nowhere by more than
    ``tolerance`` of the axis' span (in decades on a log axis). Call it once the limits are
    set.
    """
    lines = [ln for ln in ax.get_lines() if len(ln.get_xdata()) > 1]
    log = ax.get_yscale() == "log"

    def values(line: Any) -> Any:
        y = np.asarray(line.get_ydata(), dtype=float)
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.log10(np.where(y > 0, y, np.nan)) if log else y

    ys = [values(ln) for ln in lines]
    bottom, top = ax.get_ylim()
    span = float(abs(np.log10(top / bottom)) if log else abs(top - bottom)) or 1.0
    for i in range(len(lines) - 2, -1, -1):  # from the last back: widths grow downwards
        earlier, y0 = lines[i], ys[i]
        x0 = np.asarray(earlier.get_xdata())
        for later, y1 in zip(lines[i + 1 :], ys[i + 1 :], strict=True):
            x1 = np.asarray(later.get_xdata())
            if x0.shape != x1.shape or not np.array_equal(x0, x1):
                continue
            both = np.isfinite(y0) & np.isfinite(y1)
            # Covered: along at least half of the earlier line, not just where pieces meet.
            if both.sum() < max(2, 0.5 * np.isfinite(y0).sum()):
                continue
            if np.max(np.abs(y0[both] - y1[both])) <= tolerance * span:
                earlier.set_linewidth(max(earlier.get_linewidth(), later.get_linewidth() + 2.5))
                earlier.set_alpha(0.5)


def case_history(
    result: Any,
    case: str | int | None = None,
    species: Sequence[str] | None = None,
    percentiles: tuple[float, float] = (5.0, 95.0),
    fig: Any = None,
) -> Any:
    """One case's history across its species: retained fraction against stellar age (log
    axes), exobase temperature below.

    Each species' retained fraction N(t)/N(start) [1] is one colour, solid while its Jeans
    parameter is at or above the transition threshold, dashed in the transition range and
    dotted below the hydrodynamic threshold (the regimes it would be in as the bulk gas; the
    run's regime is that of the densest species). A case whose bulk gas is hydrodynamic
    without an energy-limited model (a sweep's ``hydrodynamic_unmodelled``; for an evolution,
    a hydrodynamic regime without energy-limited loss) says so in the title. A dotted
    vertical line, labelled, marks each species' depletion time (below the depletion
    fraction, drawn as a grey horizontal line). With Monte Carlo samples (a comparison run
    with ``samples > 0``) a bar at the end age spans the ``percentiles`` of the retained
    fraction over the samples, with the median as a dot, and a bar at the depletion fraction
    spans the same percentiles of the depletion time over the samples that deplete: those
    are the values the result stores per sample.

    Parameters
    ----------
    result : Comparison or EvolutionResult
        From :func:`exosieve.compare` / :func:`exosieve.open_comparison`, or from
        :func:`exosieve.evolve` / :func:`exosieve.open_result`.
    case : str or int, optional
        For a comparison: the case name, or its table row (the variable ``row``); default:
        the first case. For an evolution result: a name for the title.
    species : sequence of str, optional
        Species to draw (default: those the case has).
    percentiles : (float, float)
        Lower and upper percentile of the sample bars [%] (default 5 and 95).
    fig : matplotlib Figure, optional
        Where to draw (a new one by default).

    Returns
    -------
    matplotlib.figure.Figure
        With two Axes: retained fraction [1] and exobase temperature [K] against stellar age
        [Gyr].
    """
    import matplotlib.pyplot as plt

    history = _case_arrays(result, case)
    names = history["species"]
    if species is None:
        chosen = [s for s, here in zip(names, history["present"], strict=True) if here]
    else:
        chosen = [str(s) for s in species]
        unknown = [s for s in chosen if s not in names or not history["present"][names.index(s)]]
        if unknown:
            raise ValueError(
                f"species {unknown} are not in case {history['name']!r} (have {names})"
            )
    if not chosen:
        raise ValueError(f"case {history['name']!r} has no species to draw")
    from ._arrays import real_number

    if len(percentiles) != 2:
        raise ValueError(f"percentiles must be two numbers [%], got {percentiles!r}")
    low_q, high_q = (real_number(q, "percentiles", "%") for q in percentiles)
    if not 0.0 <= low_q < high_q <= 100.0:
        raise ValueError(
            f"percentiles must be two increasing values in [0, 100], got {percentiles}"
        )
    if fig is None:
        fig = plt.figure(figsize=(9.0, 6.2), layout="constrained")
    top, bottom = fig.subplots(2, 1, sharex=True, height_ratios=(3.0, 1.3))
    t = history["time"] / _GYR
    limits = history["limits"]
    fraction = history["depletion_fraction"]
    drawn: set[int] = set()
    lowest = 1.0
    samples = history["sample_fraction"]
    for name in chosen:
        j = names.index(name)
        color = f"C{j % 10}"
        y = history["retained"][:, j]
        y = np.where(y > 0, y, np.nan)
        drawn |= _regime_line(top, t, y, history["jeans"][:, j], limits, color, name)
        if np.any(np.isfinite(y)):
            lowest = min(lowest, float(np.nanmin(y)))
        depleted = history["depletion"][j]
        if np.isfinite(depleted):
            _labelled_marker(top, depleted / _GYR, f"{name} depleted", color)
        if samples is not None:
            values = samples[:, j]
            values = values[np.isfinite(values)]
            if values.size:
                lo, mid, hi = np.percentile(values, (low_q, 50.0, high_q))
                end = history["age_end"] / _GYR * 1.03 ** (chosen.index(name) + 1)
                shown = np.clip([lo, mid, hi], fraction * 1e-4, None)
                top.plot([end, end], shown[[0, 2]], color=color, lw=4, alpha=0.5)
                top.plot(end, shown[1], "o", color=color, ms=4)
                lowest = min(lowest, float(shown[0]))
            times = history["sample_depletion"][:, j]
            times = times[np.isfinite(times)]
            if times.size:
                lo, hi = np.percentile(times, (low_q, high_q)) / _GYR
                top.plot([lo, hi], [fraction, fraction], color=color, lw=4, alpha=0.5)
    top.axhline(fraction, color="0.5", lw=0.8)
    top.annotate(
        f"depletion fraction {fraction:g}",
        (0.01, fraction),
        xycoords=("axes fraction", "data"),
        xytext=(0, -3),
        textcoords="offset points",
        va="top",
        fontsize="x-small",
        color="0.4",
        annotation_clip=True,
    )
    if samples is not None:
        top.plot(
            [],
            [],
            color="0.4",
            lw=4,
            alpha=0.5,
            label=f"{low_q:g}-{high_q:g} % of {samples.shape[0]} samples:\nleft at the end "
            "(upright),\ndepletion time of those\nthat deplete (across)",
        )
    top.set_xscale("log")
    top.set_yscale("log")
    # From a decade below the depletion fraction (or the lowest value) to 2: the depletion
    # level is always on the axis, and values far below it are not stretched out.
    top.set_ylim(max(min(lowest / 3.0, fraction / 10.0), fraction * 1e-4), 2.0)
    _show_hidden(top)
    _regime_legend(top, limits, drawn, bulk=False, loc="upper left", bbox_to_anchor=(1.01, 1.0))
    top.set_ylabel("retained fraction N / N(start) [1]")
    title = f"{history['name']}: what each species keeps"
    if history["unmodelled"]:
        title += "\n(bulk gas hydrodynamic without an energy-limited model: not its loss)"
    top.set_title(title, fontsize="medium")
    temperature = history["temperature"]
    bottom.plot(t, temperature, color="C3")
    if np.any(np.isfinite(temperature)):
        bottom.set_ylim(0.0, 1.15 * float(np.nanmax(temperature)))
    bottom.set_ylabel("exobase temperature [K]")
    bottom.set_xlabel("stellar age [Gyr]")
    return fig


def _case_arrays(result: Any, case: str | int | None) -> dict[str, Any]:
    """The arrays of one case of a comparison, or of an evolution result, for case_history."""
    from .hydrodynamic import REGIMES

    if hasattr(result, "inventory"):  # an EvolutionResult
        config = result.config
        initial = np.asarray(result.initial_inventory, dtype=float)
        retained = np.asarray(result.inventory.values, dtype=float) / initial
        depletion = np.array(
            [
                np.nan if result.depletion_time[s] is None else result.depletion_time[s]
                for s in result.species
            ]
        )
        return {
            "name": case if isinstance(case, str) else "evolve() run",
            "species": list(result.species),
            "present": initial > 0,
            "time": np.asarray(result.time, dtype=float),
            "retained": retained,
            "jeans": np.asarray(result.jeans_parameter.values, dtype=float),
            "depletion": depletion,
            "temperature": np.asarray(result.exobase_temperature, dtype=float),
            "limits": _thresholds(config.get("regime_thresholds")),
            "depletion_fraction": float(config.get("depletion_fraction", 1e-3)),
            "age_end": float(result.time[-1]),
            "unmodelled": bool(
                np.any(
                    (np.asarray(result.regime) == REGIMES.index("hydrodynamic"))
                    & (np.asarray(result.energy_limited) == 0)
                )
            ),
            "sample_fraction": None,
            "sample_depletion": None,
        }
    if not hasattr(result, "cases"):
        raise ValueError(
            f"result must be a Comparison or an EvolutionResult, got {type(result).__name__}"
        )
    names = result.cases
    if not names:
        raise ValueError("the comparison holds no cases")
    if case is None:
        k = 0
    elif isinstance(case, (int, np.integer)) and not isinstance(case, bool):
        rows = np.flatnonzero(np.asarray(result["row"]) == int(case))
        if rows.size == 0:
            raise ValueError(f"case: no row {case} in the comparison (rows 0 to {len(names) - 1})")
        k = int(rows[0])
    elif isinstance(case, str):
        if case not in names:
            raise ValueError(f"case: no case {case!r} in the comparison (have {names[:10]})")
        k = names.index(case)
    else:
        raise ValueError(f"case must be a case name or a row number, got {case!r}")
    error = str(result["error"][k])
    if error:
        raise ValueError(f"case {names[k]!r} did not run: {error}")
    options = result.config.get("options", {})
    sampled = result.samples > 0
    # The output ages are shared by all cases; this case's own end (its final values) is
    # added where it falls between them, so that every line reaches the end of its run.
    time = np.asarray(result.times, dtype=float)
    retained = np.asarray(result["retained_fraction"][k], dtype=float)
    jeans = np.asarray(result["jeans_parameter"][k], dtype=float)
    temperature = np.asarray(result["exobase_temperature"][k], dtype=float)
    end = float(result["age_end"][k])
    if np.isfinite(end) and not np.any(time == end):
        at = int(np.searchsorted(time, end))
        time = np.insert(time, at, end)
        retained = np.insert(retained, at, result["final_retained_fraction"][k], axis=0)
        jeans = np.insert(jeans, at, result["jeans_parameter_end"][k], axis=0)
        temperature = np.insert(temperature, at, np.nan)  # not stored at the end age
    return {
        "name": names[k],
        "species": list(result.species),
        "present": np.asarray(result["mole_fraction"][k]) > 0,
        "time": time,
        "retained": retained,
        "jeans": jeans,
        "depletion": np.asarray(result["depletion_time"][k], dtype=float),
        "temperature": temperature,
        "limits": _thresholds(options.get("regime_thresholds")),
        "depletion_fraction": float(options.get("depletion_fraction", 1e-3)),
        "age_end": float(result["age_end"][k]),
        "unmodelled": int(result["hydrodynamic_unmodelled"][k]) == 1,
        "sample_fraction": (
            np.asarray(result["sample_retained_fraction"][k], dtype=float) if sampled else None
        ),
        "sample_depletion": (
            np.asarray(result["sample_depletion_time"][k], dtype=float) if sampled else None
        ),
    }
