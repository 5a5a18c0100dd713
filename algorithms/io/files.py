"""Output folders that lose nothing, atomic JSON, and JSON that is the same byte for byte.

An output folder of strikeline (``--out``) is written by :func:`output_folder`:

1. **Checks** (:func:`check_out_folder`): the folder is new, empty, or holds only what
   strikeline wrote there before (the files listed, with size and SHA-256, in its manifest
   :data:`strikeline.vocabulary.MANIFEST_FILE`), and replacing it needs ``overwrite``; it is
   not, does not lie inside and does not contain any input, a raster's or vector's other files
   included (a VRT's sources, a Shapefile's ``.dbf``, as GDAL lists them); it is not the working
   folder.
2. **Lock**: ``.NAME.strikeline-lock`` beside the folder, held with ``flock`` for the whole
   run, so a second run on the same folder stops at once; the lock file is removed at the end.
3. **Recovery** of what an earlier run killed half-way left beside the folder (see below).
4. **Writing** into ``.NAME.strikeline-part-XXXXXXXX`` beside the folder, marked as ours by an
   unfinished manifest from its first moment; at the end the manifest lists every file with its
   size and SHA-256, and every file is synced to disk.
5. **Replace**: the new folder and the old one swap names in one step (Linux ``renameat2``
   with ``RENAME_EXCHANGE``), then the old one, now under the part name, is removed. Where the
   file system cannot swap, the old folder is renamed to ``.NAME.strikeline-old-XXXXXXXX``, the
   new one to ``NAME``, and the old one removed. SIGINT and SIGTERM are held meanwhile.

A kill at any moment leaves at ``NAME`` either the old complete folder or the new complete one;
with the two-rename fall-back, between the renames ``NAME`` is missing and the complete old
folder lies beside it. The next run on the same folder (step 3) renames a complete old folder
back when ``NAME`` is missing and removes the part and old folders it recognises as its own (our
name pattern and a manifest inside, or empty); anything else is left alone. An error or an
interruption while writing removes the part folder, and ``NAME`` stays as it was.
"""
from __future__ import annotations

import contextlib
import ctypes
import errno
import hashlib
import json
import os
import re
import uuid
from pathlib import Path

import numpy as np

from strikeline.errors import OutputError, StrikelineError
from strikeline.io.interrupt import deferred_signals
from strikeline.vocabulary import MANIFEST_FILE

try:
    import fcntl
except ImportError:  # Windows: a byte-range lock of the lock file instead of flock
    fcntl = None
    import msvcrt

__all__ = [
    "atomic_folder",
    "check_out_folder",
    "dumps_stable",
    "file_sha256",
    "foreign_files",
    "input_files",
    "json_ready",
    "output_folder",
    "read_manifest",
    "write_json_atomic",
]

#: How many foreign files an error message names before it gives only their count.
SHOWN_FOREIGN = 5

# A test may set this to a function of the step's name, called after each step of
# output_folder (fault injection: kill the process there).
_STEP_HOOK = None


def _step(name: str) -> None:
    if _STEP_HOOK is not None:
        _STEP_HOOK(name)


def _quiet(message: str) -> None:
    pass


# --------------------------------------------------------------------------- names beside --out
def _sibling(out: Path, kind: str) -> Path:
    return out.parent / f".{out.name}.strikeline-{kind}-{uuid.uuid4().hex[:8]}"


def lock_path(out) -> Path:
    """The lock file of output folder ``out``: a dot file beside it, never inside it."""
    out = Path(out)
    return out.parent / f".{out.name}.strikeline-lock"


def _leftovers(out: Path) -> list[tuple[str, Path]]:
    """Part and old folders of ``out`` that strikeline recognises as its own."""
    pattern = re.compile(rf"^\.{re.escape(out.name)}\.strikeline-(part|old)-[0-9a-f]{{8}}$")
    found = []
    for entry in sorted(out.parent.iterdir()):
        m = pattern.match(entry.name)
        if m and entry.is_dir() and not entry.is_symlink() and (
                (entry / MANIFEST_FILE).is_file() or not any(entry.iterdir())):
            found.append((m.group(1), entry))
    return found


# --------------------------------------------------------------------------- manifest
def read_manifest(folder) -> dict | None:
    """The manifest of a folder strikeline wrote (``None`` when there is none or it is unreadable)."""
    try:
        data = json.loads((Path(folder) / MANIFEST_FILE).read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    if not isinstance(data, dict) or not isinstance(data.get("files"), dict):
        return None
    return data


def _manifest(files: dict, *, complete: bool) -> dict:
    from strikeline import __version__

    return {"written_by": f"strikeline {__version__}", "complete": complete,
            "note": "the files strikeline wrote into this folder; --overwrite replaces the folder only "
                    "while it holds nothing else",
            "files": files}


def _entries(folder: Path):
    """Every file (relative POSIX path) under ``folder``, and entries that are not plain files
    (symbolic links, empty folders, sockets) as ``(path, why)``."""
    files, odd = [], []
    for root, dirs, names in os.walk(folder):
        rel_root = Path(root).relative_to(folder)
        for d in dirs:
            p = Path(root) / d
            if p.is_symlink():
                odd.append(((rel_root / d).as_posix(), "a link"))
            elif not any(p.iterdir()):
                odd.append(((rel_root / d).as_posix() + "/", "a folder"))
        for n in names:
            p = Path(root) / n
            rel = (rel_root / n).as_posix()
            if p.is_symlink() or not p.is_file():
                odd.append((rel, "not a plain file"))
            else:
                files.append(rel)
    return sorted(files), odd


def foreign_files(folder, *, verify: bool = True) -> list[str]:
    """What in ``folder`` strikeline did not write: every entry when there is no manifest, else
    those not in it or changed since (size, and SHA-256 when ``verify``)."""
    folder = Path(folder)
    manifest = read_manifest(folder)
    files, odd = _entries(folder)
    foreign = [f"{p} ({why})" for p, why in odd]
    listed = {} if manifest is None or not manifest.get("complete") else manifest["files"]
    for rel in files:
        if rel == MANIFEST_FILE and manifest is not None:
            continue
        info = listed.get(rel)
        if not isinstance(info, dict):
            foreign.append(rel)
            continue
        p = folder / rel
        if p.stat().st_size != info.get("bytes") or (verify and file_sha256(p) != info.get("sha256")):
            foreign.append(f"{rel} (changed since strikeline wrote it)")
    return sorted(foreign)


def _complete(folder: Path) -> bool:
    """Whether ``folder`` holds every file its complete manifest lists, unchanged."""
    manifest = read_manifest(folder)
    if manifest is None or not manifest.get("complete"):
        return False
    for rel, info in manifest["files"].items():
        p = folder / rel
        if not p.is_file() or p.stat().st_size != info.get("bytes") or file_sha256(p) != info.get("sha256"):
            return False
    return True


# --------------------------------------------------------------------------- inputs
def input_files(path) -> list[Path]:
    """The files an input consists of: the path itself and every file GDAL lists for it (a VRT's
    sources, a Shapefile's ``.shx``/``.dbf``/``.prj``, a GeoPackage's journal). A path GDAL
    cannot open gives just itself (reading it reports the problem)."""
    p = Path(os.fspath(path))
    if not p.exists() and ":" in p.name:  # PATH:LAYER
        head = Path(str(p).rsplit(":", 1)[0])
        if head.exists():
            p = head
    found = [p]
    if not p.exists():
        return found
    from osgeo import gdal
    from strikeline.io._gdal import gdal_exceptions

    with gdal_exceptions():
        try:
            ds = gdal.OpenEx(str(p), gdal.OF_RASTER | gdal.OF_VECTOR | gdal.OF_READONLY)
            listed = (ds.GetFileList() or []) if ds is not None else []
        except RuntimeError:
            listed = []
        finally:
            ds = None
    found += [Path(f) for f in listed if not str(f).startswith("/vsi")]
    return found


def _flat(inputs):
    for item in inputs or ():
        if item is None or item == "":
            continue
        if isinstance(item, (list, tuple, set)):
            yield from _flat(item)
        else:
            yield item


def _check_inputs(out: Path, inputs, option: str) -> None:
    o = out.resolve()
    for given in _flat(inputs):
        for f in input_files(given):
            r = f.resolve()
            if r == o:
                why = f"is the input '{given}'" if f == Path(os.fspath(given)) else \
                    f"is '{f}', a file of the input '{given}'"
                raise OutputError(f"{option} '{out}' {why}; name a new folder for the results")
            if r.is_relative_to(o):
                part = "" if f == Path(os.fspath(given)) else f" (its file '{f}')"
                raise OutputError(f"input '{given}'{part} lies inside the output folder '{out}', which "
                                  f"replacing the folder would delete; write the results to another folder")
            if o.is_relative_to(r):
                raise OutputError(f"{option} '{out}' lies inside the input '{f}'; write the results to a "
                                  "folder outside the inputs")


# --------------------------------------------------------------------------- checks
def _listing(names: list[str]) -> str:
    shown = ", ".join(names[:SHOWN_FOREIGN])
    return shown + (f" and {len(names) - SHOWN_FOREIGN} more" if len(names) > SHOWN_FOREIGN else "")


def check_out_folder(out, *, overwrite: bool, inputs=(), option: str = "--out", verify: bool = False) -> Path:
    """Refuse an unusable output folder before any work is done.

    A new folder, or an existing empty one, is used as is. An existing folder with files is
    replaced only with ``overwrite``, and only when it holds nothing but the files strikeline
    wrote there (its manifest); otherwise the error lists the other files. The folder may not
    be, lie inside, or contain an input (``inputs``: paths, lists of paths or None; their other
    files as GDAL lists them included), nor be or contain the working folder.

    ``verify`` compares the files' SHA-256 with the manifest as well as their sizes (the final
    check under the lock does; the early check compares sizes only).
    """
    if out is None or os.fspath(out) == "":
        raise OutputError(f"{option} is empty; name a folder to create")
    path = Path(os.fspath(out))
    if path.is_symlink():
        raise OutputError(f"{option} '{out}' is a symbolic link; name the folder itself (or a new folder)")
    _check_inputs(path, inputs, option)
    if path.exists() and not path.is_dir():
        raise OutputError(f"{option} '{out}' exists and is not a folder; name a folder to create")
    resolved = path.resolve()
    if Path.cwd().resolve().is_relative_to(resolved):
        raise OutputError(f"{option} '{out}' is the working folder or contains it, and strikeline replaces its "
                          f"output folder as a whole; name a new sub-folder instead, e.g. {option} results")
    parent = resolved.parent
    if not parent.is_dir():
        raise OutputError(f"cannot create '{out}': the folder '{parent}' does not exist; create it first")
    if path.exists() and any(path.iterdir()):
        # A folder strikeline would refuse even with --overwrite is refused as such at once, so the
        # first message never advises a fix that the next run turns down.
        foreign = foreign_files(path, verify=verify)
        if foreign and read_manifest(path) is None:
            raise OutputError(
                f"output folder '{out}' was not written by strikeline (it has no {MANIFEST_FILE}) and holds "
                f"{len(foreign)} entr{'y' if len(foreign) == 1 else 'ies'} ({_listing(foreign)}); strikeline "
                f"replaces only a folder of its own results, even with --overwrite - name a new or empty folder "
                f"for {option}")
        if foreign:
            then = "" if overwrite else " and add --overwrite"
            raise OutputError(
                f"output folder '{out}' holds {len(foreign)} file(s) strikeline did not write ({_listing(foreign)}); "
                f"--overwrite replaces only the files listed in its {MANIFEST_FILE} - move those files out of "
                f"the folder{then}, or choose another {option}")
        if not overwrite:
            raise OutputError(f"output folder '{out}' already exists; add --overwrite to replace it, or name a "
                              "new folder")
    return path


# --------------------------------------------------------------------------- lock
def _acquire_lock(out: Path, option: str) -> int:
    """Hold the lock of ``out`` (non-blocking) and return its file descriptor."""
    path = lock_path(out)
    while True:
        try:
            fd = os.open(path, os.O_RDWR | os.O_CREAT | getattr(os, "O_CLOEXEC", 0), 0o644)
        except OSError as exc:
            raise OutputError(f"cannot create the lock file '{path}' for '{out}': {exc.strerror}; choose a "
                              f"writable folder for {option}") from None
        try:
            if fcntl is not None:
                fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
            else:
                msvcrt.locking(fd, msvcrt.LK_NBLCK, 1)
        except OSError as exc:
            holder = os.read(fd, 32).decode("ascii", "replace").strip()
            os.close(fd)
            if exc.errno not in (errno.EWOULDBLOCK, errno.EAGAIN, errno.EACCES, getattr(errno, "EDEADLOCK", -1)):
                raise OutputError(f"cannot lock '{path}' for '{out}': {exc.strerror}; choose another {option}") \
                    from None
            who = f" (process {holder})" if holder.isdigit() else ""
            raise OutputError(f"another strikeline run{who} is writing to '{out}' right now; wait for it to "
                              f"finish or choose another {option}") from None
        # The holder before us removes the file when it is done: if it did so between our open and
        # our lock, we hold a lock on a file nobody else can see - open again.
        try:
            same = os.path.samestat(os.fstat(fd), os.stat(path))
        except FileNotFoundError:
            same = False
        if same:
            if fcntl is not None:  # msvcrt's lock covers the first byte: leave the file as it is
                os.ftruncate(fd, 0)
            os.write(fd, f"{os.getpid()}\n".encode("ascii"))
            return fd
        os.close(fd)


def _release_lock(out: Path, fd: int) -> None:
    with contextlib.suppress(OSError):
        os.unlink(lock_path(out))  # while still holding it: see _acquire_lock
    os.close(fd)


# --------------------------------------------------------------------------- writing
def _fsync(path: Path) -> None:
    if os.name == "nt" and path.is_dir():  # Windows cannot open a folder to sync it
        return
    fd = os.open(path, os.O_RDONLY | (os.O_DIRECTORY if path.is_dir() else 0))
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


def _exchange(a: Path, b: Path) -> bool:
    """Swap two folders in one step (Linux ``renameat2`` with ``RENAME_EXCHANGE``); False where
    the system or the file system cannot, and the caller falls back to two renames."""
    try:
        libc = ctypes.CDLL(None, use_errno=True)
        renameat2 = libc.renameat2
    except (OSError, AttributeError):
        return False
    at_fdcwd, rename_exchange = -100, 2  # Source: linux/fcntl.h, linux/fs.h (rename(2))
    if renameat2(at_fdcwd, os.fsencode(a), at_fdcwd, os.fsencode(b), rename_exchange) == 0:
        return True
    err = ctypes.get_errno()
    if err in (errno.EINVAL, errno.ENOSYS, errno.ENOTSUP, errno.EOPNOTSUPP):
        return False
    raise OSError(err, os.strerror(err), os.fspath(b))


def _remove_tree(folder: Path) -> None:
    """Remove a folder strikeline recognised as its own: files, then folders, and its manifest
    last, so that a folder half removed by a kill is still recognised (and removed) next time."""
    marker = os.path.join(folder, MANIFEST_FILE)
    for root, dirs, names in os.walk(folder, topdown=False):
        for n in names:
            p = os.path.join(root, n)
            if p == marker:
                continue
            with contextlib.suppress(FileNotFoundError):
                os.unlink(p)
            _step("removed_file")
        for d in dirs:
            p = os.path.join(root, d)
            with contextlib.suppress(FileNotFoundError):
                os.unlink(p) if os.path.islink(p) else os.rmdir(p)
    with contextlib.suppress(FileNotFoundError):
        os.unlink(marker)
    _step("removed_file")
    with contextlib.suppress(FileNotFoundError):
        os.rmdir(folder)


def _recover(out: Path, log) -> None:
    """Put back or remove what an interrupted run left beside ``out`` (see the module's notes)."""
    left = _leftovers(out)
    if not out.exists():
        for kind, p in left:
            if kind == "old" and _complete(p):
                os.replace(p, out)
                _fsync(out.parent)
                log(f"restored the complete results of an earlier run that was stopped while replacing them: {out}")
                left.remove((kind, p))
                break
    for _, p in left:
        _remove_tree(p)
    if left:
        log(f"removed {len(left)} unfinished temporary folder(s) of an earlier run beside {out}")


def _write_manifest(part: Path, *, complete: bool) -> None:
    files = {}
    if complete:
        for rel in _entries(part)[0]:
            if rel == MANIFEST_FILE:
                continue
            p = part / rel
            _fsync(p)
            files[rel] = {"bytes": p.stat().st_size, "sha256": file_sha256(p)}
    text = dumps_stable(_manifest(files, complete=complete))
    target = part / MANIFEST_FILE
    tmp = part / f".{MANIFEST_FILE}.part"
    with open(tmp if complete else target, "w", encoding="utf-8") as f:
        f.write(text)
        f.flush()
        os.fsync(f.fileno())
    if complete:
        os.replace(tmp, target)
        _fsync(part)


def _beside_error(out, exc: OSError, option: str) -> OutputError:
    """The refusal of a folder whose parent cannot take the lock, the part folder or the
    recovery: the file system's reason and the option to change."""
    return OutputError(f"cannot write beside '{out}': {exc.strerror}; choose a writable folder for {option}")


@contextlib.contextmanager
def output_folder(out, *, overwrite: bool = False, inputs=(), option: str = "--out", log=_quiet):
    """Yield an empty temporary folder to write into; on success it replaces ``out`` safely.

    Checks ``out`` (:func:`check_out_folder`), holds its lock, recovers what an interrupted run
    left, and yields the part folder. When the block ends without an exception the manifest is
    written, the files synced, and the folder renamed to ``out`` (an existing ``out`` of
    strikeline's own replaced); on any exception (an interruption included) the part folder is
    removed and ``out`` is left as it was. See the module's notes for the steps.

    Raises
    ------
    OutputError
        An unusable ``out`` (the message says why and how to fix it), another run holding the
        lock, or a file-system error while writing (disk full, no permission).
    """
    path = check_out_folder(out, overwrite=overwrite, inputs=inputs, option=option)
    path = path.parent.resolve() / path.name
    fd = _acquire_lock(path, option)
    try:
        _step("locked")
        try:
            with deferred_signals():
                _recover(path, log)
            _step("recovered")
            check_out_folder(path, overwrite=overwrite, inputs=inputs, option=option, verify=True)
            part = _sibling(path, "part")
        except OSError as exc:
            if isinstance(exc, StrikelineError):
                raise
            raise _beside_error(out, exc, option) from None
        made = False  # the part folder is removed on failure only once this run made it
        try:
            # made inside the block that removes it, signals held until it is marked as made: a
            # signal that arrives as the folder appears still finds it removed
            try:
                with deferred_signals():
                    part.mkdir()
                    made = True
            except OSError as exc:
                raise _beside_error(out, exc, option) from None
            _step("part_created")
            _write_manifest(part, complete=False)
            _step("marker_written")
            yield part
            _step("files_written")
            _write_manifest(part, complete=True)
            _step("manifest_written")
            with deferred_signals():
                old = None
                if path.exists() and _exchange(part, path):
                    old = part  # the old results, now under the part folder's name
                    _fsync(path.parent)
                    _step("exchanged")
                else:
                    if path.exists():
                        old = _sibling(path, "old")
                        os.replace(path, old)
                        _step("old_moved")
                    os.replace(part, path)
                    _fsync(path.parent)
                    _step("new_moved")
                if old is not None:
                    _remove_tree(old)
                    _step("old_removed")
        except BaseException as exc:
            with deferred_signals():
                if made and part.exists():
                    _remove_tree(part)
            if isinstance(exc, OSError) and not isinstance(exc, StrikelineError):
                raise OutputError(f"cannot write '{out}': {exc.strerror or exc}; free some space or choose "
                                  f"another {option} - nothing was changed there") from None
            if isinstance(exc, StrikelineError) and str(part) in str(exc):
                # name the file the user asked for, not its temporary twin
                raise type(exc)(str(exc).replace(str(part), str(path))) from None
            raise
    finally:
        _release_lock(path, fd)


#: The name the output writers used before the folder was crash-safe and locked.
atomic_folder = output_folder


# --------------------------------------------------------------------------- JSON
def json_ready(value, nd: int = 4):
    """A JSON-ready copy: floats rounded to ``nd`` decimals (stable bytes), NaN/inf as null."""
    if isinstance(value, dict):
        return {str(k): json_ready(v, nd) for k, v in value.items()}
    if isinstance(value, np.ndarray):
        return [json_ready(v, nd) for v in value.tolist()]
    if isinstance(value, (list, tuple)):
        return [json_ready(v, nd) for v in value]
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        v = float(value)
        return round(v, nd) if np.isfinite(v) else None
    return value


def dumps_stable(data) -> str:
    """JSON text with sorted keys and no NaN: the same data gives the same bytes."""
    return json.dumps(data, indent=2, sort_keys=True, allow_nan=False) + "\n"


def write_text_checked(path, text: str) -> None:
    """Write a text file and sync it; a file-system error (disk full) becomes :class:`OutputError`."""
    try:
        with open(path, "w", encoding="utf-8") as f:
            f.write(text)
            f.flush()
            os.fsync(f.fileno())
    except OSError as exc:
        raise OutputError(f"cannot write '{path}': {exc.strerror}; free some space or choose another "
                          "folder") from None


def write_json_atomic(path, data, *, overwrite: bool = False) -> None:
    """Write ``data`` (already JSON-ready) to ``path`` through a temporary sibling file."""
    path = Path(path)
    if path.exists() and not overwrite:
        raise OutputError(f"output file '{path}' already exists; add --overwrite to replace it")
    tmp = path.resolve().parent / f".{path.name}.part-{uuid.uuid4().hex[:8]}"
    try:
        with open(tmp, "w", encoding="utf-8") as f:
            f.write(dumps_stable(data))
            f.flush()
            os.fsync(f.fileno())
        os.replace(tmp, path)
    except OSError as exc:
        raise OutputError(f"cannot write '{path}': {exc.strerror}; free some space or choose a writable "
                          "folder") from None
    finally:
        if tmp.exists():
            tmp.unlink()


def file_sha256(path) -> str:
    """SHA-256 of a file's bytes (hex), read in 1 MiB chunks."""
    h = hashlib.sha256()
    with open(path, "rb") as f:
        for chunk in iter(lambda: f.read(1 << 20), b""):
            h.update(chunk)
    return h.hexdigest()
