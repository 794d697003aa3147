"""Atomic writes: single files and whole output folders (build aside, then swap).

An output folder is only ever replaced when it is absent, empty, or a packet this program
wrote (recognised by its manifest, holding nothing the manifest does not list); it never is, or
holds, the spec, the record store or the current folder. The swap is one atomic exchange of
the staged and the old folder where the system offers it (Linux ``renameat2``), else two
renames that :func:`recover` completes after a kill.
"""

from __future__ import annotations

import ctypes
import errno
import json
import os
import shutil
import tempfile
from collections.abc import Iterable
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
        out.write(data)
        return
    path = Path(out)
    try:
        write_atomic(path, data)
    except OSError as exc:
        raise BuildError([Problem(str(path), f"cannot write: {exc.strerror or exc}")]) from None


#: The file that marks a folder as a packet this program wrote, and its format prefix.
PACKET_MARKER = "manifest.json"
PACKET_FORMAT_PREFIX = "buildsheet-manifest/"


def _packet_files(folder: Path) -> set[str] | None:
    """The files a packet's manifest lists (plus the manifest), or None when ``folder`` holds
    no readable manifest of ours."""
    try:
        data = json.loads((folder / PACKET_MARKER).read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError, ValueError):
        return None
    if not (isinstance(data, dict) and str(data.get("format", "")).startswith(PACKET_FORMAT_PREFIX)
            and isinstance(data.get("files"), dict)):
        return None
    return {str(name) for name in data["files"]} | {PACKET_MARKER}


def _contained(inner: Path, outer: Path) -> bool:
    """True when resolved ``inner`` is ``outer`` or lies inside it."""
    return inner == outer or outer in inner.parents


def _strangers(folder: Path, listed: set[str]) -> list[str]:
    """Entries below ``folder`` ('/'-separated, folders with a trailing '/') that ``listed``
    does not name; a folder's contents are not listed again. Symbolic links are not followed."""
    dirs = {parent.as_posix() for name in listed for parent in Path(name).parents}
    out: list[str] = []
    for root, subdirs, files in os.walk(folder):
        base = Path(root).relative_to(folder)
        for d in sorted(subdirs):
            rel = (base / d).as_posix()
            if rel not in dirs:
                out.append(rel + "/")
        subdirs[:] = [d for d in subdirs if (base / d).as_posix() in dirs]
        out += [(base / f).as_posix() for f in sorted(files) if (base / f).as_posix() not in listed]
    return sorted(out)


def check_output_folder(out_dir: str | os.PathLike[str],
                        protected: Iterable[tuple[str, str | os.PathLike[str]]] = ()) -> Path:
    """Vet an output folder before a build and return it as an absolute path.

    Refuses (BuildError naming the folder) a folder that is, or contains, the current folder or
    any ``protected`` path (pairs of what it is and where, e.g. ("spec", path)); a path that is
    not a folder; and an existing folder that is neither empty nor a previous packet holding
    only what its manifest lists. Nothing is changed on disk.
    """
    raw = Path(out_dir)
    out = Path(os.path.abspath(raw))
    where = str(raw)
    resolved = out.resolve()
    try:
        here = Path.cwd().resolve()
    except OSError:
        here = None
    if here is not None and _contained(here, resolved):
        raise BuildError([Problem(where, "is the current folder or holds it; a packet replaces "
                                  "its output folder as a whole, so choose a new or empty "
                                  "subfolder, e.g. -o out")])
    for what, path in protected:
        target = Path(os.path.abspath(path)).resolve()
        if _contained(target, resolved):
            raise BuildError([Problem(where, f"is or holds the {what} {path}; a packet replaces "
                                      "its output folder as a whole, so choose a folder that "
                                      "does not contain it, e.g. -o out")])
    if not out.exists() and not out.is_symlink():
        return out
    if not out.is_dir():
        raise BuildError([Problem(where, "exists and is not a folder; choose another -o")])
    try:
        if not any(out.iterdir()):
            return out
        listed = _packet_files(out)
        if listed is None:
            raise BuildError([Problem(where, f"is not empty and holds no packet ({PACKET_MARKER} "
                                      "missing or not one of ours); it is left untouched: choose "
                                      "a new or empty folder, or remove its contents yourself")])
        strangers = _strangers(out, listed)
    except OSError as exc:
        raise BuildError([Problem(where, f"cannot read the output folder: "
                                  f"{exc.strerror or exc}")]) from None
    if strangers:
        shown = ", ".join(strangers[:3]) + (f" and {len(strangers) - 3} more"
                                            if len(strangers) > 3 else "")
        raise BuildError([Problem(where, f"holds files the packet did not write ({shown}); a "
                                  "new packet replaces the folder as a whole, so move them out "
                                  "or choose another folder")])
    return out


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


_RENAME_EXCHANGE = 2  # linux/fs.h
_AT_FDCWD = -100


def exchange(a: Path, b: Path) -> bool:
    """Atomically swap two existing paths (Linux renameat2 RENAME_EXCHANGE): True if done,
    False where the system or file system does not offer it (nothing changed then)."""
    try:
        libc = ctypes.CDLL(None, use_errno=True)
        renameat2 = libc.renameat2
    except (OSError, AttributeError):
        return False
    renameat2.argtypes = (ctypes.c_int, ctypes.c_char_p, ctypes.c_int, ctypes.c_char_p,
                          ctypes.c_uint)
    if renameat2(_AT_FDCWD, os.fsencode(a), _AT_FDCWD, os.fsencode(b), _RENAME_EXCHANGE) == 0:
        return True
    code = ctypes.get_errno()
    if code in (errno.ENOSYS, errno.EINVAL, errno.ENOTSUP, errno.EOPNOTSUPP, errno.EPERM):
        return False
    raise OSError(code, os.strerror(code), str(b))


def swap_in(staging: Path, out_dir: Path, *, keep: tuple[str, ...] = ()) -> None:
    """Replace ``out_dir`` by ``staging``. Files named in ``keep`` that exist in the old folder but
    not in staging are carried over (used when only changed files were written).

    With an existing ``out_dir`` the two folders are exchanged in one atomic step and the old
    packet (now under the staging name) removed; a kill then leaves either packet complete at
    ``out_dir``, and :func:`recover` removes the leftover. Without the exchange, two renames
    with a backup that :func:`recover` restores.
    """
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
        if exchange(staging, out_dir):
            shutil.rmtree(staging, ignore_errors=True)  # the old packet
            return
        shutil.rmtree(backup, ignore_errors=True)
        os.replace(out_dir, backup)
    os.replace(staging, out_dir)
    shutil.rmtree(backup, ignore_errors=True)


def discard(staging: Path) -> None:
    shutil.rmtree(staging, ignore_errors=True)


def store_files(path: Path) -> tuple[Path, ...]:
    """The files of an SQLite store: the database and its write-ahead log, shared-memory and
    rollback journal files."""
    return (path, *(path.with_name(path.name + suffix) for suffix in ("-wal", "-shm", "-journal")))


def remove_new_store(path: Path) -> None:
    """Remove a store this command created (after it failed), with its side files."""
    for p in store_files(path):
        p.unlink(missing_ok=True)
