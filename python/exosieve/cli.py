"""The ``exosieve`` command: sweep a case table to HDF5, summarise and chart the result, list
the case-table columns, run the demo."""

from __future__ import annotations

import argparse
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


def _names(text: str) -> list[str]:
    return [part.strip() for part in text.split(",") if part.strip()]


def _sweep(args: argparse.Namespace) -> int:
    from . import constants as c
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
            t_start=args.start * c.MYR,
            t_end=args.end * c.GYR,
            times=args.times,
            samples=args.samples,
            seed=args.seed,
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
    """Name the cases whose bulk gas starts hydrodynamic without an energy-limited model."""
    import numpy as np

    flagged = np.nonzero(np.asarray(result["hydrodynamic_unmodelled"]) == 1)[0]
    if not len(flagged):
        return
    names, rows = result["case"], result["row"]
    lam = result["bulk_jeans_parameter_start"]
    print(
        f"{len(flagged)} case{'s start' if len(flagged) > 1 else ' starts'} with the bulk gas "
        "at or below the hydrodynamic threshold of the Jeans parameter and have no "
        "heating_efficiency: their loss is not Jeans escape and their retained fractions do "
        "not describe it"
    )
    for k in flagged[:limit]:
        print(
            f"  {names[k]} (row {rows[k]}): bulk Jeans parameter {float(lam[k]):.3g} at the start"
        )
    if len(flagged) > limit:
        print(f"  ... and {len(flagged) - limit} more (column hydrodynamic_unmodelled)")


def _summary(args: argparse.Namespace) -> int:
    from . import constants as c
    from .batch import check_ranges, open_comparison

    result = open_comparison(args.result)
    # Every stored variable is read (checksums) and range-checked, not only those summarised,
    # so that a damaged file is refused rather than summarised in part.
    check_ranges(Path(args.result), len(result), result.samples, len(result.species))
    frame = result.summarize(retain=args.retain, percentiles=args.percentiles)
    if args.species:
        frame = frame[frame["species"].isin(args.species) | (frame["species"] == "")]
    if args.csv:
        units = frame.attrs["units"]
        renamed = frame.rename(columns={k: f"{k} [{u}]" for k, u in units.items() if k in frame})
        renamed.to_csv(args.csv, index=False)
    shown = frame.drop(columns=["row", "error"]).copy()
    for name in ("depletion_time", "efolding_time"):
        shown[name] = shown[name] / c.GYR
    shown = shown.rename(
        columns={
            "final_retained_fraction": "left [1]",
            "depletion_time": "depleted [Gyr]",
            "efolding_time": "e-fold [Gyr]",
            "jeans_parameter_start": "lambda0 [1]",
            "jeans_parameter_end": "lambda1 [1]",
            "regime_start": "regime",
            "hydrodynamic_unmodelled": "hydro?",
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


def _chart(args: argparse.Namespace) -> int:
    try:
        import matplotlib
    except ImportError:
        print("exosieve: error: 'chart' needs matplotlib (pip install matplotlib)", file=sys.stderr)
        return 2

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from .batch import open_comparison
    from .plot import retention_chart

    result = open_comparison(args.result)
    fig = retention_chart(result, species=args.species, retain=args.retain)
    fig.savefig(args.output, dpi=args.dpi)
    plt.close(fig)
    print(f"wrote {Path(args.output).resolve()}")
    return 0


def _columns(args: argparse.Namespace) -> int:
    from .catalogue import UNITS, case_columns, case_table_template_path

    print(
        "Case-table columns (header 'quantity [unit]'; SI unit given, any unit measuring it "
        "is accepted):"
    )
    for name, unit, meaning, required, uncertain in case_columns():
        flags = ("required" if required else "optional") + (
            ", may have _sigma/_lnsigma" if uncertain else ""
        )
        print(f"  {name:28s} [{unit}]  {meaning} ({flags})")
    print(
        "  x_<species>                  [1]  bulk (well-mixed) mole fraction (0: absent), also "
        "the composition of a prescribed exobase; a row's fractions sum to 1 within 1e-3"
    )
    print("  inventory_<species>          [particles]  initial inventory of that species")
    print(
        "  case, star, density_scaling, diffusion_source, comment: text (case first; "
        "density_scaling is 'inventory' or 'fixed' (prescribed exobase); diffusion_source is "
        "'measured' or 'chapman_enskog' (thermosphere))"
    )
    print(
        "Upper atmosphere, one per row: a prescribed exobase (exobase_altitude, "
        "exobase_density) or a thermosphere (homopause_altitude, homopause_density; "
        "homopause_temperature and bates_shape for a Bates profile; diffusion_limited), whose "
        "exobase is found at every step."
    )
    by_unit: dict[str, list[str]] = {}
    for word, (_, si) in UNITS.items():
        by_unit.setdefault(si, []).append(word)
    print("Unit words: " + "; ".join(f"{si}: {', '.join(w)}" for si, w in by_unit.items()))
    print(f"Template: {case_table_template_path()}")
    return 0


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
        "--start",
        type=float,
        default=10.0,
        metavar="MYR",
        help="stellar age at the start [Myr] for rows without age_start (default: %(default)s)",
    )
    sweep.add_argument(
        "--end",
        type=float,
        default=4.5,
        metavar="GYR",
        help="stellar age at the end [Gyr] for rows without age_end or "
        "star_age (default: %(default)s)",
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
        "time N/Q at the start [Gyr], Jeans parameter at start and end [1], regime at the "
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

    columns = commands.add_parser(
        "columns",
        help="list the case-table columns, their units and the template",
        description="List every column a case table may have, with its SI unit, and the "
        "unit words accepted in headers.",
    )
    columns.set_defaults(run=_columns)

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
