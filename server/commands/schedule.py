"""`probewise schedule`: not written yet."""

import argparse


def add_arguments(parser: argparse.ArgumentParser) -> None:
    pass


def run(args: argparse.Namespace) -> int:
    raise SystemExit("probewise: this command is not available yet")
