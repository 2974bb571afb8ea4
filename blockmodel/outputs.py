"""Writing outputs without ever leaving a half-written file under a final name.

A run writes into a staging folder beside the report folder and swaps it into place only
when everything is written; single files go to a temporary name, then are renamed.
"""

from __future__ import annotations

import hashlib
import json
import os
import shutil
import signal
import tempfile
from pathlib import Path

from .errors import InputError, Problem

__all__ = [
    "StagedFolder",
    "atomic_path",
    "check_writable",
    "file_hash",
    "watch_interrupts",
    "write_json",
]


def check_writable(folder: Path) -> None:
    """Fail before any work when the report folder cannot be created or written."""
    folder = Path(folder)
    parent = folder if folder.exists() else folder.parent
    while not parent.exists() and parent != parent.parent:
        parent = parent.parent
    try:
        folder.parent.mkdir(parents=True, exist_ok=True)
        with tempfile.NamedTemporaryFile(dir=folder.parent, prefix=".write-check-"):
            pass
    except OSError as exc:
        raise InputError(
            [
                Problem(
                    str(folder),
                    None,
                    None,
                    None,
                    f"cannot write the report folder here: {exc.strerror or exc}",
                )
            ]
        ) from None
    if folder.exists() and not os.access(folder, os.W_OK):
        raise InputError([Problem(str(folder), None, None, None, "the report folder is read-only")])


_interrupted = False


def _on_interrupt(signum, frame) -> None:
    """SIGINT: remember it, then raise KeyboardInterrupt as Python does by default."""
    global _interrupted
    _interrupted = True
    signal.default_int_handler(signum, frame)


def watch_interrupts() -> None:
    """Remember any Ctrl-C (SIGINT), so that no staged folder is committed after one even if
    a library swallowed the KeyboardInterrupt it raised. Call from the main thread."""
    try:
        signal.signal(signal.SIGINT, _on_interrupt)
    except ValueError:  # not the main thread: leave signals alone
        pass


class StagedFolder:
    """Write into ``.NAME.partial-PID`` beside ``target``; :meth:`commit` swaps it in."""

    def __init__(self, target: Path):
        self.target = Path(target).resolve()
        self.target.parent.mkdir(parents=True, exist_ok=True)
        self._remove_stale()
        prefix = f".{self.target.name}.partial-{os.getpid()}-"
        self.path = Path(tempfile.mkdtemp(prefix=prefix, dir=self.target.parent))

    def _remove_stale(self) -> None:
        """Remove staging folders left by runs that were killed (their process is gone)."""
        for kind in ("partial", "old"):
            for folder in self.target.parent.glob(f".{self.target.name}.{kind}-*"):
                try:
                    pid = int(folder.name.rsplit(f".{kind}-", 1)[1].split("-")[0])
                except ValueError:
                    continue
                if pid != os.getpid() and not _alive(pid):
                    shutil.rmtree(folder, ignore_errors=True)

    def commit(self) -> None:
        if _interrupted:  # a Ctrl-C arrived during the run: never publish its output
            self.discard()
            raise KeyboardInterrupt
        old = None
        if self.target.exists():
            old = self.target.with_name(f".{self.target.name}.old-{os.getpid()}")
            os.replace(self.target, old)
        os.replace(self.path, self.target)
        if old is not None:
            shutil.rmtree(old, ignore_errors=True)

    def discard(self) -> None:
        shutil.rmtree(self.path, ignore_errors=True)


def _alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    return True


def atomic_path(path: Path) -> Path:
    """A temporary sibling of ``path`` with the same suffix (so writers pick the format)."""
    path = Path(path)
    return path.with_name(f".{path.stem}.partial-{os.getpid()}{path.suffix}")


def write_json(path: Path, data: dict) -> None:
    tmp = atomic_path(path)
    tmp.write_text(json.dumps(data, indent=2, sort_keys=True, default=str) + "\n", encoding="utf-8")
    os.replace(tmp, path)


def file_hash(path: Path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as f:
        for block in iter(lambda: f.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()
