"""Command-line front end (thin: parse, call the library, print or write).

``timescale methods``   list the available methods and their parameters
``timescale demo``      run the invented demo scenario through every method
``timescale report``    write the comparison report (HTML page and figures) for a cube
``timescale plot``      draw one figure from a cube
``timescale run``       run a suite file into a results cube
``timescale show``      describe a results cube: dims, metrics, per-method summary
"""

from __future__ import annotations

import argparse
import sys
import warnings
from pathlib import Path

__all__ = ["main", "build_parser"]


def _cmd_methods(args) -> int:
    from timescale.contract import registry

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
    from timescale.contract.registry import available_methods
    from timescale.interface.demo import (
        DEMO_FACTORS,
        DEMO_SAMPLER_JITTER,
        DEMO_TRIALS,
        DESCRIPTION,
        demo_params,
        demo_pulses,
    )
    from timescale.interface.tables import cell_table
    from timescale.runner import cube as cube_mod
    from timescale.runner.compare import compare

    out = Path(args.output)
    folder = out.parent if str(out.parent) else Path(".")
    if not folder.is_dir():  # refuse before the run, not after it
        raise ValueError(f"folder {str(folder)!r} for --output does not exist")
    print(DESCRIPTION)
    print()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # cell warnings are recorded in the cube
        ds = compare(demo_pulses(), None, DEMO_FACTORS, seed=args.seed, trials=DEMO_TRIALS,
                     sampler_jitter=DEMO_SAMPLER_JITTER, **demo_params(available_methods()))
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
        from timescale.interface.report import write_report

        page = write_report(ds, args.report)
        print(f"report written to {page}")
    return 0


def _cmd_run(args) -> int:
    import signal

    from timescale.interface.tables import failure_table, method_table
    from timescale.runner.execute import run_suite
    from timescale.runner.suite import Suite

    suite = Suite.from_toml(args.suite)
    out = Path(args.output)

    def _terminate(signum, frame):  # SIGTERM: stop like Ctrl-C so the checkpoint is closed cleanly
        raise KeyboardInterrupt

    previous = signal.signal(signal.SIGTERM, _terminate)
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # cell warnings are recorded in the cube
            res = run_suite(suite, workers=args.workers, scheduler=args.scheduler, output=out,
                            resume=args.resume, overwrite=args.overwrite,
                            checkpoint=args.checkpoint,
                            progress=False if args.no_progress else None)
    except KeyboardInterrupt:
        ck = args.checkpoint or f"{out}.checkpoint"
        print(f"timescale: interrupted; finished cells are kept in {ck}; run again with --resume "
              "to continue", file=sys.stderr)
        return 130
    finally:
        signal.signal(signal.SIGTERM, previous)
    print(res.summary().splitlines()[0])
    print(method_table(res.cube))
    failures = failure_table(res.cube)
    if failures:
        print(failures)
    print(f"cube written to {out}")
    if res.waveforms is not None:
        print(f"waveforms written to {out.with_name(out.stem + '.waveforms' + (out.suffix or '.nc'))}")
    return 0


def _cmd_show(args) -> int:
    from timescale.interface.tables import cube_overview, failure_table, method_table
    from timescale.runner.cube import load_cube

    ds = load_cube(args.cube)
    a = ds.attrs
    print(f"{args.cube}: {a.get('suite_name', a.get('title', ''))}")
    if a.get("description"):
        print(a["description"])
    print(f"{a.get('n_cells', '?')} cells, {a.get('n_failed', '?')} failed, {a.get('n_warned', '?')} warned, "
          f"{a.get('n_not_applicable', 0)} not applicable")
    print(cube_overview(ds))
    print()
    print(method_table(ds))
    failures = failure_table(ds)
    if failures:
        print()
        print(failures)
    return 0


def _cmd_report(args) -> int:
    from timescale.interface.report import DEFAULT_TARGET, write_report
    from timescale.runner.cube import load_cube

    ds = load_cube(args.cube)
    target = args.target
    if target is None:
        if args.fidelity != "nrmse":
            raise ValueError(f"--target is needed with --fidelity {args.fidelity} (in its SI unit)")
        target = DEFAULT_TARGET
    page = write_report(ds, args.output, title=args.title, target=target, fidelity=args.fidelity)
    print(f"report written to {page}")
    return 0


def _parse_select(items) -> dict:
    out = {}
    for item in items:
        if "=" not in item:
            raise ValueError(f"--select {item!r} must look like DIM=VALUE, e.g. pulse=gaussian")
        dim, value = item.split("=", 1)
        try:
            out[dim.strip()] = float(value)
        except ValueError:
            out[dim.strip()] = value.strip()
    return out


def _cmd_plot(args) -> int:
    import matplotlib

    matplotlib.use("Agg")
    from timescale.interface import plot
    from timescale.runner.cube import load_cube

    ds = load_cube(args.cube)
    sel = _parse_select(args.select) or None
    if args.kind == "metric":
        d = plot.plot_metric(ds, args.metric, args.over, select=sel, methods=args.method,
                             others=args.others, target=args.target)
    elif args.kind == "tradeoff":
        d = plot.plot_tradeoff(ds, args.cost, args.fidelity, select=sel, methods=args.method,
                               target=args.target)
    elif args.kind == "map":
        d = plot.plot_map(ds, args.metric, args.x, args.y, select=sel, methods=args.method)
    else:
        from timescale.interface.report.rerun import _rerun

        outcomes, notes, _, _ = _rerun(ds, None, "nrmse", pulse=args.pulse, factor=args.factor)
        if args.method:
            outcomes = {k: v for k, v in outcomes.items() if k in args.method}
        if not outcomes:
            raise ValueError("nothing to draw: " + (" ".join(notes) or "no method could be re-run"))
        for n in notes:
            print(f"note: {n}", file=sys.stderr)
        d = (plot.plot_waveforms if args.kind == "waveforms" else plot.plot_spectra)(outcomes)
    out = Path(args.output)
    d.figure.savefig(out, dpi=args.dpi)
    import matplotlib.pyplot as plt

    plt.close(d.figure)
    print(f"figure written to {out}")
    return 0


def build_parser() -> argparse.ArgumentParser:
    """The argument parser (exposed for documentation and tests)."""
    p = argparse.ArgumentParser(prog="timescale", description="Compare analog pulse time-scaling methods.")
    p.add_argument("--threads", type=int, default=1, metavar="N",
                   help="BLAS/OpenMP threads for this process and each worker (default 1: workers side "
                        "by side would otherwise oversubscribe the cores; 0 leaves the libraries' own setting)")
    sub = p.add_subparsers(dest="command", required=True, metavar="COMMAND")
    s = sub.add_parser("methods", help="list available methods and their parameters")
    s.set_defaults(func=_cmd_methods)
    s = sub.add_parser("demo", help="run the invented demo scenario through every method")
    s.add_argument("-o", "--output", default="timescale-demo.nc", help="cube file to write (NetCDF)")
    s.add_argument("--seed", type=int, default=2026, help="root random seed")
    s.add_argument("--report", default=None, metavar="DIR", help="also write the comparison report into DIR")
    s.set_defaults(func=_cmd_demo)
    s = sub.add_parser("run", help="run a suite file (TOML) into a results cube")
    s.add_argument("suite", help="suite file (TOML)")
    s.add_argument("-o", "--output", required=True, help="cube file to write (NetCDF)")
    where = s.add_mutually_exclusive_group()
    where.add_argument("--workers", type=int, default=None, metavar="N", help="run on N local processes")
    where.add_argument("--scheduler", default=None, metavar="ADDRESS",
                       help="run on a Dask scheduler (needs timescale[dask])")
    s.add_argument("--resume", action="store_true", help="continue from the checkpoint of an interrupted run")
    s.add_argument("--overwrite", action="store_true", help="replace an existing output (and old checkpoint)")
    s.add_argument("--checkpoint", default=None, metavar="PATH", help="checkpoint file (default: OUTPUT.checkpoint)")
    s.add_argument("--no-progress", action="store_true", help="no progress bar")
    s.set_defaults(func=_cmd_run)
    s = sub.add_parser("show", help="describe a results cube: dims, metrics, per-method summary")
    s.add_argument("cube", help="cube file (NetCDF)")
    s.set_defaults(func=_cmd_show)
    s = sub.add_parser("report", help="write the comparison report (HTML page and figures) for a results cube")
    s.add_argument("cube", help="cube file (NetCDF)")
    s.add_argument("-o", "--output", required=True, metavar="DIR", help="folder to write the report into")
    s.add_argument("--title", default=None, help="page title")
    s.add_argument("--fidelity", default="nrmse", help="metric judged against the target (default nrmse)")
    s.add_argument("--target", type=float, default=None,
                   help="fidelity target in the metric's SI unit (default: NRMSE 0.1)")
    s.set_defaults(func=_cmd_report)
    s = sub.add_parser("plot", help="draw one figure from a results cube")
    s.add_argument("cube", help="cube file (NetCDF)")
    s.add_argument("kind", choices=("metric", "tradeoff", "map", "waveforms", "spectra"),
                   help="metric: a metric against a swept dim; tradeoff: cost against fidelity; "
                        "map: heat maps over two swept dims; waveforms / spectra: re-run one cell "
                        "(needs the input pulses: demo cubes only)")
    s.add_argument("-o", "--output", required=True, metavar="FILE", help="image file (.png, .svg, .pdf)")
    s.add_argument("--metric", default="nrmse", help="metric to draw (metric, map)")
    s.add_argument("--over", default="factor", help="dimension on the horizontal axis (metric)")
    s.add_argument("--cost", default="area", help="cost metric (tradeoff)")
    s.add_argument("--fidelity", default="nrmse", help="fidelity metric (tradeoff)")
    s.add_argument("--x", default="factor", help="horizontal dimension (map)")
    s.add_argument("--y", default=None, help="vertical dimension (map)")
    s.add_argument("--others", default="median", choices=("median", "best", "worst"),
                   help="how dims not on the axis are reduced (metric)")
    s.add_argument("--target", type=float, default=None, help="draw a target line (SI units)")
    s.add_argument("--select", action="append", default=[], metavar="DIM=VALUE",
                   help="fix a dimension, e.g. --select pulse=gaussian (repeatable)")
    s.add_argument("--method", action="append", default=None, metavar="NAME",
                   help="draw only this method (repeatable)")
    s.add_argument("--pulse", default=None, help="pulse to re-run (waveforms, spectra)")
    s.add_argument("--factor", type=float, default=None, help="factor to re-run (waveforms, spectra)")
    s.add_argument("--dpi", type=int, default=150, help="resolution of raster images")
    s.set_defaults(func=_cmd_plot)
    return p


def main(argv=None) -> int:
    """Run the command line; returns the exit status."""
    args = build_parser().parse_args(argv)
    from timescale.runner import threads

    before = threads.worker_threads()
    try:
        threads.set_worker_threads(args.threads)  # local workers and Dask tasks inherit it
        with threads.limited(args.threads):
            return int(args.func(args) or 0)
    except (ValueError, TypeError, FileExistsError, ImportError) as exc:
        print(f"timescale: error: {exc}", file=sys.stderr)
        return 2
    finally:
        threads.set_worker_threads(before)


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
