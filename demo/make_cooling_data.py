"""Regenerate the bundled cooling-loop demo data (fixed seed).

    python demo/make_cooling_data.py            # writes src/whiten/demos/data/cooling_*.csv
    python demo/make_cooling_data.py --force    # replace existing files

The scenario is invented; see whiten/demos/cooling.py for what each sensor
and each episode of the test period means.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from whiten.demos.cooling import SEED, write_data
from whiten.errors import InputError

TARGET = Path(__file__).resolve().parents[1] / "src" / "whiten" / "demos" / "data"


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--out", type=Path, default=TARGET, help=f"folder (default {TARGET})")
    ap.add_argument("--seed", type=int, default=SEED)
    ap.add_argument("--force", action="store_true")
    args = ap.parse_args()
    try:
        written = write_data(args.out, force=args.force, seed=args.seed)
    except InputError as exc:
        print(f"make_cooling_data: error: {exc}", file=sys.stderr)
        sys.exit(1)
    for p in written:
        print(p)


if __name__ == "__main__":
    main()
