"""The ``exosieve`` command: sweep a case table to HDF5, summarise and chart the result, find
which uncertain input drives it (Sobol' indices), list the case-table columns, invert a measured
isotope ratio for the initial inventory, run the demo."""

from __future__ import annotations

import argparse
import math
import os
import signal
import sys
from pathlib import Path
from typing import Any


def _demo(args: argparse.Namespace) -> int:
    from .demo import run_demo

    run_demo(args.output, None if args.no_chart else args.chart, args.samples, args.seed)
    return 0


def _floats(text: str) -> list[float]:
    try:
        return [float(part) for part in text.split(",") if part.strip()]
    except ValueError:
        raise argparse.ArgumentTypeError(
            f"expected numbers separated by commas, got '{text}'"
        ) from None


def _age(text: str) -> float:
    """An age with its unit word, e.g. '10 Myr' or '4.5Gyr' (s, yr, Myr, Gyr), in seconds."""
    import re

    from .catalogue import UNITS

    match = re.fullmatch(r"\s*([-+0-9.eE]+)\s*([A-Za-z]+)\s*", text)
    scale, unit = UNITS.get(match.group(2), (0.0, "")) if match else (0.0, "")
    try:
        value = float(match.group(1)) * scale if match else math.nan
    except ValueError:
        value = math.nan
    if unit != "s" or not (0 <= value < math.inf):
        raise argparse.ArgumentTypeError(
            f"expected an age with its unit (s, yr, Myr or Gyr), e.g. '10 Myr', got '{text}'"
        )
    return value


def _names(text: str) -> list[str]:
    return [part.strip() for part in text.split(",") if part.strip()]


def _sweep(args: argparse.Namespace) -> int:
    from .batch import Interrupted, compare

    output = Path(args.output)
    client: Any = None
    if args.scheduler:
        try:
            from distributed import Client
        except ImportError:
            print(
                "exosieve: error: --scheduler needs dask.distributed "
                "(pip install 'exosieve[distributed]')",
                file=sys.stderr,
            )
            return 2
        client = Client(args.scheduler)
    # A termination signal stops the sweep as Ctrl-C does: finished chunks stay in the file.
    previous = signal.getsignal(signal.SIGTERM)

    def stop(signum: int, frame: Any) -> None:
        raise KeyboardInterrupt

    signal.signal(signal.SIGTERM, stop)
    try:
        result = compare(
            args.table,
            output=output,
            overwrite=args.overwrite,
            t_start=args.start,
            t_end=args.end,
            times=args.times,
            samples=args.samples,
            seed=args.seed,
            design=args.design,
            retain=args.retain,
            depletion_fraction=args.depletion,
            rtol=args.rtol,
            max_steps=args.max_steps,
            bad_rows=args.bad_rows,
            threads=args.threads,
            chunk_size=args.chunk,
            client=client,
            progress=not args.quiet,
        )
    except Interrupted as stopped:
        print(
            f"exosieve: interrupted: {len(stopped.result)} of {stopped.result.total_cases} cases "
            f"are safe in {output}; run the same command again to resume",
            file=sys.stderr,
        )
        return 130
    finally:
        signal.signal(signal.SIGTERM, previous)
        if client is not None:
            client.close()
    errors = result.errors
    failed = int((errors["error"] != "").sum()) if len(errors) else 0
    if result.resumed_from:
        print(f"resumed after the {result.resumed_from} cases already in {output}")
    print(f"wrote {output.resolve()}: {len(result)} cases, {failed} failed")
    for _, row in errors.head(10).iterrows():
        text = row["error"] or f"{row['samples_failed']} failed samples; {row['sample_error']}"
        print(f"  {row['case']} (row {row['row']}): {text}")
    if len(errors) > 10:
        print(f"  ... and {len(errors) - 10} more (see 'exosieve summary')")
    _print_hydrodynamic(result)
    return 0


def _print_hydrodynamic(result: Any, limit: int = 10) -> None:
    """Name the cases whose bulk gas goes hydrodynamic, at the start or later, without an
    energy-limited model, and how much of their loss lies outside the Jeans picture."""
    import numpy as np

    flagged = np.nonzero(np.asarray(result["hydrodynamic_unmodelled"]) == 1)[0]
    if not len(flagged):
        return
    names, rows, species = result["case"], result["row"], list(result.species)
    lam = result["bulk_jeans_parameter_start"]
    x = np.nan_to_num(np.asarray(result["mole_fraction"]))
    with np.errstate(invalid="ignore", divide="ignore"):  # lambda is linear in the mass
        lam_end = np.nansum(x * result["jeans_parameter_end"], axis=1) / x.sum(axis=1)
    share = np.asarray(result["non_jeans_loss_share"])
    print(
        f"{len(flagged)} case{'s go' if len(flagged) > 1 else ' goes'} hydrodynamic (the bulk "
        "gas at or below the hydrodynamic threshold of the Jeans parameter, at the start or "
        f"later in the run) and {'have' if len(flagged) > 1 else 'has'} no heating_efficiency, "
        "so no energy-limited model: their loss is not Jeans escape and their retained "
        "fractions do not describe it"
    )
    for k in flagged[:limit]:
        words = (
            f"bulk Jeans parameter {float(lam[k]):.3g} at the start, {lam_end[k]:.3g} at the end"
        )
        shares = share[k]
        if np.isfinite(shares).any():
            j = int(np.nanargmax(shares))
            words += f"; {species[j]}: {shares[j]:.0%} of its loss outside the Jeans picture"
        print(f"  {names[k]} (row {rows[k]}): {words}")
    if len(flagged) > limit:
        print(f"  ... and {len(flagged) - limit} more (column hydrodynamic_unmodelled)")


def _summary(args: argparse.Namespace) -> int:
    from . import constants as c
    from .batch import open_comparison
    from .sweep_file import check_ranges

    result = open_comparison(args.result)
    # Every stored variable is read (checksums) and range-checked, not only those summarised,
    # so that a damaged file is refused rather than summarised in part.
    check_ranges(
        Path(args.result),
        len(result),
        result.samples,
        len(result.species),
        inputs=len(result.inputs),
    )
    frame = result.summarize(retain=args.retain, percentiles=args.percentiles)
    if args.species:
        frame = frame[frame["species"].isin(args.species) | (frame["species"] == "")]
    if args.csv:
        units = frame.attrs["units"]
        renamed = frame.rename(columns={k: f"{k} [{u}]" for k, u in units.items() if k in frame})
        renamed.to_csv(args.csv, index=False)
    shown = frame.drop(columns=["row", "error"]).copy()
    if not (shown["given_loss_rate_start"] > 0).any():  # no case has a given loss
        shown = shown.drop(columns=["given_loss_rate_start"])
    for name in ("depletion_time", "efolding_time"):
        shown[name] = shown[name] / c.GYR
    shown = shown.rename(
        columns={
            "final_retained_fraction": "left [1]",
            "depletion_time": "depleted [Gyr]",
            "efolding_time": "e-fold [Gyr]",
            "escape_rate_start": "Q0 [s-1]",
            "given_loss_rate_start": "given0 [s-1]",
            "jeans_parameter_start": "lambda0 [1]",
            "jeans_parameter_end": "lambda1 [1]",
            "regime_start": "regime",
            "hydrodynamic_unmodelled": "hydro?",
            "non_jeans_loss_share": "non-Jeans [1]",
            "probability_retained": "P(kept) [1]",
            "samples_ok": "samples",
        }
    )
    shown = shown.rename(
        columns=lambda n: (
            n.replace("retained_fraction_p", "p") + " [1]"
            if n.startswith("retained_fraction_p")
            else n
        )
    )
    print(
        f"{result.path}: {len(result)} of {result.total_cases} cases; kept = more than "
        f"{frame.attrs['retain']:g} of the inventory left at the end"
    )
    import pandas as pd

    with pd.option_context(
        "display.max_rows", None, "display.width", 250, "display.max_columns", None
    ):
        print(shown.to_string(index=False, float_format=lambda x: f"{x:.3g}"))
    errors = result.errors
    for _, row in errors.iterrows():
        text = row["error"] or f"{row['samples_failed']} failed samples; {row['sample_error']}"
        print(f"error: {row['case']} (row {row['row']}): {text}")
    _print_hydrodynamic(result)
    if args.csv:
        print(f"wrote {Path(args.csv).resolve()}")
    return 0


def _sensitivity(args: argparse.Namespace) -> int:
    import numpy as np
    import pandas as pd

    from .batch import open_comparison

    result = open_comparison(args.result)
    frame = result.sensitivity(
        args.measure,
        retain=args.retain,
        resamples=args.resamples,
        confidence=args.confidence,
        seed=args.seed,
    )
    if args.case:
        known = set(frame["case"])
        unknown = [name for name in args.case if name not in known]
        if unknown:
            raise ValueError(f"--case: no case {unknown} in {args.result}")
        frame = frame[frame["case"].isin(args.case)]
    if args.species:
        frame = frame[frame["species"].isin(args.species)]
    if args.csv:
        frame.to_csv(args.csv, index=False)
    level = 100.0 * frame.attrs["confidence"]
    what = (
        f"kept (more than {frame.attrs['retain']:g} left at the end) or lost"
        if args.measure == "retained"
        else "the retained fraction at the end"
    )
    print(
        f"{result.path}: Sobol' indices of {what}, {result.config['options']['samples']} base "
        f"rows x ({len(result.inputs)} inputs + 2) runs per case; [low, high] are "
        f"{level:g} % bootstrap intervals ({frame.attrs['resamples']} resamples)"
    )
    shown = frame[np.isfinite(frame["total"].to_numpy(dtype=float))].copy()
    quiet = frame.groupby(["case", "species"], sort=False)["total"].apply(
        lambda t: not np.isfinite(t.to_numpy(dtype=float)).any()
    )
    table = pd.DataFrame(
        {
            "case": shown["case"],
            "species": shown["species"],
            "input": [f"{n} [{u}]" for n, u in zip(shown["input"], shown["unit"], strict=True)],
            "S1 [1]": shown["first_order"],
            "S1 low": shown["first_order_low"],
            "S1 high": shown["first_order_high"],
            "ST [1]": shown["total"],
            "ST low": shown["total_low"],
            "ST high": shown["total_high"],
            ("P(kept) [1]" if args.measure == "retained" else "mean [1]"): shown["output_mean"],
        }
    )
    with pd.option_context(
        "display.max_rows", None, "display.width", 250, "display.max_columns", None
    ):
        print(table.to_string(index=False, float_format=lambda x: f"{x:.3g}"))
    for case, gas in quiet[quiet].index:
        print(f"{case}, {gas}: does not vary over the samples (no indices)")
    if args.csv:
        print(f"wrote {Path(args.csv).resolve()}")
    if args.chart:
        plt = _pyplot("--chart")
        if plt is None:
            return 2
        from .plot import sensitivity_chart

        if shown.empty:
            raise ValueError("--chart: no case and species with indices to draw")
        case = str(shown["case"].iloc[0])
        axes = sensitivity_chart(frame, case=case)
        axes[0].figure.savefig(args.chart, dpi=args.dpi)
        plt.close(axes[0].figure)
        print(f"wrote {Path(args.chart).resolve()} (case {case})")
    return 0


def _pyplot(what: str) -> Any:
    """matplotlib.pyplot on the file-only Agg backend; None (the error said) without it."""
    try:
        import matplotlib
    except ImportError:
        print(f"exosieve: error: {what} needs matplotlib (pip install matplotlib)", file=sys.stderr)
        return None
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    return plt


def _save(plt: Any, fig: Any, args: argparse.Namespace) -> int:
    """Write ``fig`` to ``args.output`` at ``args.dpi`` and say where."""
    fig.savefig(args.output, dpi=args.dpi)
    plt.close(fig)
    print(f"wrote {Path(args.output).resolve()}")
    return 0


def _chart(args: argparse.Namespace) -> int:
    plt = _pyplot("'chart'")
    if plt is None:
        return 2
    from .batch import open_comparison
    from .plot import retention_chart

    result = open_comparison(args.result)
    return _save(plt, retention_chart(result, species=args.species, retain=args.retain), args)


def _columns(args: argparse.Namespace) -> int:
    from .catalogue import (
        UNITS,
        case_columns,
        case_table_template_path,
        column_groups,
        species_columns,
        text_columns,
    )

    print(
        "Case-table columns (header 'quantity [unit]'; SI unit given, any unit measuring it "
        "is accepted), grouped by what they describe:"
    )
    rows = {row[0]: row for row in case_columns() + species_columns()}
    for heading, names in column_groups():
        print(heading[0].upper() + heading[1:] + ":")
        for name in names:
            _, unit, meaning, required, uncertain = rows[name]
            flags = ("required" if required else "optional") + (
                ", may have _sigma/_lnsigma/_sigma_upper+_sigma_lower" if uncertain else ""
            )
            print(f"  {name:30s} [{unit}]  {meaning} ({flags})")
    print(
        "Per species: a column '<prefix><species>' for each species of the table (e.g. x_He, "
        "given_loss_He); a row's mole fractions x_<species> sum to 1 within 1e-3, and the "
        "other per-species columns need the species' x_ column."
    )
    print("Text columns (case first):")
    for name, meaning in text_columns():
        print(f"  {name:30s} {meaning}")
    print(
        "Upper atmosphere, one per row: a prescribed exobase (exobase_altitude, "
        "exobase_density, and its own composition exobase_x_<species> or exobase_composition "
        "'bulk') or a thermosphere (homopause_altitude, homopause_density; "
        "homopause_temperature and bates_shape for a Bates profile; diffusion_limited), whose "
        "exobase and its composition are found at every step from the bulk fractions."
    )
    by_unit: dict[str, list[str]] = {}
    for word, (_, si) in UNITS.items():
        by_unit.setdefault(si, []).append(word)
    print("Unit words: " + "; ".join(f"{si}: {', '.join(w)}" for si, w in by_unit.items()))
    print(
        "Any other unit astropy reads is accepted where it measures the quantity (with astropy "
        "installed), e.g. 'planet_mass [Mjup]', 'temperature_reference_flux [erg / (s cm2)]', "
        "'homopause_density [1e17 m-3]'."
    )
    print(f"Template: {case_table_template_path()}")
    return 0


def _invert(args: argparse.Namespace) -> int:
    import csv

    import numpy as np

    from .catalogue import load_cases
    from .inversion import invert_case

    table = load_cases(args.table)
    if args.case:
        chosen: list[str | int] = [
            int(k) if k.isdigit() and k not in table.names else k for k in args.case
        ]
    else:
        chosen = list(range(len(table)))
    percentiles = args.percentiles or [5.0, 16.0, 50.0, 84.0, 95.0]
    rows: list[dict[str, Any]] = []
    unsolved = 0
    for case in chosen:
        try:
            result = invert_case(
                table,
                case,
                ratio=args.ratio,
                measured=args.measured,
                sigma=args.sigma,
                lnsigma=args.lnsigma,
                relative=args.relative,
                scaled=args.scale,
                inventory_min=args.min,
                inventory_max=args.max,
                search_factor=args.search_factor,
                samples=args.samples,
                seed=args.seed,
                threads=args.threads,
                t_start=args.start,
                t_end=args.end,
                rtol=args.rtol,
                max_steps=args.max_steps,
            )
        except KeyboardInterrupt:
            print(f"exosieve: interrupted at case {case!r}", file=sys.stderr)
            return 130
        index = case if isinstance(case, int) else table.names.index(case)
        name = table.names[index]
        scaled = ", ".join(result.scaled)
        what = "enrichment" if result.relative else "ratio"
        print(
            f"{name} (row {index}): {result.ratio} {result.target:.6g} sought at the end "
            f"({what} {result.measured:.6g}; {result.initial_ratio:.6g} at the start)"
        )
        row: dict[str, Any] = {
            "case": name,
            "row": index,
            "ratio": result.ratio,
            "status": result.status,
            "message": result.message,
            "target [1]": result.target,
            "initial_ratio [1]": result.initial_ratio,
            "total_initial [particles]": result.total_initial,
            "total_lost [particles]": result.total_lost,
            "bracket_low [particles]": result.bracket[0],
            "bracket_high [particles]": result.bracket[1],
            "ratio_low [1]": result.bracket_ratio[0],
            "ratio_high [1]": result.bracket_ratio[1],
            "runs [1]": result.runs,
        }
        if result.solved:
            print(
                f"  solved: initial {scaled} {result.total_initial:.6g} particles, lost "
                f"{result.total_lost:.6g} particles ({result.runs} runs)"
            )
            if result.message:
                print(f"  note: {result.message}")
        else:
            unsolved += 1
            shown = result.message if result.status == "no_solution" else result.status
            print(f"  {shown}" + ("" if shown == result.message else f": {result.message}"))
        ocean = None
        if args.ocean:
            ocean = result.ocean_depth(args.density)
            row["ocean_initial [m]"] = ocean["initial"]
            row["ocean_lost [m]"] = ocean["lost"]
            if result.solved:
                print(
                    f"  as a global ocean ({args.density:g} kg/m3 water on radius "
                    f"{result.planet_radius / 1e3:.6g} km): initial {ocean['initial']:.4g} m, "
                    f"lost {ocean['lost']:.4g} m"
                )
        drawn = result.samples
        if drawn is not None:
            counts = drawn.counts
            print(
                f"  {len(drawn)} samples: " + ", ".join(f"{v} {k}" for k, v in counts.items() if v)
            )
            for status, count in counts.items():
                row[f"samples_{status} [1]"] = count
            q = drawn.quantiles(percentiles)
            # (label, CSV column, unit) -> percentiles over the solved samples
            lines = {
                ("initial", "total_initial", "particles"): q["total_initial"],
                ("lost", "total_lost", "particles"): q["total_lost"],
            }
            if args.ocean:
                depth = drawn.ocean_depth(args.density)
                keep = drawn.solved
                for key in ("initial", "lost"):
                    values = depth[key][keep]
                    lines[(f"ocean {key}", f"ocean_{key}", "m")] = (
                        np.percentile(values, q["percentile"])
                        if values.size
                        else np.full(len(percentiles), np.nan)
                    )
            header = "".join(f"{f'p{p:g}':>12s}" for p in q["percentile"])
            print(f"    {'percentile [%]':22s}{header}")
            for (label, column, unit), values in lines.items():
                print(f"    {f'{label} [{unit}]':22s}" + "".join(f"{v:12.4g}" for v in values))
                for p, v in zip(q["percentile"], values, strict=True):
                    row[f"{column}_p{p:g} [{unit}]"] = float(v)
            failed = [
                m for m, st in zip(drawn.message, drawn.status, strict=True) if st != "solved"
            ]
            if failed:
                print(f"    first unsolved sample: {failed[0]}")
        rows.append(row)
    if args.csv:
        columns: list[str] = []
        for row in rows:
            columns += [k for k in row if k not in columns]
        with open(args.csv, "w", newline="", encoding="utf-8") as handle:
            writer = csv.DictWriter(handle, fieldnames=columns)
            writer.writeheader()
            writer.writerows(rows)
        print(f"wrote {Path(args.csv).resolve()}")
    return 3 if unsolved else 0


def _from_archive(args: argparse.Namespace) -> int:
    from .archive import archive_cases
    from .constants import R_EARTH

    source, target = Path(args.archive), Path(args.output)
    if target.exists() and target.resolve() == source.resolve():
        raise ValueError(f"output: '{target}' is the archive table itself; choose another file")
    if target.exists() and not args.overwrite:
        raise ValueError(f"output: '{target}' exists; pass --overwrite to replace it")
    converted = archive_cases(
        source,
        limits=args.limits,
        radius_valley=args.radius_valley * R_EARTH,
        exobase_temperature_factor=args.temperature_factor,
        homopause_scale_heights=args.homopause_scale_heights,
    )
    print(converted.report())
    converted.to_csv(target)
    print(f"wrote {target.resolve()}")
    return 0


def _map(args: argparse.Namespace) -> int:
    plt = _pyplot("'map'")
    if plt is None:
        return 2
    from .batch import open_comparison
    from .plot import retention_map

    result = open_comparison(args.result)
    fig = retention_map(result, args.cases, species=args.species, x=args.x, retain=args.retain)
    return _save(plt, fig, args)


def _table(args: argparse.Namespace) -> int:
    from .batch import open_comparison
    from .export import comparison_table

    result = open_comparison(args.result)
    frame = comparison_table(result, args.output, species=args.species, retain=args.retain)
    print(
        f"wrote {Path(args.output).resolve()}: {len(frame)} cases, {frame.shape[1]} columns "
        "(headers 'quantity [unit]', SI)"
    )
    return 0


def _history(args: argparse.Namespace) -> int:
    plt = _pyplot("'history'")
    if plt is None:
        return 2
    import json

    from .batch import open_comparison
    from .hdf5_io import read_attribute
    from .plot import case_history

    kind = json.loads(read_attribute(Path(args.result), "", "config")).get("kind")
    result: Any
    case: str | int | None = args.case
    if kind == "exosieve.compare":
        result = open_comparison(args.result)
        if args.case is not None and args.case not in result.cases and args.case.isdigit():
            case = int(args.case)  # a row number
    else:  # the file of one evolve() run; --case names it in the title
        from .result import open_result

        result = open_result(args.result)
        case = args.case or Path(args.result).stem
    return _save(plt, case_history(result, case, species=args.species), args)


def build_parser() -> argparse.ArgumentParser:
    """The argument parser of the ``exosieve`` command."""
    from . import __version__

    parser = argparse.ArgumentParser(
        prog="exosieve",
        description="Thermal (Jeans) escape of planetary atmospheres: which planets keep which "
        "gases. SI units unless a column or option says otherwise.",
    )
    parser.add_argument("--version", action="version", version=f"exosieve {__version__}")
    commands = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")

    sweep = commands.add_parser(
        "sweep",
        help="evolve every case of a case table into an HDF5 result file",
        description="Evolve every planet case of TABLE (CSV, headers 'quantity [unit]'; see "
        "'exosieve columns') on all cores, with Monte Carlo samples over the stated "
        "uncertainties, and append the results chunk by chunk to OUTPUT. Interrupted (Ctrl-C "
        "or SIGTERM), the finished chunks stay in OUTPUT, and the same command resumes after "
        "them.",
    )
    sweep.add_argument("table", help="case table (CSV file)")
    sweep.add_argument(
        "-o",
        "--output",
        required=True,
        help="HDF5 result file to write, or to resume if it holds this sweep",
    )
    sweep.add_argument(
        "--samples",
        type=int,
        default=0,
        metavar="N",
        help="Monte Carlo samples per case [1] (default: %(default)s)",
    )
    sweep.add_argument(
        "--seed", type=int, default=0, help="seed of the Monte Carlo draws (default: %(default)s)"
    )
    sweep.add_argument(
        "--design",
        choices=("monte_carlo", "saltelli"),
        default="monte_carlo",
        help="monte_carlo: --samples independent draws per case; saltelli: a design for "
        "sensitivity indices ('exosieve sensitivity') with --samples base rows, --samples x "
        "(uncertain inputs + 2) runs per case (default: %(default)s)",
    )
    sweep.add_argument(
        "--start",
        type=_age,
        default="10 Myr",
        metavar="AGE",
        help="stellar age at the start, with its unit (s, yr, Myr, Gyr), for rows without "
        "age_start (default: %(default)s)",
    )
    sweep.add_argument(
        "--end",
        type=_age,
        default="4.5 Gyr",
        metavar="AGE",
        help="stellar age at the end, with its unit (s, yr, Myr, Gyr), for rows without "
        "age_end or star_age (default: %(default)s)",
    )
    sweep.add_argument(
        "--times",
        type=int,
        default=16,
        metavar="N",
        help="number of output ages [1], log-spaced from the earliest start to "
        "the latest end (default: %(default)s)",
    )
    sweep.add_argument(
        "--retain",
        type=float,
        default=0.5,
        metavar="FRACTION",
        help="summary threshold: kept = more than this fraction of the inventory "
        "left at the end [1] (default: %(default)s)",
    )
    sweep.add_argument(
        "--depletion",
        type=float,
        default=1e-3,
        metavar="FRACTION",
        help="depleted = less than this fraction of the inventory left [1] (default: %(default)s)",
    )
    sweep.add_argument(
        "--rtol",
        type=float,
        default=1e-6,
        help="relative tolerance of each run [1] (default: %(default)s)",
    )
    sweep.add_argument(
        "--max-steps",
        type=int,
        default=100_000,
        metavar="N",
        help="integration step budget of each run [1] (default: %(default)s)",
    )
    sweep.add_argument(
        "--bad-rows",
        choices=("raise", "report"),
        default="raise",
        help="'raise': stop before any run at a malformed row, naming row and "
        "column; 'report': record its error and run the others "
        "(default: %(default)s)",
    )
    sweep.add_argument(
        "--threads",
        type=int,
        default=None,
        metavar="N",
        help="threads [1] (default: all cores; with --scheduler: per task, 1)",
    )
    sweep.add_argument(
        "--chunk",
        type=int,
        default=None,
        metavar="CASES",
        help="cases per chunk written at once (and per task on a cluster) [1] "
        "(default: 8 to 1024, fewer with more samples)",
    )
    sweep.add_argument(
        "--scheduler",
        default=None,
        metavar="ADDRESS",
        help="address of a dask.distributed scheduler, e.g. tcp://host:8786: "
        "run the chunks on its workers (needs exosieve[distributed])",
    )
    sweep.add_argument(
        "--overwrite", action="store_true", help="replace OUTPUT instead of resuming it"
    )
    sweep.add_argument("--quiet", "-q", action="store_true", help="no progress bar")
    sweep.set_defaults(run=_sweep)

    summary = commands.add_parser(
        "summary",
        help="print the per-case, per-species summary of a result file",
        description="Print one line per case and species of a result file: fraction of the "
        "inventory left at the end [1], whether it is kept, depletion time [Gyr], e-folding "
        "time N/Q at the start [Gyr], thermal escape rate Q at the start [s-1] (and the given "
        "loss rate, when a case has one), Jeans parameter at start and end [1], regime at the "
        "start and, with samples, the probability of keeping it with percentiles of the left "
        "fraction.",
    )
    summary.add_argument("result", help="HDF5 file written by 'exosieve sweep'")
    summary.add_argument(
        "--retain",
        type=float,
        default=None,
        metavar="FRACTION",
        help="kept = more than this fraction left [1] (default: the sweep's)",
    )
    summary.add_argument(
        "--percentiles",
        type=_floats,
        default=None,
        metavar="Q,Q,...",
        help="percentiles of the sampled left fraction [%%] (default: the sweep's, 5,50,95)",
    )
    summary.add_argument(
        "--species", type=_names, default=None, metavar="A,B,...", help="only these species"
    )
    summary.add_argument(
        "--csv",
        default=None,
        metavar="FILE",
        help="also write the summary in SI units to this CSV file",
    )
    summary.set_defaults(run=_summary)

    chart = commands.add_parser(
        "chart",
        help="draw a retention chart of a result file to PNG",
        description="One panel per species: each case placed by its escape speed at the "
        "exobase [km/s] and its exobase temperature at the start [K], with the lines where "
        "the Jeans parameter crosses the regime thresholds and markers for kept or lost "
        "(coloured by probability with samples).",
    )
    chart.add_argument("result", help="HDF5 file written by 'exosieve sweep'")
    chart.add_argument(
        "-o",
        "--output",
        default="exosieve-retention.png",
        help="PNG file to write (default: %(default)s)",
    )
    chart.add_argument(
        "--species",
        type=_names,
        default=None,
        metavar="A,B,...",
        help="only these species (default: every species present)",
    )
    chart.add_argument(
        "--retain",
        type=float,
        default=None,
        metavar="FRACTION",
        help="kept = more than this fraction left [1] (default: the sweep's)",
    )
    chart.add_argument(
        "--dpi", type=int, default=120, help="resolution [dots per inch] (default: %(default)s)"
    )
    chart.set_defaults(run=_chart)

    sens = commands.add_parser(
        "sensitivity",
        help="which uncertain input drives each species' retention: Sobol' indices",
        description="First-order (alone) and total (with interactions) Sobol' indices of "
        "each uncertain input, per case and species, with bootstrap intervals, from a result "
        "file of 'exosieve sweep --design saltelli'. Indices are shares of the variance [1] of "
        "the retention indicator (kept or lost: its mean is the probability of keeping the "
        "species) or of the retained fraction.",
    )
    sens.add_argument("result", help="HDF5 file written by 'exosieve sweep --design saltelli'")
    sens.add_argument(
        "--measure",
        choices=("retained", "fraction"),
        default="retained",
        help="retained: kept (1) or lost (0); fraction: the fraction left at the end "
        "(default: %(default)s)",
    )
    sens.add_argument(
        "--retain",
        type=float,
        default=None,
        metavar="FRACTION",
        help="kept = more than this fraction left [1] (default: the sweep's)",
    )
    sens.add_argument(
        "--case", type=_names, default=None, metavar="A,B,...", help="only these cases"
    )
    sens.add_argument(
        "--species", type=_names, default=None, metavar="A,B,...", help="only these species"
    )
    sens.add_argument(
        "--resamples",
        type=int,
        default=1000,
        help="bootstrap resamples of the intervals (default: %(default)s)",
    )
    sens.add_argument(
        "--confidence",
        type=float,
        default=0.95,
        help="level of the intervals [1] (default: %(default)s)",
    )
    sens.add_argument(
        "--seed", type=int, default=0, help="seed of the bootstrap (default: %(default)s)"
    )
    sens.add_argument(
        "--csv", default=None, metavar="FILE", help="also write the indices to this CSV file"
    )
    sens.add_argument(
        "--chart",
        default=None,
        metavar="PNG",
        help="draw the indices of the first case shown (or the --case given) to this PNG file",
    )
    sens.add_argument(
        "--dpi", type=int, default=120, help="resolution [dots per inch] (default: %(default)s)"
    )
    sens.set_defaults(run=_sensitivity)

    columns = commands.add_parser(
        "columns",
        help="list the case-table columns, their units and the template",
        description="List every column a case table may have, with its SI unit, and the "
        "unit words accepted in headers.",
    )
    columns.set_defaults(run=_columns)

    invert = commands.add_parser(
        "invert",
        help="find the initial inventory that reproduces a measured isotope ratio",
        description="For each chosen row of TABLE (default: every row), find the total initial "
        "inventory of the ratio's species (or of --scale's, their proportions held) for which "
        "the ratio at the row's end age equals MEASURED, with Monte Carlo samples over every "
        "stated uncertainty of the row and of the measurement. Prints the solution, the amount "
        "lost, and percentiles over the samples; a row without a solution in the range "
        "searched is reported with that range and the ratio at its ends. Exit status 3 when "
        "some row has no solution or failed.",
    )
    invert.add_argument("table", help="case table (CSV file)")
    invert.add_argument(
        "--ratio", required=True, metavar="NUM/DEN", help="the measured ratio, e.g. D/H"
    )
    invert.add_argument(
        "--measured",
        type=float,
        required=True,
        metavar="VALUE",
        help="its measured value at the row's end age [1] (with --relative: the enrichment "
        "over the initial ratio)",
    )
    width = invert.add_mutually_exclusive_group()
    width.add_argument(
        "--sigma", type=float, default=0.0, help="standard uncertainty of VALUE [1] (normal)"
    )
    width.add_argument(
        "--lnsigma",
        type=float,
        default=None,
        help="standard deviation of ln(VALUE) [1] (log-normal, VALUE the median)",
    )
    invert.add_argument(
        "--relative", action="store_true", help="VALUE is the enrichment R(end)/R(start)"
    )
    invert.add_argument(
        "--case",
        action="append",
        default=None,
        metavar="NAME",
        help="a row by case name or 0-based index (repeatable; default: every row)",
    )
    invert.add_argument(
        "--scale",
        type=_names,
        default=None,
        metavar="A,B,...",
        help="species scaled together (default: the ratio's two)",
    )
    invert.add_argument(
        "--min", type=float, default=None, metavar="N", help="smallest total searched [particles]"
    )
    invert.add_argument(
        "--max", type=float, default=None, metavar="N", help="largest total searched [particles]"
    )
    invert.add_argument(
        "--search-factor",
        type=float,
        default=1e10,
        metavar="F",
        help="search from the row's total divided to multiplied by F [1] (default: %(default)g)",
    )
    invert.add_argument(
        "--samples", type=int, default=0, metavar="N", help="Monte Carlo samples [1] (default: 0)"
    )
    invert.add_argument(
        "--seed", type=int, default=0, help="seed of the Monte Carlo draws (default: %(default)s)"
    )
    invert.add_argument(
        "--threads", type=int, default=None, metavar="N", help="threads (default: all cores)"
    )
    invert.add_argument(
        "--start",
        type=_age,
        default="10 Myr",
        metavar="AGE",
        help="stellar age at the start, with its unit (s, yr, Myr, Gyr), for rows without "
        "age_start (default: %(default)s)",
    )
    invert.add_argument(
        "--end",
        type=_age,
        default="4.5 Gyr",
        metavar="AGE",
        help="age of the measurement, with its unit (s, yr, Myr, Gyr), for rows without "
        "age_end or star_age (default: %(default)s)",
    )
    invert.add_argument(
        "--rtol",
        type=float,
        default=1e-8,
        help="relative tolerance of each run [1] (default: %(default)s)",
    )
    invert.add_argument(
        "--max-steps",
        type=int,
        default=100_000,
        metavar="N",
        help="integration step budget of each run [1] (default: %(default)s)",
    )
    invert.add_argument(
        "--percentiles",
        type=_floats,
        default=None,
        metavar="Q,Q,...",
        help="percentiles over the samples [%%] (default: 5,16,50,84,95)",
    )
    invert.add_argument(
        "--ocean",
        action="store_true",
        help="also give the hydrogen of the scaled species as a global ocean of water [m]",
    )
    invert.add_argument(
        "--density",
        type=float,
        default=1000.0,
        metavar="KG_M3",
        help="density of that water [kg m^-3] (default: %(default)g, common practice)",
    )
    invert.add_argument(
        "--csv", default=None, metavar="FILE", help="also write one line per row, SI units"
    )
    invert.set_defaults(run=_invert)

    table = commands.add_parser(
        "table",
        help="write a result file as one CSV row per case, headers 'quantity [unit]'",
        description="One row per case of a result file: the case's numbers (planet, exobase, "
        "ages, ...) and each species' numbers at the start or end of the run as "
        "'<name>_<species> [unit]' (with samples also the probability of keeping it and "
        "percentiles of the left fraction), SI units in the headers as in the file.",
    )
    table.add_argument("result", help="HDF5 file written by 'exosieve sweep'")
    table.add_argument("-o", "--output", required=True, metavar="CSV", help="CSV file to write")
    table.add_argument(
        "--species", type=_names, default=None, metavar="A,B,...", help="only these species"
    )
    table.add_argument(
        "--retain",
        type=float,
        default=None,
        metavar="FRACTION",
        help="kept = more than this fraction left [1] (default: the sweep's)",
    )
    table.set_defaults(run=_table)

    history = commands.add_parser(
        "history",
        help="draw one case's history across its species to PNG",
        description="Retained fraction of every species of one case against stellar age [Gyr] "
        "(log axes; dashed in the transition regime, dotted where hydrodynamic), depletion "
        "times marked, with the exobase temperature [K] below; with samples, bars for their "
        "spread of the left fraction at the end and of the depletion time.",
    )
    history.add_argument(
        "result", help="HDF5 file written by 'exosieve sweep', or by EvolutionResult.to_hdf5"
    )
    history.add_argument(
        "--case",
        default=None,
        help="case name, or its 0-based table row (default: the first; for an evolution "
        "file: the title)",
    )
    history.add_argument(
        "-o",
        "--output",
        default="exosieve-history.png",
        help="PNG file to write (default: %(default)s)",
    )
    history.add_argument(
        "--species", type=_names, default=None, metavar="A,B,...", help="only these species"
    )
    history.add_argument(
        "--dpi", type=int, default=120, help="resolution [dots per inch] (default: %(default)s)"
    )
    history.set_defaults(run=_history)

    demo = commands.add_parser(
        "demo",
        help="run the demo on the invented planet catalogue",
        description="Print the present-day Jeans parameters [1], fluxes [m^-2 s^-1] and escape "
        "rates [s^-1] of every species of the invented demo catalogue, evolve every case over "
        "its star's life with Monte Carlo samples over the stated uncertainties, write the "
        "comparison to HDF5 and the retention chart to PNG, and print the probability of "
        "keeping each gas.",
    )
    demo.add_argument(
        "--output",
        "-o",
        default="exosieve-demo.h5",
        help="HDF5 result file to write (default: %(default)s)",
    )
    demo.add_argument(
        "--chart",
        default="exosieve-demo.png",
        help="PNG retention chart to write (default: %(default)s)",
    )
    demo.add_argument("--no-chart", action="store_true", help="do not draw the chart")
    demo.add_argument(
        "--samples",
        type=int,
        default=100,
        help="Monte Carlo samples per case [1] (default: %(default)s; 0: nominal runs only)",
    )
    demo.add_argument(
        "--seed", type=int, default=0, help="seed of the Monte Carlo draws (default: %(default)s)"
    )
    demo.set_defaults(run=_demo)

    archive = commands.add_parser(
        "from-archive",
        help="turn an exoplanet archive's planetary-systems CSV into a case table",
        description="Read ARCHIVE (the planetary-systems layout: '#' comment lines, a header, "
        "pl_name, pl_bmasse, pl_rade, pl_orbsmax, st_mass, st_lum, st_age, pl_eqt with their "
        "err1/err2/lim columns) and write a case table of thermosphere rows: errors as "
        "split-normal widths, defaults for what archives do not carry (exobase temperature, "
        "homopause, composition by planet class, inventory; see the README). Prints every "
        "limited, dropped and defaulted row.",
    )
    archive.add_argument("archive", help="the archive's CSV file")
    archive.add_argument("-o", "--output", required=True, help="case-table CSV to write")
    archive.add_argument("--overwrite", action="store_true", help="replace OUTPUT if it exists")
    archive.add_argument(
        "--limits",
        choices=("drop", "bound"),
        default="drop",
        help="rows whose value is only a limit (lim = +-1): leave out, or keep with the limit "
        "as the value (default: %(default)s)",
    )
    archive.add_argument(
        "--radius-valley",
        type=float,
        default=1.7,
        metavar="R_EARTH",
        help="rocky below this radius, gas-rich at or above [R_earth] (default: %(default)s)",
    )
    archive.add_argument(
        "--temperature-factor",
        type=float,
        default=4.0,
        help="exobase temperature over the equilibrium temperature [1] (default: %(default)s)",
    )
    archive.add_argument(
        "--homopause-scale-heights",
        type=float,
        default=13.0,
        help="homopause altitude in scale heights k T_eq / (m g) [1] (default: %(default)s)",
    )
    archive.set_defaults(run=_from_archive)

    retention = commands.add_parser(
        "map",
        help="draw a retention map (radius or mass against instellation) to PNG",
        description="One panel per species: each case of RESULT placed by its planet radius "
        "[R_earth] (or mass [M_earth]) and its instellation [W m-2] from CASES (the case table "
        "the sweep ran), coloured by the probability of keeping the species [1].",
    )
    retention.add_argument("result", help="HDF5 file written by 'exosieve sweep'")
    retention.add_argument("cases", help="the case table the sweep ran")
    retention.add_argument(
        "-o", "--output", default="exosieve-map.png", help="PNG file (default: %(default)s)"
    )
    retention.add_argument(
        "--x", choices=("radius", "mass"), default="radius", help="horizontal axis"
    )
    retention.add_argument(
        "--species", type=_names, default=None, metavar="A,B,...", help="only these species"
    )
    retention.add_argument(
        "--retain",
        type=float,
        default=None,
        metavar="FRACTION",
        help="kept = more than this fraction left [1] (default: the sweep's)",
    )
    retention.add_argument(
        "--dpi", type=int, default=120, help="resolution [dots per inch] (default: %(default)s)"
    )
    retention.set_defaults(run=_map)
    return parser


def _silence_stdout() -> None:
    """Point standard output at /dev/null, so that the interpreter's final flush of what is
    still buffered finds no closed pipe to complain about."""
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
    except (OSError, ValueError):  # stdout is not a file (e.g. captured in-process)
        pass


def main(argv: list[str] | None = None) -> int:
    """Entry point of the ``exosieve`` command.

    Returns the exit status: 0 on success, 1 for a file error, 2 for bad input, 130 when a
    sweep was interrupted, and 141 (128 + SIGPIPE, as for a program the signal ended) when
    the reader of standard output went away, e.g. ``exosieve columns | head -1``; that case
    prints nothing more.
    """
    try:
        try:
            args = build_parser().parse_args(argv)
        except SystemExit:  # --help, --version and usage errors print before they exit
            sys.stdout.flush()
            raise
        try:
            status = int(args.run(args))
        except BrokenPipeError:
            raise
        except ValueError as err:
            print(f"exosieve: error: {err}", file=sys.stderr)
            status = 2
        except OSError as err:  # includes exosieve.FileError
            print(f"exosieve: error: {err}", file=sys.stderr)
            status = 1
        sys.stdout.flush()  # a closed pipe shows here, not at the interpreter's exit
        return status
    except BrokenPipeError:
        _silence_stdout()
        return 128 + int(signal.SIGPIPE)


if __name__ == "__main__":
    sys.exit(main())
