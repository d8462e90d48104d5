"""Benchmarks: whiten against its peers, measured side by side in one run.

Usage::

    python benchmarks/run.py            # full sizes (several minutes)
    python benchmarks/run.py --quick    # small sizes (under a minute)
    python benchmarks/run.py --only gaussian,regression --markdown

Every figure is the smallest wall-clock time of a few runs on the machine it
runs on; the headline comparisons (logpdf, baseline fit, OLS, the p=2000
log-likelihood) alternate whiten and its peer run by run, so both see the same
machine conditions. Ratios are peer time / whiten time (above 1 means whiten
is faster). Not a test: nothing here asserts a speed.
"""

from __future__ import annotations

import argparse
import importlib
import os
import platform
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
AREAS = ["gaussian", "baseline", "monitor", "regression", "likelihood", "scaling", "streaming"]


def machine() -> str:
    import numpy as np
    import scipy

    try:
        cpus = len(os.sched_getaffinity(0))
    except AttributeError:  # pragma: no cover
        cpus = os.cpu_count()
    return (f"{platform.machine()}, {cpus} cores, Python {platform.python_version()}, "
            f"numpy {np.__version__}, scipy {scipy.__version__}")


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--quick", action="store_true", help="small sizes for a smoke run")
    ap.add_argument("--only", help=f"comma-separated areas among {', '.join(AREAS)}")
    ap.add_argument("--markdown", action="store_true", help="print a Markdown table")
    args = ap.parse_args(argv)
    sys.path.insert(0, str(HERE))
    areas = AREAS if not args.only else [a.strip() for a in args.only.split(",")]
    rows = []
    scale_rows = []
    for area in areas:
        try:
            mod = importlib.import_module(f"bench_{area}")
        except ModuleNotFoundError as exc:
            if exc.name == f"bench_{area}":
                print(f"(no benchmarks for {area} yet)", file=sys.stderr)
                continue
            raise
        t0 = time.perf_counter()
        for r in mod.run(quick=args.quick):
            rows.append({"area": area, **r})
        if hasattr(mod, "scaling"):
            scale_rows.extend(mod.scaling(quick=args.quick))
        print(f"[{area}: {time.perf_counter() - t0:.1f} s]", file=sys.stderr)
    print(f"machine: {machine()}")
    print(f"command: python benchmarks/run.py {' '.join(argv if argv is not None else sys.argv[1:])}".rstrip())
    head = ["area", "case", "whiten s", "peer", "peer s", "ratio", "note"]
    table = []
    for r in rows:
        ratio = r["peer_s"] / r["ours_s"] if r.get("peer_s") and r.get("ours_s") else float("nan")
        table.append([r["area"], r["case"], f"{r['ours_s']:.4g}", r.get("peer", ""),
                      "" if r.get("peer_s") is None else f"{r['peer_s']:.4g}",
                      "" if ratio != ratio else f"{ratio:.2f}x", r.get("note", "")])
    _print_table(head, table, args.markdown)
    if scale_rows:
        print()
        print("scaling of scoring (Gaussian.logpdf with the factor built once): time vs the N p^2 flop model")
        sh = ["sweep", "N", "p", "seconds", "N p^2", "ns per N p^2"]
        st = [[r["sweep"], str(r["n"]), str(r["p"]), f"{r['seconds']:.4g}", f"{r['model_flops']:.3g}",
               f"{r['ns_per_model_flop']:.3f}"] for r in scale_rows]
        _print_table(sh, st, args.markdown)
    return 0


def _print_table(head, table, markdown):
    if markdown:
        print("| " + " | ".join(head) + " |")
        print("|" + "---|" * len(head))
        for t in table:
            print("| " + " | ".join(t) + " |")
        return
    widths = [max(len(h), *(len(t[i]) for t in table)) if table else len(h) for i, h in enumerate(head)]
    print("  ".join(h.ljust(w) for h, w in zip(head, widths)))
    for t in table:
        print("  ".join(c.ljust(w) for c, w in zip(t, widths)))


if __name__ == "__main__":
    sys.exit(main())
