"""The output folder of a batch: checked, locked, and marked with a manifest of its own.

A batch folder is not replaced as a whole (a rerun keeps the sheets it skips), so it follows the
rules of ``--out`` of ``run`` (:mod:`strikeline.io.files`) piece by piece: it is new, empty, or a
batch folder strikeline wrote (its manifest :data:`strikeline.vocabulary.MANIFEST_FILE` says
``batch``); it holds nothing but what the manifest lists - the batch's own files (unchanged since
written, or marked pending while being rewritten), the sheets' folders (each checked against its
own manifest) and what an interrupted sheet write leaves beside a sheet folder, which the sheet's
next write recovers; it is apart from every input and from the working folder; it is locked
(``flock`` on the lock file beside it) for the whole batch. Each sheet folder is written by
:func:`strikeline.pipeline.run` itself (atomic), each batch file through a temporary file and a
rename. Nothing the batch did not write is ever deleted.
"""
from __future__ import annotations

import os
import re
from pathlib import Path

from strikeline import vocabulary as V
from strikeline.errors import OutputError
from strikeline.io import files

OPTION = "--out"
#: What a batch folder's manifest says it is.
KIND = "batch"


def _ours_beside(name: str, sheets) -> bool:
    """Whether ``name`` is what a sheet's write (lock, part or old folder) or a batch file's
    temporary file leaves in the batch folder."""
    for s in sheets:
        if re.fullmatch(rf"\.{re.escape(s)}\.strikeline-(lock|(part|old)-[0-9a-f]{{8}})", name):
            return True
    own = "|".join(re.escape(f) for f in (V.BATCH_FILE, V.INDEX_PAGE, V.MANIFEST_FILE))
    stem = re.escape(os.path.splitext(V.INDEX_FILE)[0])
    return bool(re.fullmatch(rf"\.({own})\.part-[0-9a-f]{{8}}|{stem}\.part\.gpkg(-journal|-wal|-shm)?", name))


def foreign_entries(out: Path, manifest: dict, sheets) -> list[str]:
    """What in batch folder ``out`` strikeline did not write (see the module's notes)."""
    listed, known = manifest.get("files", {}), set(manifest.get("sheets", [])) | set(sheets)
    foreign = []
    for entry in sorted(out.iterdir()):
        name = entry.name
        if name == V.MANIFEST_FILE or _ours_beside(name, known):
            continue
        if name in known and entry.is_dir() and not entry.is_symlink():
            foreign += [f"{name}/{f}" for f in files.foreign_files(entry, verify=False)]
            continue
        info = listed.get(name)
        if not isinstance(info, dict) or not entry.is_file() or entry.is_symlink():
            foreign.append(name)
        elif not info.get("pending") and (entry.stat().st_size != info.get("bytes")
                                          or files.file_sha256(entry) != info.get("sha256")):
            foreign.append(f"{name} (changed since strikeline wrote it)")
    return foreign


def check_batch_folder(out, *, inputs=(), sheets=()) -> Path:
    """Refuse an unusable batch folder before any work (one line saying why and the fix)."""
    if out is None or os.fspath(out) == "":
        raise OutputError(f"{OPTION} is empty; name a folder to create")
    path = Path(os.fspath(out))
    if not path.exists() or (path.is_dir() and not path.is_symlink() and not any(path.iterdir())):
        return files.check_out_folder(path, overwrite=False, inputs=inputs, option=OPTION)
    if path.is_symlink() or not path.is_dir():
        return files.check_out_folder(path, overwrite=False, inputs=inputs, option=OPTION)  # says why
    files._check_inputs(path, inputs, OPTION)
    if Path.cwd().resolve().is_relative_to(path.resolve()):
        raise OutputError(f"{OPTION} '{out}' is the working folder or contains it; name a new sub-folder instead, "
                          f"e.g. {OPTION} series")
    manifest = files.read_manifest(path)
    if manifest is None or manifest.get("kind") != KIND:
        raise OutputError(f"output folder '{out}' is not empty and was not written by strikeline batch (it has no "
                          f"batch {V.MANIFEST_FILE}); choose a new or empty folder for {OPTION}")
    foreign = foreign_entries(path, manifest, sheets)
    if foreign:
        raise OutputError(f"output folder '{out}' holds {len(foreign)} file(s) strikeline did not write "
                          f"({files._listing(foreign)}); a batch writes only its own files and sheet folders - move "
                          f"those files out of the folder, or choose another {OPTION}")
    return path


def write_manifest(out: Path, *, sheets, files_written: dict) -> None:
    """The batch folder's manifest: its sheet folders and its own files (size and SHA-256, or
    ``pending`` while being rewritten), written atomically."""
    data = files._manifest(files_written, complete=True)
    data.update(kind=KIND, sheets=sorted(sheets),
                note="the files and sheet folders strikeline batch wrote into this folder; a rerun rewrites only "
                     "these, and each sheet folder has its own manifest")
    files.write_json_atomic(out / V.MANIFEST_FILE, data, overwrite=True)


def file_record(path: Path) -> dict:
    """Size and SHA-256 of a file the batch wrote, for its manifest."""
    return {"bytes": path.stat().st_size, "sha256": files.file_sha256(path)}


class BatchLock:
    """The batch folder's lock (the one ``run`` takes for ``--out``): a second batch or run on
    the same folder stops at once."""

    def __init__(self, out: Path):
        self.out = out.parent.resolve() / out.name

    def __enter__(self):
        self.fd = files._acquire_lock(self.out, OPTION)
        return self

    def __exit__(self, *exc):
        files._release_lock(self.out, self.fd)
