"""Regenerate the bundled cooling-loop demo data (fixed seed).

    python demo/make_cooling_data.py            # writes src/whiten/demos/data/cooling_*.csv
    python demo/make_cooling_data.py --force    # replace existing files

The scenario is invented; see whiten/demos/cooling.py for what each sensor
and each episode of the test period means.
"""

from __future__ import annotations

import argparse
from pathlib import Path

from whiten.demos.cooling import SEED, write_data

TARGET = Path(__file__).resolve().parents[1] / "src" / "whiten" / "demos" / "data"


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--out", type=Path, default=TARGET, help=f"folder (default {TARGET})")
    ap.add_argument("--seed", type=int, default=SEED)
    ap.add_argument("--force", action="store_true")
    args = ap.parse_args()
    for p in write_data(args.out, force=args.force, seed=args.seed):
        print(p)


if __name__ == "__main__":
    main()
