"""Helpers shared by the command modules."""

from __future__ import annotations

import json
import sys


def print_json(obj) -> None:
    """Print ``obj`` as indented JSON on stdout."""
    json.dump(obj, sys.stdout, indent=2, allow_nan=True, default=str)
    sys.stdout.write("\n")


def add_seed(parser, default=None):
    parser.add_argument("--seed", type=nonneg_int, default=default, metavar="S",
                        help="random seed (same seed, same result)")


def add_json(parser):
    parser.add_argument("--json", action="store_true", help="print machine-readable JSON")


def nonneg_int(text):
    import argparse

    try:
        v = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a whole number, got {text!r}") from None
    if v < 0:
        raise argparse.ArgumentTypeError(f"expected a non-negative number, got {v}")
    return v


def positive_int(text):
    import argparse

    v = nonneg_int(text)
    if v < 1:
        raise argparse.ArgumentTypeError(f"expected a positive number, got {v}")
    return v


def number(text):
    """A number or a fraction (``0.25``, ``1/3``) for argparse."""
    import argparse

    from ..couplings import parse_number
    from ..errors import InputError

    try:
        return parse_number(text, check=False)  # sizes are checked, with the option's name, by the API
    except InputError:
        raise argparse.ArgumentTypeError(f"expected a number or a fraction such as 1/3, got {text!r}") from None


def int_list(text):
    """'10,100,1000' -> [10, 100, 1000]."""
    import argparse

    try:
        vals = [int(x) for x in text.split(",") if x.strip()]
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected whole numbers separated by commas, got {text!r}") from None
    if not vals or min(vals) < 1:
        raise argparse.ArgumentTypeError(f"expected positive whole numbers, got {text!r}")
    return vals
