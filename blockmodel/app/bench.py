"""`blockmodel bench`: speed and memory figures, each measured side by side in one run
and printed beside its target with the ratio to it.

Figures are rates and ratios on this machine now; shared machines are noisy, so compare
figures from the same run only.  Targets: ``blockmodel --help`` under 0.5 s; under 15 s
compiling on a first run; the demo run under 25 s warm; orientation and fit on the demo
under 5 s; cross-validation under 3 s; a directional variogram of 100,000 composites 5x
faster than the 52 CPU-s it took before and 10x gstools' ``vario_estimate``; limits in the
search at most 1.5x the time without; block kriging 15 % of the float64 matrix-multiply
peak (flops counted in :func:`block_kriging_rate`); point kriging 100x pykrige's
moving-neighbourhood loop; 100 realisations of the demo lode in 10 minutes and 4 GB;
10,000,000 blocks in 60 s and 1 GB (``--scale``).
"""

from __future__ import annotations

import os

import numpy as np

from blockmodel.app.bench_cases import (
    backends_ratio,
    block_kriging_rate,
    gstools_variogram_ratio,
    matmul_peak,
    memory_million_blocks,
    point_kriging_versus_pykrige,
    scale_model,
    search_limits_ratio,
    variogram_memory,
)
from blockmodel.app.bench_demo import demo_run, demo_stages, help_seconds, simulation_demo

__all__ = ["main"]


def _line(name: str, value: float, unit: str, target: float, *, lower: bool = True) -> None:
    """One figure with its target and the ratio to it (met when lower, or higher, as
    the target asks)."""
    ratio = value / target if lower else target / value
    met = "met" if ratio <= 1.0 else "NOT met"
    sign = "<=" if lower else ">="
    print(f"  {name}: {value:,.2f} {unit} (target {sign} {target:,.2f}; ratio {ratio:.2f}, {met})")


def main(*, blocks: int = 200_000, quick: bool = False, scale: bool = False) -> None:
    """Print the benchmark figures, each beside its target."""
    from blockmodel.estimation._threads import threads

    print(f"machine: {os.cpu_count()} cores, kernel threads {threads()}, numpy {np.__version__}")
    peak = matmul_peak(1000 if quick else 2000)
    print(f"float64 matrix-multiply peak (numpy @): {peak:.1f} GFLOP/s")
    print("start-up and the whole demo")
    _line("blockmodel --help", help_seconds(), "s", 0.5)
    if not quick:
        cold, warm = demo_run(cold=True), demo_run(cold=False)
        _line(
            "compiling on the first run (cold run - warm run)",
            cold["seconds"] - warm["seconds"],
            "s",
            15.0,
        )
        _line("demo run, warm", warm["seconds"], "s", 25.0)
    stages = demo_stages()
    print("variography and validation on the demo")
    _line("orientation found in 3D and models fitted", stages["variography_s"], "s", 5.0)
    _line("leave-one-hole-out cross-validation", stages["cross_validation_s"], "s", 3.0)
    v = variogram_memory(10_000 if quick else 100_000)
    _line(
        f"directional variogram of {v['composites']:,} composites ({v['pairs']:,} pairs; "
        f"peak {v['peak_mb']:,.0f} MB)",
        v["seconds"],
        "s",
        52.0 / 5 * v["composites"] / 100_000,
    )
    g = gstools_variogram_ratio(5_000 if quick else 20_000)
    if g is not None:
        _line(
            f"gstools vario_estimate / ours, same data (pair counts equal: {g['same_pairs']})",
            g["ratio"],
            "x",
            10.0,
            lower=False,
        )
    print("search and kernels")
    lim = search_limits_ratio(20_000 if quick else 100_000)
    _line(
        "estimate with per-hole and octant limits / without",
        lim["limited"] / lim["plain"],
        "x",
        1.5,
    )
    r = block_kriging_rate(20_000 if quick else blocks)
    print(
        f"  block kriging, 10x10x5 m blocks, 4x4x2 points, 24 of 15,000 composites: {r['rate']:,.0f} blocks/s "
        f"({r['blocks']:,} blocks in {r['seconds']:.2f} s; search {r['search_s']:.2f} s, kriging "
        f"{r['kriging_s']:.2f} s); flops per block counted in block_kriging_rate"
    )
    _line("block kriging share of the peak", 100 * r["gflops"] / peak, "%", 15.0, lower=False)
    p = point_kriging_versus_pykrige()
    if p is None:
        print("  point kriging against pykrige: pykrige not installed")
    else:
        _line(
            f"point kriging / pykrige's loop ({p['ours_rate']:,.0f} against {p['pykrige_rate']:,.0f} "
            f"points/s; estimates agree to {p['max_relative_difference']:.1e})",
            p["ratio"],
            "x",
            100.0,
            lower=False,
        )
    if not quick:
        b = backends_ratio()
        print(
            f"  process pool start-up (first job: 64 one-block tasks): 1 worker "
            f"{b['processes_start_1']:.1f} s, 2 workers {b['processes_start_2']:.1f} s"
        )
        _line(
            "process pool, 2 workers / 1 (speed-up, after start-up)",
            b["processes_1"] / b["processes_2"],
            "x",
            1.6,
            lower=False,
        )
        if "dask_1" in b:
            _line(
                "dask LocalCluster, 2 workers / 1 (speed-up, after start-up)",
                b["dask_1"] / b["dask_2"],
                "x",
                1.6,
                lower=False,
            )
    m = memory_million_blocks(100_000 if quick else 1_000_000)
    print(
        f"  peak memory estimating {m['blocks']:,} blocks (chunks of 50,000, one process): "
        f"{m['peak_mb']:,.0f} MB in {m['seconds']:.1f} s"
    )
    print("conditional simulation (demo lode)")
    sims = [(25, (4, 4, 2)), (100, (4, 4, 2)), (100, (2, 2, 1))]
    for n, disc in sims[:1] if quick else sims:
        s = simulation_demo(n, disc)
        _line(
            f"{s['count']} realisations, {'x'.join(map(str, disc))} nodes per block "
            f"({s['nodes']:,} nodes, FFT grid {s['fft']:,}; peak {s['peak_mb']:,.0f} MB of "
            f"4,096; preparation {s['preparation']:.1f} s, plans of the other model draws "
            f"{s.get('model draws', 0):.1f} s; CPU-s unconditional "
            f"{s.get('unconditional', 0):.1f}, conditioning {s.get('conditioning', 0):.1f}, "
            f"back to blocks {s.get('to_blocks', 0):.1f})",
            s["seconds"],
            "s",
            600.0 * s["count"] / 100,
        )
    if scale:
        import tempfile

        with tempfile.TemporaryDirectory() as folder:
            s = scale_model(10_000_000, folder)
        print(
            f"scale: {s['blocks']:,} blocks ({s['estimated']:,} estimated from 100,000 composites); search "
            f"{s['search_s']:.0f} s, kriging {s['kriging_s']:.0f} s, Parquet writing {s['io_s']:.1f} s "
            f"({s['file_mb']:.0f} MB)"
        )
        _line("10,000,000 blocks", s["seconds"], "s", 60.0)
        _line("10,000,000 blocks, peak memory", s["peak_mb"], "MB", 1024.0)
