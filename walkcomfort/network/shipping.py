"""What a partition needs travels with the task graph, never as a path on the planning machine.

- The model bundle (booster text + manifest, and the fold boosters the manifest names)
  is read once on the planning machine into plain text (:func:`pack_bundle`), sent to
  the cluster once, and written by each worker into its own cache folder, named by the
  bundle's digest (:func:`unpack_bundle`), where ``model.bundle.load_bundle`` verifies
  it as usual. Workers need only ``walkcomfort`` installed: no shared folder, and a
  relative ``--model`` means nothing to them.
- A tile's points and scene subset are sent once per tile (every time chunk of the tile
  refers to the same cluster object), not once per partition
  (:func:`strip_partition` / :func:`dress_partition`).

The job digest names the bundle by its content digest, so re-fitting a model into the
same folder makes another job (see :mod:`walkcomfort.network.jobdir`).
"""

from __future__ import annotations

import dataclasses
import hashlib
import json
import os
import shutil
import tempfile
from pathlib import Path

from walkcomfort import _io
from walkcomfort.errors import InputError

#: Folder (under the system temporary folder of each machine) where workers keep bundles.
CACHE_DIR = "walkcomfort-bundles"


def pack_bundle(folder) -> dict:
    """The bundle folder as plain data: ``{"digest": "sha256:…", "files": {relative name: text}}``.

    Only the files the manifest describes are taken (manifest, booster, fold boosters).
    """
    from walkcomfort.model.bundle import MANIFEST_FILE, MODEL_FILE, read_manifest

    folder = Path(folder)
    manifest = read_manifest(folder)
    names = [MANIFEST_FILE, MODEL_FILE] + [str(f["file"]) for f in manifest.get("fold_models") or []]
    files = {}
    for name in names:
        path = folder / name
        try:
            files[name] = path.read_bytes().decode("utf-8")
        except (OSError, UnicodeDecodeError) as exc:
            raise InputError(f"the model bundle file {name} cannot be read ({exc})", where=path,
                             fix="copy the whole bundle folder, or re-run 'walkcomfort fit'") from None
    h = hashlib.sha256()
    for name in sorted(files):
        h.update(name.encode() + b"\0" + files[name].encode() + b"\0")
    return {"digest": "sha256:" + h.hexdigest(), "files": files}


def unpack_bundle(payload: dict) -> str:
    """Write a packed bundle into this machine's cache (once per digest); returns the folder.

    The folder is filled beside its final place and renamed into it, so two workers of
    one machine never see half a bundle.
    """
    digest = str(payload["digest"])
    known = _UNPACKED.get(digest)
    if known is not None and Path(known, "manifest.json").is_file():
        return known
    root = Path(tempfile.gettempdir()) / CACHE_DIR
    folder = root / digest.replace(":", "-")[:40]
    if (folder / "manifest.json").is_file() and _folder_digest(folder, payload) == digest:
        _UNPACKED[digest] = str(folder)
        return str(folder)
    root.mkdir(parents=True, exist_ok=True)
    stage = Path(tempfile.mkdtemp(prefix=".bundle.", dir=root))
    try:
        for name, text in payload["files"].items():
            if Path(name).is_absolute() or ".." in Path(name).parts:
                raise InputError(f"bundle file name {name!r} leaves the bundle folder",
                                 fix="re-run 'walkcomfort fit'")
            _io.atomic_write_text(stage / name, text)
        if folder.exists():
            shutil.rmtree(folder, ignore_errors=True)
        os.replace(stage, folder)
    except OSError:
        if not (folder / "manifest.json").is_file():  # another worker of this machine won the race
            raise
    finally:
        shutil.rmtree(stage, ignore_errors=True)
    _UNPACKED[digest] = str(folder)
    return str(folder)


#: Bundles this process already wrote or checked, by digest (a worker runs many partitions).
_UNPACKED: dict[str, str] = {}


def _folder_digest(folder: Path, payload: dict) -> str | None:
    h = hashlib.sha256()
    try:
        for name in sorted(payload["files"]):
            h.update(name.encode() + b"\0" + (folder / name).read_bytes() + b"\0")
    except OSError:
        return None
    return "sha256:" + h.hexdigest()


def job_bundle(job) -> dict | None:
    """The packed model bundle of ``job``: the one planned with it, else read from a folder its context names."""
    bundle = getattr(job, "bundle", None)
    if bundle is not None:
        return bundle
    model = (job.partitions[0].context.get("model") if job.partitions else None)
    if model and Path(str(model)).is_dir():
        return pack_bundle(model)
    return None


def with_model(part, model_folder: str | None):
    """``part`` with its context's ``model`` set to a bundle folder on this machine (None: unchanged)."""
    if not model_folder or not part.context.get("model"):
        return part
    return dataclasses.replace(part, context={**part.context, "model": model_folder})


def strip_partition(part):
    """``part`` without its tile data (points, scene): those travel once per tile."""
    return dataclasses.replace(part, points=None, scene=None)


def dress_partition(part, points, scene, model_folder: str | None = None):
    """The partition again, with its tile's data and a local model folder (runs on the worker)."""
    return with_model(dataclasses.replace(part, points=points, scene=scene), model_folder)


def tile_keys(part) -> tuple[str, str]:
    """Keys of a partition's shared tile data (points and scene of one scheme x tile)."""
    return f"points/{part.scheme}/{part.tile_id}", f"scene/{part.scheme}/{part.tile_id}"


def payload_bytes(obj) -> int:
    """Size of ``obj`` as JSON text [bytes]: a plain, engine-independent measure of what a task carries."""
    return len(json.dumps(obj, sort_keys=True, default=str).encode())
