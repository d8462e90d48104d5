"""``whiten demo``: run the bundled, invented scenarios end to end."""

from __future__ import annotations

import argparse
import importlib
from pathlib import Path
from types import ModuleType

from ..errors import InputError

# scenario name -> module in whiten.demos; listed in the order they run
SCENARIOS = {
    "cooling": "cooling",          # monitoring a cooling-water loop
    "calibration": "calibration",  # calibrating a temperature probe
    "kiln": "basic",               # the factor core on three thermocouples
    "kiln_energy": "kiln_energy",  # regression on near-collinear kiln columns
}

EPILOG = """\
examples:
  whiten demo --out demo-output             run every scenario
  whiten demo --out demo-output --only kiln run one scenario
  whiten demo --out demo-output --force     replace files from an earlier run

Each scenario writes its data, model, results and charts into the folder
and prints a short account of what it found. The data are invented.
"""


def _available() -> dict[str, ModuleType]:
    found = {}
    for name, mod in SCENARIOS.items():
        try:
            found[name] = importlib.import_module(f"whiten.demos.{mod}")
        except ModuleNotFoundError as exc:
            if exc.name != f"whiten.demos.{mod}":
                raise
    return found


def add_parser(sub) -> None:
    p = sub.add_parser(
        "demo", help="run the bundled scenarios on invented data",
        description="Run whiten's demo scenarios on bundled, invented data and explain the results.",
        epilog=EPILOG, formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("--out", required=True, metavar="DIR", help="folder for the outputs (created if missing)")
    p.add_argument("--only", metavar="NAME", help=f"run one scenario: {', '.join(SCENARIOS)}")
    p.add_argument("--force", action="store_true", help="replace output files that already exist")
    p.set_defaults(func=run)


def run(args) -> int:
    scenarios = _available()
    if args.only:
        if args.only not in scenarios:
            raise InputError(f"--only: unknown scenario {args.only!r}; choose from {sorted(scenarios)}")
        scenarios = {args.only: scenarios[args.only]}
    out = Path(args.out)
    if out.exists() and not out.is_dir():
        raise InputError(f"--out: {str(out)!r} exists and is not a folder")
    for name, mod in scenarios.items():
        target = out / name
        target.mkdir(parents=True, exist_ok=True)
        print(f"== {name} ==")
        for line in mod.run(target, force=args.force):
            print(line)
        print(f"(files in {target})")
        print()
    print("Caution: a statistical screen is not a protective function; alarms do not replace the plant's "
          "safety systems, and regulated calibration follows local codes and accredited practice.")
    return 0
