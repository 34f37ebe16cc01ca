"""Writing output files atomically: one file, or a command's whole set of files.

:func:`atomic_paths` writes single files: a temporary file beside each target, renamed over
it when complete. :func:`output_set` writes a set of files (a map's plots and tables, an
export's companion tables, the demo's folder) into a temporary folder inside the target
folder and moves them in together at the end, under a lock on the target folder, so that two
runs writing the same set never mix and a failure part-way leaves the previous set as it was.
Every ``OSError`` that leaves here names the path it concerns. Interrupts (SIGINT, SIGTERM)
arriving while a set is moved in are held until the move is complete or rolled back.
"""

from __future__ import annotations

import contextlib
import os
import shutil
import signal
import stat
import tempfile
import threading
from collections.abc import Iterator, Sequence
from pathlib import Path

try:  # POSIX; elsewhere the sets are still moved in together, without the lock
    import fcntl
except ImportError:  # pragma: no cover - not POSIX
    fcntl = None  # type: ignore[assignment]

STAGING_PREFIX = ".lossbudget-"
STAGING_SUFFIX = ".part"


@contextlib.contextmanager
def atomic_paths(targets: Sequence[Path]) -> Iterator[list[Path]]:
    """Temporary files beside each target, renamed over the targets when the block succeeds.

    On any failure (an exception, an interrupt) every temporary file is removed and the
    targets are left as they were. An ``OSError`` without a path gets the target's.
    """
    temps: list[Path] = []
    try:
        for target in targets:
            try:
                fd, name = tempfile.mkstemp(dir=target.parent, prefix=f".{target.name}.",
                                            suffix=STAGING_SUFFIX)
            except OSError as exc:
                raise with_path(exc, target) from exc
            os.close(fd)
            temps.append(Path(name))
        try:
            yield temps
        except OSError as exc:
            if exc.filename is None or Path(exc.filename) in temps:
                raise with_path(exc, targets[0] if len(targets) == 1 else targets[0].parent) \
                    from exc
            raise
        for temp, target in zip(temps, targets, strict=True):
            try:
                os.chmod(temp, _file_mode(target))
                os.replace(temp, target)
            except OSError as exc:
                raise with_path(exc, target) from exc
    except BaseException:
        for temp in temps:
            with contextlib.suppress(OSError):
                temp.unlink()
        raise


def with_path(exc: OSError, path: Path | str) -> OSError:
    """The same kind of ``OSError`` with ``path`` as its file name ("cannot write: why")."""
    reason = exc.strerror or str(exc)
    if not reason.startswith("cannot write"):
        reason = f"cannot write: {reason}"
    if exc.errno is not None:
        return type(exc)(exc.errno, reason, str(path))
    out = OSError(reason)
    out.filename, out.strerror = str(path), reason
    return out


class OutputSet:
    """The files of one output set, written under a staging folder and moved in together.

    ``stage(name)`` gives the path to write the file ``name`` at; ``final(path)`` gives where
    a staged file ends up. Made by :func:`output_set`.
    """

    def __init__(self, folder: Path, staging: Path):
        self.folder = folder
        self.staging = staging
        self.names: list[str] = []
        self.current: str | None = None

    def stage(self, name: str) -> Path:
        """The path at which to write the set's file ``name`` (a plain file name)."""
        if Path(name).name != name or name in ("", ".", ".."):
            raise ValueError(f"expected a plain file name, got {name!r}")
        if name not in self.names:
            self.names.append(name)
        self.current = name
        return self.staging / name

    def drop(self, name: str) -> None:
        """Remove the file ``name`` from the folder when the set is moved in (a stale member
        of an earlier set, such as a loss table this run leaves out)."""
        self.stage(name)
        self.current = None

    def final(self, path: Path) -> Path:
        """Where a staged file is moved to (other paths are returned unchanged)."""
        path = Path(path)
        return self.folder / path.name if path.parent == self.staging else path

    def _where(self, filename: str | None) -> Path:
        """The path to name in an error raised while the set was written."""
        if filename is not None:
            path = Path(filename)
            if path.parent == self.staging and path.name in self.names:
                return self.folder / path.name
            if self.staging not in path.parents and path != self.staging:
                return path
        return self.folder / self.current if self.current else self.folder


@contextlib.contextmanager
def output_set(folder: str | os.PathLike, *, create: bool = False) -> Iterator[OutputSet]:
    """Write a set of files into ``folder`` all at once, or not at all.

    Parameters
    ----------
    folder : path-like
        The folder the files go into.
    create : bool
        Create the folder (and its parents) when missing; a folder created here is removed
        again when the set fails and it is still empty.

    Yields
    ------
    OutputSet
        Stage each file with ``stage(name)`` and write it there.

    Notes
    -----
    The staging folder (``.lossbudget-*.part``) lies inside ``folder``, on the same file
    system, so that moving a file in is a rename. At the end of a successful block each
    staged file replaces the file of the same name (keeping that file's permissions, else
    rw-r--r--), with the folder locked (``flock``) against other runs; a failure part-way
    puts the previous files back. On any failure, interrupt included, the staging folder is
    removed and the exception goes on, naming the path it concerns.
    """
    folder = Path(folder)
    created: list[Path] = []
    if create:
        created = _make_folder(folder)
    elif not folder.is_dir():
        raise FileNotFoundError(2, "cannot write: the folder does not exist", str(folder))
    try:
        staging = Path(tempfile.mkdtemp(dir=folder, prefix=STAGING_PREFIX,
                                        suffix=STAGING_SUFFIX))
    except OSError as exc:
        _remove_created(created)
        raise with_path(exc, folder) from exc
    files = OutputSet(folder, staging)
    try:
        try:
            yield files
        except OSError as exc:
            raise with_path(exc, files._where(exc.filename)) from exc
        with _signals_held():
            _commit(files)
            shutil.rmtree(staging, ignore_errors=True)
    except BaseException:
        shutil.rmtree(staging, ignore_errors=True)
        _remove_created(created)
        raise


def _make_folder(folder: Path) -> list[Path]:
    """Create ``folder`` and missing parents; return those created, deepest first."""
    missing = [p for p in (folder, *folder.parents) if not p.exists()]
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise with_path(exc, folder) from exc
    if not os.access(folder, os.W_OK | os.X_OK):
        _remove_created(missing)
        raise PermissionError(13, "cannot write: the folder is not writable", str(folder))
    return missing


def _remove_created(created: list[Path]) -> None:
    for path in created:
        with contextlib.suppress(OSError):
            path.rmdir()  # only if still empty


def _commit(files: OutputSet) -> None:
    """Move the staged files in, all or none (the previous files restored on a failure)."""
    previous = files.staging / ".previous"
    done: list[tuple[Path, Path | None]] = []
    with _folder_lock(files.folder):
        try:
            for name in files.names:
                new = files.staging / name
                target = files.folder / name
                present = os.path.lexists(target) and not target.is_dir()
                if not new.exists() and not present:
                    continue
                files.current = name
                backup = None
                if present:
                    previous.mkdir(exist_ok=True)
                    backup = previous / name
                    try:
                        os.link(target, backup, follow_symlinks=False)
                    except OSError:
                        shutil.copy2(target, backup, follow_symlinks=False)
                if new.exists():
                    os.chmod(new, _file_mode(target))
                    os.replace(new, target)
                else:  # dropped from the set
                    target.unlink()
                done.append((target, backup))
        except BaseException as exc:
            for target, backup in reversed(done):
                with contextlib.suppress(OSError):
                    if backup is not None:
                        os.replace(backup, target)
                    else:
                        target.unlink()
            if isinstance(exc, OSError):
                raise with_path(exc, files.folder / (files.current or "")) from exc
            raise


@contextlib.contextmanager
def _folder_lock(folder: Path) -> Iterator[None]:
    """An exclusive ``flock`` on the folder while a set is moved in (no lock file left)."""
    if fcntl is None:
        yield
        return
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError as exc:
        raise with_path(exc, folder) from exc
    try:
        fcntl.flock(fd, fcntl.LOCK_EX)
        yield
    finally:
        os.close(fd)  # closing releases the lock


@contextlib.contextmanager
def _signals_held() -> Iterator[None]:
    """Hold SIGINT and SIGTERM during the block and deliver them after it (main thread)."""
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    caught: list[int] = []
    wanted = [s for s in (signal.SIGINT, getattr(signal, "SIGTERM", None)) if s is not None]
    old = {s: signal.signal(s, lambda signum, _frame: caught.append(signum)) for s in wanted}
    try:
        yield
    finally:
        for s, handler in old.items():
            signal.signal(s, handler)
        if caught:
            signal.raise_signal(caught[0])


def _file_mode(target: Path) -> int:
    """Permissions for the new file: those of the file it replaces, else rw-r--r--."""
    try:
        return stat.S_IMODE(target.stat().st_mode)
    except OSError:
        return 0o644
