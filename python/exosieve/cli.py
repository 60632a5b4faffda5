"""The ``exosieve`` command."""

from __future__ import annotations

import argparse
import sys


def _demo(args: argparse.Namespace) -> int:
    from .demo import run_demo

    run_demo(args.output)
    return 0


def build_parser() -> argparse.ArgumentParser:
    """The argument parser of the ``exosieve`` command."""
    parser = argparse.ArgumentParser(
        prog="exosieve",
        description="Thermal (Jeans) escape of planetary atmospheres. SI units unless a "
        "column or option says otherwise.",
    )
    commands = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")
    demo = commands.add_parser(
        "demo",
        help="run the demo on the invented planet catalogue",
        description="Jeans parameters, fluxes [m^-2 s^-1] and escape rates [s^-1] for every "
        "species of the invented demo catalogue, printed and written to HDF5.",
    )
    demo.add_argument(
        "--output",
        "-o",
        default="exosieve-demo.h5",
        help="HDF5 file to write (default: %(default)s)",
    )
    demo.set_defaults(run=_demo)
    return parser


def main(argv: list[str] | None = None) -> int:
    """Entry point of the ``exosieve`` command."""
    args = build_parser().parse_args(argv)
    try:
        return int(args.run(args))
    except ValueError as err:
        print(f"exosieve: error: {err}", file=sys.stderr)
        return 2


if __name__ == "__main__":
    sys.exit(main())
