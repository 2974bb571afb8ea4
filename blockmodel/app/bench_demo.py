"""The measurements of `blockmodel bench` on the demo: start-up, cold and warm runs, the
demo's variography and cross-validation, and its conditional simulation."""

from __future__ import annotations

import json
import os
import subprocess
import sys
import time

import numpy as np

from blockmodel.app.bench_cases import child_peak

__all__ = ["demo_run", "demo_stages", "help_seconds", "simulation_demo"]


def help_seconds() -> float:
    """Best of three wall-clock times of ``blockmodel --help`` in a fresh interpreter."""
    best = np.inf
    for _ in range(3):
        t = time.perf_counter()
        subprocess.run(
            [sys.executable, "-c", "from blockmodel.app.cli import main; main(['--help'])"],
            capture_output=True,
            check=False,
        )
        best = min(best, time.perf_counter() - t)
    return best


def demo_run(*, cold: bool) -> dict:
    """The demo's whole run (``blockmodel run`` on a fresh copy) in a child process;
    ``cold``: with an empty compiled-kernel cache, as after a fresh install."""
    import tempfile

    env = dict(os.environ)
    with tempfile.TemporaryDirectory() as top:
        if cold:
            env["NUMBA_CACHE_DIR"] = os.path.join(top, "cache")
        folder = os.path.join(top, "demo")
        code = (
            "import time; from pathlib import Path\n"
            "from blockmodel.demo.deposit import write_demo\n"
            "from blockmodel.app.cli import main\n"
            f"write_demo(Path({folder!r}))\n"
            "t = time.perf_counter()\n"
            f"main(['run', {os.path.join(folder, 'project.toml')!r}])\n"
            "res = {'seconds': time.perf_counter() - t}\n"
        )
        script = code + "import json\nprint(json.dumps(res))\n"
        out = subprocess.run(
            [sys.executable, "-c", script], capture_output=True, text=True, check=True, env=env
        )
    return json.loads(out.stdout.strip().splitlines()[-1])


def demo_stages() -> dict:
    """On the demo: seconds of the variography with the orientation found in 3D and the
    model fitted (no orientation or model given), and of leave-one-hole-out
    cross-validation of every domain (both warm: each run once first)."""
    import dataclasses
    import tempfile
    from pathlib import Path

    from blockmodel.assess.validation import cross_validate
    from blockmodel.config.project import load_project
    from blockmodel.demo.deposit import write_demo
    from blockmodel.estimation.engine import passes_from
    from blockmodel.stages.composites import load_and_composite
    from blockmodel.stages.declustering import decluster
    from blockmodel.stages.domain_model import build_domain_model
    from blockmodel.stages.variography import variography

    with tempfile.TemporaryDirectory() as top:
        write_demo(Path(top) / "demo")
        p = load_project(Path(top) / "demo" / "project.toml")
        free = dataclasses.replace(
            p, variogram={}, variography=dataclasses.replace(p.variography, orientation=None)
        )
        comps = load_and_composite(p)
        decl = decluster(p, comps.table, build_domain_model(p, comps.table))
        out = {}
        for _ in range(2):
            t = time.perf_counter()
            vario = variography(free, comps.table, decl.weights)
            out["variography_s"] = time.perf_counter() - t
        models = {k: v.model for k, v in vario.items()}
        for _ in range(2):
            t = time.perf_counter()
            for d in p.domains:
                own = comps.of_domain(d.name, p.grades[0])
                model = models[f"{d.name}.{p.grades[0]}"]
                cross_validate(
                    own[["x", "y", "z"]].to_numpy(float),
                    own[p.grades[0]].to_numpy(float),
                    own["hole"].to_numpy(),
                    model,
                    passes_from(p.passes_for(d.name), model.orientation),
                )
            out["cross_validation_s"] = time.perf_counter() - t
    return out


def simulation_demo(realisations: int, discretisation: tuple[int, int, int]) -> dict:
    """Conditional simulation of the demo lode (child process, for its peak memory):
    seconds of preparation and of the realisations, split into the plans of the model's
    later draws, unconditional fields, conditioning and back to blocks (the last three
    summed over threads)."""
    return child_peak(
        "import dataclasses, tempfile, time\nfrom pathlib import Path\n"
        "from blockmodel.demo.deposit import write_demo\n"
        "from blockmodel.config.project import load_project\n"
        "from blockmodel.stages.run import run_stages, simulate_results\n"
        "folder = Path(tempfile.mkdtemp()) / 'demo'\nwrite_demo(folder)\n"
        "p = load_project(folder / 'project.toml')\n"
        "lode = [dataclasses.replace(d, estimate=d.name == 'lode') for d in p.domains]\n"
        "p = dataclasses.replace(p, domains=tuple(lode))\n"
        f"p = dataclasses.replace(p, simulation=dataclasses.replace(p.simulation, "
        f"discretisation={tuple(discretisation)!r}))\n"
        "r = run_stages(p)\nt = time.perf_counter()\n"
        f"s = simulate_results(r, realisations={realisations}, workers=0)\n"
        "d = s.by_key['lode.au']\n"
        "res = {'seconds': time.perf_counter() - t, 'nodes': d.nodes, 'fft': d.fft_cells, "
        "'count': s.realisations, **d.timings}\n"
    )
