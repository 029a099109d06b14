"""Command-line front end (thin: parse, call the library, print or write).

``timescale methods``   list the available methods and their parameters
``timescale demo``      run the invented demo scenario through every method
"""

from __future__ import annotations

import argparse
import sys
import warnings
from pathlib import Path

__all__ = ["main", "build_parser"]


def _cmd_methods(args) -> int:
    from . import registry

    methods = registry.available_methods()
    if not methods:
        print("no methods are available (is timescale installed with its plugins?)")
        return 1
    sources = registry.method_sources()
    for name in methods:
        m = registry.get_method(name)
        print(f"{name}  —  {m.summary}")
        print(f"    from {sources.get(name, '?')}")
        for pname, default, units, doc in m.describe_params():
            unit = f" [{units}]" if units else ""
            print(f"    {pname} = {default!r}{unit}  {doc}")
        print()
    return 0


def _cmd_demo(args) -> int:
    from . import cube as cube_mod
    from .demo import DEMO_FACTORS, DEMO_SAMPLER_JITTER, DESCRIPTION, demo_pulses
    from .run import compare
    from .summary import cell_table

    out = Path(args.output)
    print(DESCRIPTION)
    print()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # cell warnings are recorded in the cube
        ds = compare(demo_pulses(), None, DEMO_FACTORS, seed=args.seed,
                     sampler_jitter=DEMO_SAMPLER_JITTER)
    ds.attrs["scenario"] = DESCRIPTION
    cube_mod.save_cube(ds, out)
    print(cell_table(ds))
    print()
    failed = int(ds.attrs["n_failed"])
    print(f"{ds.attrs['n_cells']} cells, {failed} failed, {ds.attrs['n_warned']} warned; cube written to {out}")
    if failed:
        for msg in sorted(set(str(m) for m in ds["message"].values.ravel()[ds["status"].values.ravel() == "failed"])):
            print(f"  failed: {msg}")
    if getattr(args, "report", None):
        from .report import write_report

        page = write_report(ds, args.report)
        print(f"report written to {page}")
    return 0


def build_parser() -> argparse.ArgumentParser:
    """The argument parser (exposed for documentation and tests)."""
    p = argparse.ArgumentParser(prog="timescale", description="Compare analog pulse time-scaling methods.")
    sub = p.add_subparsers(dest="command", required=True, metavar="COMMAND")
    s = sub.add_parser("methods", help="list available methods and their parameters")
    s.set_defaults(func=_cmd_methods)
    s = sub.add_parser("demo", help="run the invented demo scenario through every method")
    s.add_argument("-o", "--output", default="timescale-demo.nc", help="cube file to write (NetCDF)")
    s.add_argument("--seed", type=int, default=2026, help="root random seed")
    s.set_defaults(func=_cmd_demo)
    return p


def main(argv=None) -> int:
    """Run the command line; returns the exit status."""
    args = build_parser().parse_args(argv)
    try:
        return int(args.func(args) or 0)
    except (ValueError, TypeError, FileExistsError) as exc:
        print(f"timescale: error: {exc}", file=sys.stderr)
        return 2


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
