"""Safe outputs: never onto an input, checked before any fitting, written atomically, folders with a manifest.

Every command that writes goes through this module:

- :func:`refuse_inputs` compares output targets with the input files by their resolved path and, when
  both exist, by device and inode (so `./data.csv`, `sub/../data.csv`, a symbolic link or a hard link
  are all recognised);
- :func:`check_file` and :func:`check_folder` run before any fitting starts;
- :func:`write_file`, :func:`writing_to` and :func:`write_folder` write a temporary file in the same
  folder and move it into place with `os.replace`, so a full disk or an interruption leaves the previous
  file as it was;
- a folder of outputs holds a manifest (`MANIFEST`) listing the files sembridge wrote with their SHA-256
  hashes. Files go into a folder only when it is new, empty, or has a manifest; a file is replaced only
  when the manifest lists it with its current hash (sembridge wrote it and nobody changed it since), and
  nothing sembridge did not write is ever deleted or replaced.
"""
from __future__ import annotations

import hashlib
import json
import os
import tempfile
from contextlib import contextmanager
from pathlib import Path
from typing import Iterable, Iterator

from .errors import OutputError

MANIFEST = ".sembridge-manifest.json"
_STDOUT = "-"


def _same_file(a: Path, b: Path) -> bool:
    try:
        if a.resolve() == b.resolve():
            return True
        return a.exists() and b.exists() and os.path.samefile(a, b)
    except (OSError, RuntimeError):   # a symbolic-link loop is no input file
        return False


def refuse_inputs(outputs: Iterable[Path | None], inputs: Iterable[Path | None]) -> None:
    """OutputError when an output target is one of the input files, however its path is spelled."""
    inputs = [i for i in inputs if i is not None]
    for out in outputs:
        if out is None or str(out) == _STDOUT:
            continue
        for source in inputs:
            if _same_file(Path(out), Path(source)):
                raise OutputError(f"{out} is an input file ({Path(source).name}); choose another output name")


def _existing_ancestor(path: Path) -> Path:
    path = Path(os.path.abspath(path))
    while not path.exists() and path != path.parent:
        path = path.parent
    return path


def _check_writable_folder(folder: Path, shown: Path) -> None:
    try:
        ancestor = _existing_ancestor(folder)
        if not ancestor.is_dir():
            raise OutputError(f"cannot write {shown}: {ancestor} is a file, not a folder")
    except (OSError, RuntimeError) as exc:
        raise OutputError(f"cannot write {shown} ({getattr(exc, 'strerror', None) or 'unusable path'})") from None
    if not os.access(ancestor, os.W_OK | os.X_OK):
        raise OutputError(f"cannot write {shown}: the folder {ancestor} is not writable")


def check_file(path: Path | None, inputs: Iterable[Path | None] = ()) -> None:
    """Before fitting: the file can be written and is not an input ('-' and None mean no file)."""
    if path is None or str(path) == _STDOUT:
        return
    refuse_inputs([path], inputs)
    if path.is_dir():
        raise OutputError(f"cannot write {path}: it is a folder")
    if path.exists() and not path.is_file():
        raise OutputError(f"cannot write {path}: it is not a regular file")
    _check_writable_folder(path.parent, path)


def _hash(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


def _file_hash(path: Path) -> str:
    digest = hashlib.sha256()
    with open(path, "rb") as handle:
        for block in iter(lambda: handle.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()


def read_manifest(folder: Path) -> dict[str, list[str]] | None:
    """The files sembridge wrote into `folder`, by name, with their accepted hashes; None without a manifest."""
    try:
        content = json.loads((folder / MANIFEST).read_text(encoding="utf-8"))
        files = content["files"]
        if content.get("written_by") != "sembridge" or not isinstance(files, dict):
            return None
        return {str(k): [str(h) for h in v] for k, v in files.items() if isinstance(v, list)}
    except (OSError, ValueError, KeyError, TypeError, AttributeError):
        return None


def _ours_unchanged(folder: Path, name: str, manifest: dict[str, list[str]]) -> bool:
    path = folder / name
    return path.is_file() and not path.is_symlink() and _file_hash(path) in manifest.get(name, [])


def check_folder(folder: Path, names: Iterable[str], inputs: Iterable[Path | None] = (),
                 same: dict[str, bytes] | None = None) -> None:
    """Before fitting: `folder` may receive the files `names` (OutputError otherwise).

    The folder must be new, empty, or hold a manifest; every file about to be replaced must be listed in
    it with its current hash. A file whose bytes already equal `same[name]` needs no replacing.
    """
    names, same = list(names), same or {}
    refuse_inputs([folder / name for name in names], inputs)
    if folder.exists() and not folder.is_dir():
        raise OutputError(f"cannot write into {folder}: it is a file, not a folder")
    _check_writable_folder(folder, folder)
    if not folder.exists():
        return
    present = [p.name for p in folder.iterdir()]
    if not present:
        return
    manifest = read_manifest(folder)
    if manifest is None:
        raise OutputError(f"{folder} already holds files that sembridge did not write (e.g. {sorted(present)[0]!r}); "
                          "choose a new or empty folder")
    for name in names:
        path = folder / name
        if not (path.exists() or path.is_symlink()) or _ours_unchanged(folder, name, manifest):
            continue
        if name in same and path.is_file() and path.read_bytes() == same[name]:
            continue
        raise OutputError(f"{path} was not written by sembridge or was changed since; move it away or choose "
                          "another folder")


def _temporary(path: Path) -> Path:
    """An empty file beside `path`, with the permissions a newly created file would get."""
    handle, name = tempfile.mkstemp(prefix=f".{path.name}.", suffix=f".tmp{path.suffix}", dir=path.parent)
    os.close(handle)
    mask = os.umask(0)
    os.umask(mask)
    os.chmod(name, 0o666 & ~mask)
    return Path(name)


def _failed(path: Path, exc: OSError) -> OutputError:
    return OutputError(f"cannot write {path} ({exc.strerror or exc.__class__.__name__})")


@contextmanager
def writing_to(path: Path) -> Iterator[Path]:
    """A temporary path beside `path` (same suffix) for writers that need a file name; moved into place
    when the block ends without error, removed otherwise."""
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        temporary = _temporary(path)
    except OSError as exc:
        raise _failed(path, exc) from exc
    try:
        yield temporary
        os.replace(temporary, path)
    except OSError as exc:
        raise _failed(path, exc) from exc
    finally:
        if temporary.exists():
            temporary.unlink()


def write_file(path: Path, data: bytes | str) -> None:
    """Write `data` to `path` atomically (the previous file stays intact if anything fails)."""
    data = data.encode("utf-8") if isinstance(data, str) else data
    with writing_to(path) as temporary:
        with open(temporary, "wb") as handle:
            handle.write(data)
            handle.flush()
            os.fsync(handle.fileno())


def _write_manifest(folder: Path, files: dict[str, list[str]]) -> None:
    text = json.dumps({"written_by": "sembridge", "files": dict(sorted(files.items()))}, indent=1) + "\n"
    write_file(folder / MANIFEST, text)


def write_folder(folder: Path, files: dict[str, bytes], complete: bool = True) -> None:
    """Write `files` into `folder` (checked with :func:`check_folder` first) and record them in the manifest.

    Every file is first written beside its target; only when all are written are they moved into place,
    so a failure leaves the previous files intact. With `complete`, files from an earlier run that this
    run no longer writes are removed, but only those the manifest lists with their current hash.
    """
    check_folder(folder, files, same=files)
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise _failed(folder, exc) from exc
    old = read_manifest(folder) or {}
    new = {name: [_hash(data)] for name, data in files.items()}
    staged: dict[str, Path] = {}
    current = folder
    try:
        for name, data in files.items():
            current = folder / name
            staged[name] = _temporary(current)
            staged[name].write_bytes(data)
        # while the files move into place, either version of each is ours
        _write_manifest(folder, {**old, **{n: sorted(set(old.get(n, [])) | set(h)) for n, h in new.items()}})
        for name, temporary in staged.items():
            current = folder / name
            os.replace(temporary, current)
    except OSError as exc:
        raise _failed(current, exc) from exc
    finally:
        for temporary in staged.values():
            if temporary.exists():
                temporary.unlink()
    kept = {n: h for n, h in old.items() if n not in new}
    if complete:
        for name in list(kept):
            if _ours_unchanged(folder, name, old):
                (folder / name).unlink()
                del kept[name]
    _write_manifest(folder, {**{n: h for n, h in kept.items() if (folder / n).exists()}, **new})
