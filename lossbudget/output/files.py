"""Writing output files atomically: temporary files in the target folder, then renames.

An interrupted or failed export never leaves a partial file and never damages a previous
file at the path.
"""

from __future__ import annotations

import contextlib
import os
import stat
import tempfile
from collections.abc import Iterator, Sequence
from pathlib import Path


@contextlib.contextmanager
def atomic_paths(targets: Sequence[Path]) -> Iterator[list[Path]]:
    """Temporary files beside each target, renamed over the targets when the block succeeds.

    On any failure (an exception, an interrupt) every temporary file is removed and the
    targets are left as they were.
    """
    temps: list[Path] = []
    try:
        for target in targets:
            try:
                fd, name = tempfile.mkstemp(dir=target.parent, prefix=f".{target.name}.",
                                            suffix=".part")
            except OSError as exc:
                raise type(exc)(exc.errno, f"cannot write: {exc.strerror}", str(target)) from exc
            os.close(fd)
            temps.append(Path(name))
        yield temps
        for temp, target in zip(temps, targets, strict=True):
            os.chmod(temp, _file_mode(target))
            os.replace(temp, target)
    except BaseException:
        for temp in temps:
            with contextlib.suppress(OSError):
                temp.unlink()
        raise


def _file_mode(target: Path) -> int:
    """Permissions for the new file: those of the file it replaces, else rw-r--r--."""
    try:
        return stat.S_IMODE(target.stat().st_mode)
    except OSError:
        return 0o644
