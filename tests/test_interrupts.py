"""A run interrupted mid-way (SIGINT or SIGKILL) leaves the previous report intact and no
partial file under a final name; a rerun completes."""

import hashlib
import os
import signal
import subprocess
import sys
import time

import pytest

from .conftest import DEMO


def _hashes(folder):
    return {p.name: hashlib.sha256(p.read_bytes()).hexdigest() for p in sorted(folder.iterdir())}


def _start(out):
    return subprocess.Popen(
        [sys.executable, "-m", "blockmodel", "run", str(DEMO / "project.toml"), "--out", str(out)],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
        start_new_session=True,
    )


def _wait_for_staging(parent, name, proc, seconds=60):
    end = time.time() + seconds
    while time.time() < end:
        staged = list(parent.glob(f".{name}.partial-*"))
        if staged and any(staged[0].iterdir()):  # past the first stage: composites written
            return staged[0]
        assert proc.poll() is None, proc.communicate()
        time.sleep(0.05)
    raise AssertionError("the run never started writing")


def _whole_run(out):
    subprocess.run(
        [sys.executable, "-m", "blockmodel", "run", str(DEMO / "project.toml"), "--out", str(out)],
        check=True,
        capture_output=True,
    )


@pytest.fixture(scope="module")
def previous(tmp_path_factory):
    out = tmp_path_factory.mktemp("interrupts") / "report"
    _whole_run(out)
    return out


@pytest.fixture(scope="module")
def run_seconds(previous):
    """Seconds of a whole run once the compiled code is cached (the first run may have
    compiled it), which the kill times are fractions of."""
    start = time.perf_counter()
    _whole_run(previous)
    return time.perf_counter() - start


@pytest.mark.parametrize("sig", [signal.SIGINT, signal.SIGKILL], ids=["SIGINT", "SIGKILL"])
def test_interrupted_run_keeps_previous_report(previous, sig):
    """SIGINT: the run cleans up and exits 130; SIGKILL: it leaves its staging folder, which
    a rerun clears while it completes."""
    before = _hashes(previous)
    proc = _start(previous)
    staging = _wait_for_staging(previous.parent, previous.name, proc)
    time.sleep(1.0)
    if sig == signal.SIGINT:
        os.killpg(proc.pid, signal.SIGINT)  # as Ctrl-C on a terminal: the whole group
    else:
        proc.kill()
    _, err = proc.communicate(timeout=60)
    assert _hashes(previous) == before
    if sig == signal.SIGINT:
        assert proc.returncode == 130 and "Traceback" not in err
        assert not staging.exists()  # cleaned up on the way out
        return
    assert proc.returncode == -signal.SIGKILL
    # a rerun completes, replaces the report and clears what the killed run left behind
    done = subprocess.run(
        [
            sys.executable,
            "-m",
            "blockmodel",
            "run",
            str(DEMO / "project.toml"),
            "--out",
            str(previous),
        ],
        capture_output=True,
        text=True,
        timeout=300,
    )
    assert done.returncode == 0, done.stderr
    assert not list(previous.parent.glob(f".{previous.name}.*"))
    assert _hashes(previous)["block_model.parquet"] == before["block_model.parquet"]


@pytest.mark.slow
@pytest.mark.parametrize("fraction", [0.03, 0.15, 0.3, 0.5, 0.7, 0.85])
def test_kill_at_every_stage_keeps_previous_report(previous, run_seconds, fraction):
    """SIGKILL at fractions of a whole run's time after its first stage is written, which
    fall in compositing, variography, kriging, validation, views and writing."""
    before = _hashes(previous)
    start = time.perf_counter()
    proc = _start(previous)
    _wait_for_staging(previous.parent, previous.name, proc)
    time.sleep(max(fraction * run_seconds - (time.perf_counter() - start), 0.1))
    assert proc.poll() is None, "the run ended before the kill: shorten the delay"
    proc.kill()
    proc.communicate(timeout=60)
    assert _hashes(previous) == before
