"""The command line: parses arguments, calls the library, prints."""

from __future__ import annotations

import argparse
import sys
from collections.abc import Sequence

CAUTION = (
    "Results must be checked by a qualified engineer; local codes and licensed "
    "practice govern."
)


def build_parser() -> argparse.ArgumentParser:
    """The argument parser (subcommands are added as the tool grows)."""
    from spaceframe import __version__

    parser = argparse.ArgumentParser(
        prog="spaceframe",
        description="Analyse three-dimensional pin-jointed frames. " + CAUTION,
    )
    parser.add_argument("--version", action="version", version=f"spaceframe {__version__}")
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the `spaceframe` command; returns the exit code."""
    parser = build_parser()
    parser.parse_args(argv)
    parser.print_help(sys.stdout)
    return 0
