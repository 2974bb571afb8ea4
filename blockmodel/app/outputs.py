"""Writing outputs without ever losing the user's data or leaving a half-written file.

The rules, in the order they are applied before any work starts:

1. Leftovers of a killed run are recovered: a report folder that was set aside during a
   swap is put back when the report folder itself is missing; staging folders are removed
   only when they hold the tool's staging marker and their process is dead.
2. A report folder may never contain an input (project file, data tables, solids, the block
   model being read), nor be any folder above one; symbolic links are resolved first.
3. An existing report folder is replaced only when it is the tool's: its ``manifest.json``
   says it was written by ``blockmodel`` and lists every file in the folder.  An empty
   folder may be used.  Anything else stops the command with exit status 2, unless
   ``replace=True``, which writes the tool's files into the folder file by file and still
   never removes or overwrites a file the tool did not write.
4. A command writes into a staging folder beside the report folder; :meth:`OutputFolder.commit`
   writes the manifest (with the list of files) and swaps the staging folder in with two
   renames.  Single files go to a temporary name first, then are renamed.
"""

from __future__ import annotations

import errno
import hashlib
import json
import os
import shutil
import signal
import sys
import tempfile
from collections.abc import Iterable
from pathlib import Path

from blockmodel.errors import InputError, Problem

__all__ = [
    "MARKER",
    "OutputFolder",
    "atomic_path",
    "check_new_files",
    "disk_full",
    "file_hash",
    "is_tool_folder",
    "need_file",
    "watch_interrupts",
    "write_json",
]

MARKER = "blockmodel"  # value of "written_by" in the manifest of every folder the tool writes
_STAGING_MARK = ".blockmodel-staging"  # file inside a staging folder: the writing process id


def _fail(path: Path | str, message: str) -> InputError:
    return InputError([Problem(str(path), None, None, None, message)])


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


def _read_manifest(folder: Path) -> dict | None:
    try:
        data = json.loads((folder / "manifest.json").read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    return data if isinstance(data, dict) and data.get("written_by") == MARKER else None


def _listing(folder: Path) -> list[str]:
    """Every file and folder below ``folder``, as relative POSIX paths (folders end in /)."""
    out = []
    for root, dirs, files in os.walk(folder):
        rel = Path(root).relative_to(folder)
        out += [(rel / d).as_posix() + "/" for d in dirs]
        out += [(rel / f).as_posix() for f in files]
    return sorted(out)


def _foreign(folder: Path) -> list[str]:
    """Entries of ``folder`` that the tool's manifest there does not list as its own."""
    own = _own_files(folder)
    dirs = {p.as_posix() + "/" for f in own for p in Path(f).parents if p != Path(".")}
    return [f for f in _listing(folder) if f not in own and f not in dirs]


def _own_files(folder: Path) -> set[str]:
    """Files the tool's manifest in ``folder`` lists as written by it (empty: none)."""
    manifest = _read_manifest(folder)
    if manifest is None:
        return set()
    return {str(f) for f in manifest.get("files", [])} | {"manifest.json"}


def is_tool_folder(folder: Path) -> bool:
    """True when ``folder`` holds the tool's manifest and nothing the manifest does not list."""
    folder = Path(folder)
    return _read_manifest(folder) is not None and not _foreign(folder)


def _alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    return True


def _pid_of(name: str, kind: str) -> int | None:
    try:
        return int(name.rsplit(f".{kind}-", 1)[1].split("-")[0])
    except (IndexError, ValueError):
        return None


def _recover(target: Path) -> list[str]:
    """Undo what a killed run left beside ``target``; returns what was done, for the log."""
    done = []
    for aside in sorted(target.parent.glob(f".{target.name}.old-*")):
        pid = _pid_of(aside.name, "old")
        if pid is None or _alive(pid) or not aside.is_dir():
            continue
        if not target.exists():
            os.replace(aside, target)  # killed between the two renames: put the old one back
            done.append(f"restored {target} from {aside.name}")
        elif is_tool_folder(aside):
            shutil.rmtree(aside)  # killed after the swap: the set-aside report is the tool's
            done.append(f"removed the superseded report {aside.name}")
    for staged in target.parent.glob(f".{target.name}.partial-*"):
        pid = _pid_of(staged.name, "partial")
        mark = staged / _STAGING_MARK
        if pid is None or _alive(pid) or not staged.is_dir():
            continue
        try:
            owner = int(mark.read_text().strip())
        except (OSError, ValueError):
            continue  # not the tool's staging folder: leave it alone
        if owner == pid:
            shutil.rmtree(staged)
            done.append(f"removed the unfinished output {staged.name}")
    return done


def _check_not_over_inputs(target: Path, inputs: Iterable[Path], what: str) -> None:
    for p in inputs:
        p = Path(p).resolve()
        if p == target or p.is_relative_to(target):
            raise _fail(
                target,
                f"the {what} would hold an input file ({p}); write it to a folder that "
                "holds no project input, e.g. a new folder beside the data",
            )


def need_file(path: Path) -> None:
    """Stop with a clear message when an input file named on the command line is missing."""
    if not Path(path).is_file():
        raise _fail(path, "file not found")


def check_new_files(paths: Iterable[Path], *, own: Iterable[Path] = ()) -> None:
    """Stop before any work if one of ``paths`` exists and is not in ``own`` (files the
    tool wrote and may overwrite)."""
    own = {Path(p).resolve() for p in own}
    taken = [Path(p) for p in paths if Path(p).exists() and Path(p).resolve() not in own]
    if taken:
        raise InputError(
            [
                Problem(
                    str(p),
                    None,
                    None,
                    None,
                    "exists already; not overwritten (remove it or choose another place)",
                )
                for p in taken
            ]
        )


class OutputFolder:
    """A report folder written through a staging folder, under the rules of this module.

    Parameters
    ----------
    target : Path
        The report folder.
    inputs : iterable of Path
        Files the command reads; the report folder may not hold any of them.
    replace : bool
        Write into an existing folder that is not wholly the tool's, file by file, keeping
        every file the tool did not write.

    Use as a context manager: the staging folder is removed if the block raises.
    """

    def __init__(self, target: Path, inputs: Iterable[Path] = (), *, replace: bool = False):
        self.target = Path(target).resolve()
        self.replace = replace
        self.recovered = _recover(self.target) if self.target.parent.is_dir() else []
        for line in self.recovered:  # tell the user what a killed run left and what was done
            print(f"blockmodel: {line}", file=sys.stderr)
        _check_not_over_inputs(self.target, inputs, "report folder")
        self._merge = False
        if self.target.exists() or self.target.is_symlink():
            if not self.target.is_dir():
                raise _fail(
                    self.target,
                    "exists and is not a folder; choose a new folder name for the report",
                )
            foreign = _foreign(self.target)
            if foreign:
                if not replace:
                    shown = ", ".join(foreign[:5]) + (" ..." if len(foreign) > 5 else "")
                    raise _fail(
                        self.target,
                        f"the folder holds files blockmodel did not write ({shown}); choose a "
                        "new folder, or pass --replace to add the report to it (files "
                        "blockmodel did not write are never removed or overwritten)",
                    )
                self._merge = True
        try:
            self.target.parent.mkdir(parents=True, exist_ok=True)
            prefix = f".{self.target.name}.partial-{os.getpid()}-"
            self.path = Path(tempfile.mkdtemp(prefix=prefix, dir=self.target.parent))
            (self.path / _STAGING_MARK).write_text(str(os.getpid()))
            _set_normal_mode(self.path)
        except OSError as exc:
            raise _fail(
                self.target, f"cannot write the report folder here: {exc.strerror or exc}"
            ) from None

    def __enter__(self) -> OutputFolder:
        return self

    def __exit__(self, kind, value, tb) -> None:
        if kind is not None:
            self.discard()

    def commit(self, manifest: dict) -> None:
        """Write ``manifest.json`` (marker and file list added) and publish the folder."""
        if _interrupted:  # a Ctrl-C arrived during the run: never publish its output
            self.discard()
            raise KeyboardInterrupt
        (self.path / _STAGING_MARK).unlink()
        files = [f for f in _listing(self.path) if not f.endswith("/")]
        write_json(
            self.path / "manifest.json",
            {**manifest, "written_by": MARKER, "files": sorted(files)},
        )
        if self._merge:
            self._commit_into_existing(files)
            return
        aside = None
        if self.target.exists():
            if not is_tool_folder(self.target) and _listing(self.target):
                # something appeared in the folder during the run: do not touch it
                raise _fail(
                    self.target,
                    "files blockmodel did not write appeared in the report folder during the "
                    "run; nothing was replaced (run again with --replace to keep them)",
                )
            aside = self.target.with_name(f".{self.target.name}.old-{os.getpid()}")
            os.replace(self.target, aside)
        os.replace(self.path, self.target)
        if aside is not None:
            shutil.rmtree(aside, ignore_errors=True)

    def _commit_into_existing(self, files: list[str]) -> None:
        own = _own_files(self.target)
        clash = [f for f in files if (self.target / f).exists() and f not in own]
        if clash:
            self.discard()
            raise _fail(
                self.target,
                f"files blockmodel did not write stand where the report goes ({', '.join(clash[:5])}); "
                "nothing was replaced: choose a new folder",
            )
        for f in files:
            if f != "manifest.json":
                (self.target / f).parent.mkdir(parents=True, exist_ok=True)
                os.replace(self.path / f, self.target / f)
        for f in sorted(own - set(files) - {"manifest.json"}):
            try:
                (self.target / f).unlink()  # the tool's own file from an earlier run
            except FileNotFoundError:
                pass
        os.replace(self.path / "manifest.json", self.target / "manifest.json")
        shutil.rmtree(self.path, ignore_errors=True)

    def discard(self) -> None:
        """Remove the staging folder and everything the tool put in it."""
        shutil.rmtree(self.path, ignore_errors=True)


def _set_normal_mode(folder: Path) -> None:
    """mkdtemp makes folders private (0700); give the report the user's usual permissions."""
    mask = os.umask(0)
    os.umask(mask)
    os.chmod(folder, 0o777 & ~mask)


def atomic_path(path: Path) -> Path:
    """A temporary sibling of ``path`` with the same suffix (so writers pick the format)."""
    path = Path(path)
    return path.with_name(f".{path.stem}.partial-{os.getpid()}{path.suffix}")


def write_json(path: Path, data: dict) -> None:
    """Write ``data`` as JSON through a temporary name."""
    tmp = atomic_path(path)
    tmp.write_text(json.dumps(data, indent=2, sort_keys=True, default=str) + "\n", encoding="utf-8")
    os.replace(tmp, path)


def file_hash(path: Path) -> str:
    """SHA-256 of a file, hex."""
    h = hashlib.sha256()
    with open(path, "rb") as f:
        for block in iter(lambda: f.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def disk_full(exc: BaseException) -> bool:
    """Whether an exception is the operating system saying the disk or quota is full."""
    return isinstance(exc, OSError) and exc.errno in (errno.ENOSPC, errno.EDQUOT)
