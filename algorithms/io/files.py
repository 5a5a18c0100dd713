"""Output files and folders, written atomically, and JSON that is the same byte for byte.

Every output of strikeline is first written under a temporary name beside its destination and
renamed into place only when complete, so a failure or a cancellation leaves no partial output,
and an existing output is replaced only when the caller says so.
"""
from __future__ import annotations

import contextlib
import hashlib
import json
import os
import shutil
import uuid
from pathlib import Path

import numpy as np

from strikeline.errors import OutputError

__all__ = ["check_out_folder", "atomic_folder", "write_json_atomic", "json_ready", "file_sha256"]


def check_out_folder(out, *, overwrite: bool, inputs=()) -> Path:
    """Refuse an unusable output folder before any work is done.

    An existing folder needs ``overwrite``; an input inside the folder is refused even then,
    since replacing the folder would delete it.
    """
    path = Path(out)
    if path.exists() and not path.is_dir():
        raise OutputError(f"--out '{out}' exists and is not a folder; name a folder to create")
    if path.exists() and not overwrite:
        raise OutputError(
            f"output folder '{out}' already exists; add --overwrite to replace it, or name a new folder"
        )
    parent = path.resolve().parent
    if not parent.is_dir():
        raise OutputError(f"cannot create '{out}': the folder '{parent}' does not exist; create it first")
    for p in inputs:
        if p and path.exists() and Path(p).resolve().is_relative_to(path.resolve()):
            raise OutputError(
                f"input '{p}' lies inside the output folder '{out}', which --overwrite would delete; "
                "write the results to another folder"
            )
    return path


@contextlib.contextmanager
def atomic_folder(out, *, overwrite: bool = False):
    """Yield a temporary sibling folder; on success it becomes ``out`` (replacing it if allowed).

    On any exception (cancellation included) the temporary folder is removed and ``out`` is left
    as it was.
    """
    out = Path(out)
    if out.exists() and not overwrite:
        raise OutputError(f"output folder '{out}' already exists; add --overwrite to replace it")
    parent = out.resolve().parent
    if not parent.is_dir():
        raise OutputError(f"cannot create '{out}': the folder '{parent}' does not exist; create it first")
    tmp = parent / f".{out.name}.part-{uuid.uuid4().hex[:8]}"
    try:
        tmp.mkdir()
    except OSError as exc:
        raise OutputError(f"cannot create '{out}': {exc.strerror}; choose a writable folder") from None
    try:
        yield tmp
        if out.exists():
            old = parent / f".{out.name}.old-{uuid.uuid4().hex[:8]}"
            os.replace(out, old)
            os.replace(tmp, out)
            shutil.rmtree(old, ignore_errors=True)
        else:
            os.replace(tmp, out)
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise


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


def write_json_atomic(path, data, *, overwrite: bool = False) -> None:
    """Write ``data`` (already JSON-ready) to ``path`` through a temporary sibling file."""
    path = Path(path)
    if path.exists() and not overwrite:
        raise OutputError(f"output file '{path}' already exists; add --overwrite to replace it")
    tmp = path.resolve().parent / f".{path.name}.part-{uuid.uuid4().hex[:8]}"
    try:
        tmp.write_text(dumps_stable(data), encoding="utf-8")
        os.replace(tmp, path)
    except OSError as exc:
        raise OutputError(f"cannot write '{path}': {exc.strerror}; choose a writable folder") from None
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
