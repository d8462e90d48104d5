"""Regenerate the bundled kiln-energy regression demo data (fixed seed).

    python demo/make_kiln_energy_data.py            # writes src/whiten/demos/data/kiln_energy.csv
    python demo/make_kiln_energy_data.py --force    # replace the existing file

The scenario is invented; see whiten/demos/kiln_energy.py for what each column means.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from whiten.demos.kiln_energy import DATA_FILE, SEED, csv_text
from whiten.errors import InputError
from whiten.io.atomic import write_text

TARGET = Path(__file__).resolve().parents[1] / "src" / "whiten" / "demos" / "data"


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--out", type=Path, default=TARGET, help=f"folder (default {TARGET})")
    ap.add_argument("--seed", type=int, default=SEED)
    ap.add_argument("--force", action="store_true")
    args = ap.parse_args()
    try:
        write_text(args.out / DATA_FILE, csv_text(args.seed), force=args.force, what="data")
    except InputError as exc:
        sys.exit(f"make_kiln_energy_data: {exc}")
    print(f"wrote {args.out / DATA_FILE}")


if __name__ == "__main__":
    main()
