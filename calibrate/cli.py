"""The ``nullatlas-calibrate`` command: build null tables offline.

Table building arrives with the calibration engine; for now the command
describes itself.
"""
from __future__ import annotations

import argparse
import json
import sys


def build_parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(
        prog="nullatlas-calibrate",
        description="Offline stage of nullatlas: simulate CSR nulls over window shapes and "
        "point counts and store moments of normalised persistence summaries in HDF5 tables. "
        "No subcommands are available in this version; use 'nullatlas test --method mc'.")
    p.add_argument("--json", action="store_true", help="print what this version can do as JSON")
    return p


def main(argv=None) -> int:
    """Entry point of ``nullatlas-calibrate``."""
    a = build_parser().parse_args(argv)
    if a.json:
        json.dump({"commands": [], "schema_versions": []}, sys.stdout)
        sys.stdout.write("\n")
    else:
        build_parser().print_help()
    return 0


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
