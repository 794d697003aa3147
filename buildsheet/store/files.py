"""Atomic writes: single files and whole output folders (build aside, then swap)."""

from __future__ import annotations

import os
import shutil
import tempfile
from pathlib import Path
from typing import BinaryIO

from buildsheet.errors import BuildError, Problem


def _umask() -> int:
    mask = os.umask(0o022)
    os.umask(mask)
    return mask


def write_atomic(path: Path, data: bytes) -> None:
    """Write ``data`` to ``path`` through a temporary file in the same folder and os.replace."""
    fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".tmp")
    try:
        os.fchmod(fd, 0o666 & ~_umask())
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


def write_output(data: bytes, out: str | os.PathLike[str] | BinaryIO) -> None:
    """Write a rendered document to a binary stream, or atomically to a path.

    Raises BuildError naming the path when it cannot be written.
    """
    if hasattr(out, "write"):
        out.write(data)  # type: ignore[union-attr]
        return
    path = Path(out)  # type: ignore[arg-type]
    try:
        write_atomic(path, data)
    except OSError as exc:
        raise BuildError([Problem(str(path), f"cannot write: {exc.strerror or exc}")]) from None


def _backup_name(out_dir: Path) -> Path:
    return out_dir.parent / f".{out_dir.name}.previous"


def _staging_prefix(out_dir: Path) -> str:
    return f".{out_dir.name}.building-"


def _alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    return True


def recover(out_dir: Path) -> None:
    """Undo an interrupted build: restore the previous packet if the new one never landed, and
    remove staging folders left by builds that were killed (their process is gone)."""
    backup = _backup_name(out_dir)
    if backup.is_dir():
        if out_dir.exists():
            shutil.rmtree(backup, ignore_errors=True)
        else:
            os.replace(backup, out_dir)
    prefix = _staging_prefix(out_dir)
    if out_dir.parent.is_dir():
        for stale in out_dir.parent.glob(prefix + "*"):
            pid = stale.name[len(prefix):].partition("-")[0]
            if pid.isdigit() and int(pid) != os.getpid() and not _alive(int(pid)):
                shutil.rmtree(stale, ignore_errors=True)


def prepare_staging(out_dir: Path) -> Path:
    """Create an empty staging folder beside ``out_dir`` (same file system), return it.

    Raises BuildError naming the folder when it cannot be created or written.
    """
    try:
        out_dir.parent.mkdir(parents=True, exist_ok=True)
        recover(out_dir)
        if out_dir.exists() and not out_dir.is_dir():
            raise BuildError([Problem(str(out_dir), "exists and is not a folder; choose another -o")])
        prefix = f"{_staging_prefix(out_dir)}{os.getpid()}-"  # the pid lets recover() clean up
        staging = Path(tempfile.mkdtemp(dir=out_dir.parent, prefix=prefix))
        staging.chmod(0o777 & ~_umask())
        return staging
    except OSError as exc:
        raise BuildError([Problem(str(out_dir), f"cannot write the output folder: "
                                  f"{exc.strerror or exc}")]) from None


def swap_in(staging: Path, out_dir: Path, *, keep: tuple[str, ...] = ()) -> None:
    """Replace ``out_dir`` by ``staging``. Files named in ``keep`` that exist in the old folder but
    not in staging are carried over (used when only changed files were written)."""
    backup = _backup_name(out_dir)
    if out_dir.is_dir():
        for name in keep:
            old, new = out_dir / name, staging / name
            if old.exists() and not new.exists():
                new.parent.mkdir(parents=True, exist_ok=True)
                if old.is_dir():
                    shutil.copytree(old, new)
                else:
                    shutil.copy2(old, new)
        shutil.rmtree(backup, ignore_errors=True)
        os.replace(out_dir, backup)
    os.replace(staging, out_dir)
    shutil.rmtree(backup, ignore_errors=True)


def discard(staging: Path) -> None:
    shutil.rmtree(staging, ignore_errors=True)
