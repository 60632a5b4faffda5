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
        lam = np.asarray(jeans_parameter(t, gas, planet_mass, radius))
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
    faster escape speed) lambda is larger. Markers: filled circles for cases that keep more than
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
            for label, xi, yi in zip(np.asarray(comparison["case"])[here], x, y, strict=True):
                ax.annotate(
                    str(label),
                    (xi, yi),
                    xytext=(3, 3),
                    textcoords="offset points",
                    fontsize="x-small",
                )
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
    handles = [
        Line2D([], [], color="0.35", ls=style, label=f"$\\lambda$ = {value:g}")
        for value, style in levels
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


def retention_intervals(comparison: Any, gas: str, ax: Any = None) -> Any:
    """Monte Carlo uncertainty of the retained fraction of one species in every case.

    For each case a bar spans the 5th to 95th percentile of the retained fraction at the end
    over the samples [1] (log scale), with a dot at the median and a cross at the nominal run.

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
    floor = 1e-30  # retained fractions below this are drawn at the axis floor
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
    ax.set_xlim(floor / 3, 3.0)
    ax.set_yticks(y, names)
    ax.invert_yaxis()
    ax.set_xlabel(f"retained fraction of {gas} at the end [1]")
    ax.set_title(f"{gas}: Monte Carlo spread over {comparison.samples} samples per case")
    ax.legend(fontsize="small", loc="lower left")
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
    cases : str, Path, pandas.DataFrame or CaseTable
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
            for text, xi, yi in zip(
                np.asarray(comparison["case"], dtype=object)[draw],
                position[draw],
                flux[draw],
                strict=True,
            ):
                ax.annotate(
                    str(text),
                    (xi, yi),
                    xytext=(3, 3),
                    textcoords="offset points",
                    fontsize="x-small",
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
