"""The ``blockmodel`` command: parses the arguments, calls the command's function in
:mod:`blockmodel.app.commands`, and reports errors.

Input errors print one clear message and exit with status 2, without a traceback.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from blockmodel.errors import InputError, Problem

__all__ = ["main"]


_REPLACE = (
    "write into an existing folder that holds other files; files blockmodel did not write "
    "are never removed or overwritten"
)


def _parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(
        prog="blockmodel",
        description="Drillholes to a block model of estimated grades, "
        "validated, classified and reported above cut-offs.",
    )
    sub = p.add_subparsers(dest="command", required=True, metavar="COMMAND")

    c = sub.add_parser(
        "check", help="check a project and its data without estimating; print a data summary"
    )
    c.add_argument("project", type=Path, help="project file (TOML)")

    r = sub.add_parser(
        "run", help="the whole chain: composites to block model, validation and report"
    )
    r.add_argument("project", type=Path, help="project file (TOML)")
    r.add_argument("--out", type=Path, help="report folder (default: the project's report.folder)")
    r.add_argument(
        "--backend", choices=("serial", "processes", "dask"), help="where chunks of blocks run"
    )
    r.add_argument("--workers", type=int, help="local processes (0 = all cores)")
    r.add_argument(
        "--cluster", help="address of a running dask.distributed scheduler (implies --backend dask)"
    )
    r.add_argument(
        "--chunk-size", type=int, help="blocks per chunk (memory bound; results do not change)"
    )
    r.add_argument("--csv", action="store_true", help="also write the block model as CSV")
    r.add_argument("--replace", action="store_true", help=_REPLACE)

    v = sub.add_parser(
        "variography", help="declustering and variography alone: plots, table, fitted models"
    )
    v.add_argument("project", type=Path)
    v.add_argument("--out", type=Path, help="output folder (default: beside the report folder)")
    v.add_argument("--replace", action="store_true", help=_REPLACE)

    n = sub.add_parser(
        "neighbourhood",
        help="kriging neighbourhood analysis: test blocks under sweeps of search and block size",
    )
    n.add_argument("project", type=Path)
    n.add_argument(
        "--blocks",
        nargs="+",
        metavar="X,Y,Z",
        default=[],
        help="extra test blocks: the blocks holding these points (metres)",
    )
    n.add_argument("--out", type=Path, help="output folder (default: beside the report folder)")
    n.add_argument("--replace", action="store_true", help=_REPLACE)

    s = sub.add_parser(
        "simulate",
        help="conditional simulation of grades: per-block uncertainty and grade-tonnage bands",
    )
    s.add_argument("project", type=Path)
    s.add_argument("--realisations", type=int, help="realisations per domain and grade")
    s.add_argument("--seed", type=int, help="seed (each realisation reproducible alone)")
    s.add_argument("--workers", type=int, help="threads on this machine (0 = all cores)")
    s.add_argument("--cluster", help="address of a running dask.distributed scheduler")
    s.add_argument("--out", type=Path, help="output folder (default: beside the report folder)")
    s.add_argument("--replace", action="store_true", help=_REPLACE)

    a = sub.add_parser(
        "report", help="re-report an existing block model at new cut-offs or class rules"
    )
    a.add_argument("project", type=Path)
    a.add_argument("block_model", type=Path, help="block_model.parquet from a run")
    a.add_argument("--out", type=Path, required=True, help="folder for the new report")
    a.add_argument("--cutoffs", type=float, nargs="+", help="cut-off grades (increasing)")
    a.add_argument(
        "--reclassify", action="store_true", help="apply the project's classification rules again"
    )
    a.add_argument("--replace", action="store_true", help=_REPLACE)

    x = sub.add_parser(
        "export", help="write the holes, composites, solids and block model as an OMF file"
    )
    x.add_argument("project", type=Path)
    x.add_argument("block_model", type=Path, help="block_model.parquet from a run")
    x.add_argument("--omf", type=Path, required=True, help="the Open Mining Format file to write")

    w = sub.add_parser(
        "view", help="render a view of a block model to PNG, or open it interactively"
    )
    w.add_argument("project", type=Path)
    w.add_argument("block_model", type=Path)
    w.add_argument("--field", default=None, help="column to colour by (default: first grade)")
    w.add_argument("--kind", choices=("slices", "cutoff", "plan", "section"), default="slices")
    w.add_argument("--x", type=float, help="slice or section point: easting")
    w.add_argument("--y", type=float, help="slice or section point: northing")
    w.add_argument("--z", type=float, help="slice position or plan elevation")
    w.add_argument("--cutoff", type=float, help="with --kind cutoff: show blocks at or above it")
    w.add_argument("--azimuth", type=float, default=90.0, help="section azimuth (degrees)")
    w.add_argument("--width", type=float, default=20.0, help="section width (m)")
    w.add_argument("--png", type=Path, help="write PNG here; without it a window opens")

    b = sub.add_parser("bench", help="speed and memory benchmark, figures measured side by side")
    b.add_argument("--blocks", type=int, default=200_000, help="blocks to estimate")
    b.add_argument("--quick", action="store_true", help="smaller sizes for a fast look")
    b.add_argument(
        "--scale", action="store_true", help="also estimate a 10,000,000-block model (minutes)"
    )

    d = sub.add_parser(
        "make-demo", help="write the invented demo deposit's data files (never overwrites a file)"
    )
    d.add_argument("folder", type=Path)
    return p


def _check_cutoffs(cut: list[float] | None) -> None:
    if cut is not None and (
        any(c < 0 for c in cut) or any(b <= a for a, b in zip(cut, cut[1:], strict=False))
    ):
        raise InputError(
            [
                Problem(
                    "command line",
                    None,
                    None,
                    "--cutoffs",
                    f"cut-offs must be zero or more and strictly increasing; got {cut}",
                )
            ]
        )


def _check_counts(args) -> None:
    """The simulation's counts from the command line: realisations >= 2, seed and
    workers >= 0."""
    for name, low in (("realisations", 2), ("seed", 0), ("workers", 0)):
        value = getattr(args, name)
        if value is not None and value < low:
            raise InputError(
                [Problem("command line", None, None, f"--{name}", f"must be {low} or more")]
            )


def _points(texts: list[str]) -> list[tuple[float, float, float]]:
    """``X,Y,Z`` texts as points; one clear message for a malformed one."""
    out = []
    for text in texts:
        parts = text.split(",")
        try:
            point = tuple(float(p) for p in parts)
        except ValueError:
            point = ()
        if len(point) != 3 or not all(abs(v) < 1e12 for v in point):
            raise InputError(
                [
                    Problem(
                        "command line",
                        None,
                        None,
                        "--blocks",
                        f"{text!r} is not a point X,Y,Z in metres (three numbers, commas, "
                        "no spaces)",
                    )
                ]
            )
        out.append(point)
    return out


def _dispatch(args) -> None:
    """Call the command's function with the parsed arguments; print where it wrote."""
    if args.command == "bench":
        from blockmodel.app.bench import main as bench

        bench(blocks=args.blocks, quick=args.quick, scale=args.scale)
        return
    from blockmodel.app import commands

    if args.command == "make-demo":
        commands.make_demo(args.folder)
        return
    from blockmodel.config.project import load_project

    project = load_project(args.project)
    if args.command == "check":
        print(commands.check(project))
    elif args.command == "view":
        from blockmodel.app.view_and_export import view

        view(
            project,
            args.block_model,
            kind=args.kind,
            field=args.field,
            point=(args.x, args.y, args.z),
            azimuth=args.azimuth,
            width=args.width,
            cutoff=args.cutoff,
            png=args.png,
        )
    elif args.command == "run":
        from blockmodel.stages.run import EngineOptions

        engine = EngineOptions(
            backend="dask" if args.cluster else args.backend,
            workers=args.workers,
            chunk_size=args.chunk_size,
            cluster=args.cluster,
        )
        out = commands.run(
            project, args.out, engine=engine, write_csv=args.csv or None, replace=args.replace
        )
        print(f"report written to {out}")
    elif args.command == "simulate":
        _check_counts(args)
        out = commands.simulate(
            project,
            args.out,
            realisations=args.realisations,
            seed=args.seed,
            workers=args.workers,
            cluster=args.cluster or "",
            replace=args.replace,
        )
        print(f"simulation written to {out}")
    elif args.command == "neighbourhood":
        out = commands.neighbourhood(
            project, args.out, blocks=_points(args.blocks), replace=args.replace
        )
        print(f"neighbourhood analysis written to {out}")
    elif args.command == "export":
        from blockmodel.app.view_and_export import export

        out = export(project, args.block_model, args.omf)
        print(f"Open Mining Format file written to {out}")
    elif args.command == "variography":
        out = commands.run_variography(project, args.out, replace=args.replace)
        print(f"variography written to {out}")
    elif args.command == "report":
        _check_cutoffs(args.cutoffs)
        out = commands.report_again(
            project,
            args.block_model,
            args.out,
            cutoffs=args.cutoffs,
            reclassify=args.reclassify,
            replace=args.replace,
        )
        print(f"report written to {out}")


def main(argv: list[str] | None = None) -> int:
    """Run the command line with ``argv`` (default: the process's); returns the exit status (0 done, 2 bad input or full disk, 130 interrupted)."""
    args = _parser().parse_args(argv)
    from blockmodel.app.outputs import watch_interrupts

    watch_interrupts()
    try:
        _dispatch(args)
    except InputError as exc:
        print(f"blockmodel: {exc.table()}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("blockmodel: interrupted; the previous report folder is unchanged", file=sys.stderr)
        return 130
    except OSError as exc:
        from blockmodel.app.outputs import disk_full

        if not disk_full(exc):
            raise
        print(
            f"blockmodel: the disk is full ({exc.filename or 'while writing'}); nothing was "
            "published and the previous report folder is unchanged",
            file=sys.stderr,
        )
        return 2
    finally:
        if "matplotlib.pyplot" in sys.modules:  # a stage stopped mid-figure: free it
            sys.modules["matplotlib.pyplot"].close("all")
    return 0


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
