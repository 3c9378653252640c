"""Output helpers: atomic writes, deterministic Parquet/JSON, digests, provenance.

Every file walkcomfort writes goes through these functions so that (a) a crash
never leaves a half-written output, (b) re-running with the same inputs gives
the same bytes, and (c) every output can say where it came from.
"""

from __future__ import annotations

import contextlib
import hashlib
import io
import json
import os
import platform
import tempfile
from collections.abc import Iterable
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd


def atomic_write_bytes(path: str | os.PathLike, data: bytes) -> Path:
    """Write ``data`` to ``path`` through a temporary file in the same folder and a rename."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".part", dir=path.parent)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        # mkstemp creates 0600; outputs are for sharing, so use the usual umask-based mode
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(tmp, 0o666 & ~umask)
        os.replace(tmp, path)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(tmp)
        raise
    return path


def atomic_write_text(path: str | os.PathLike, text: str) -> Path:
    """Atomic UTF-8 text write (``\\n`` line ends on every platform)."""
    return atomic_write_bytes(path, text.encode("utf-8"))


def _json_default(obj: Any):
    if isinstance(obj, (np.integer,)):
        return int(obj)
    if isinstance(obj, (np.floating,)):
        return None if not np.isfinite(obj) else float(obj)
    if isinstance(obj, (np.bool_,)):
        return bool(obj)
    if isinstance(obj, np.ndarray):
        return obj.tolist()
    if isinstance(obj, (pd.Timestamp,)):
        return obj.isoformat()
    if isinstance(obj, Path):
        return obj.as_posix()
    raise TypeError(f"cannot write {type(obj).__name__} to JSON")


def to_json_text(obj: Any) -> str:
    """Deterministic JSON: sorted keys, 2-space indent, NaN written as null."""
    return json.dumps(_clean_nan(obj), sort_keys=True, indent=2, default=_json_default, allow_nan=False) + "\n"


def _clean_nan(obj: Any):
    if isinstance(obj, float) and not np.isfinite(obj):
        return None
    if isinstance(obj, dict):
        return {str(k): _clean_nan(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_clean_nan(v) for v in obj]
    return obj


def write_json(path: str | os.PathLike, obj: Any) -> Path:
    """Atomically write ``obj`` as deterministic JSON."""
    return atomic_write_text(path, to_json_text(obj))


def write_parquet(path: str | os.PathLike, df: pd.DataFrame, metadata: dict | None = None) -> Path:
    """Atomically write ``df`` to Parquet with byte-stable settings.

    ``metadata`` (JSON-able) is stored in the file's key-value metadata under
    ``walkcomfort`` so provenance travels with the table.
    """
    import pyarrow as pa
    import pyarrow.parquet as pq

    table = pa.Table.from_pandas(df, preserve_index=True)
    meta = dict(table.schema.metadata or {})
    if metadata is not None:
        meta[b"walkcomfort"] = to_json_text(metadata).encode("utf-8")
    table = table.replace_schema_metadata(meta)
    buf = io.BytesIO()
    # no created_by timestamps differ between runs; fixed compression keeps bytes stable
    pq.write_table(table, buf, compression="zstd", write_statistics=True, use_dictionary=True)
    return atomic_write_bytes(path, buf.getvalue())


def read_parquet_metadata(path: str | os.PathLike) -> dict:
    """Return the ``walkcomfort`` provenance stored by :func:`write_parquet` (or ``{}``)."""
    import pyarrow.parquet as pq

    meta = pq.read_schema(path).metadata or {}
    raw = meta.get(b"walkcomfort")
    return json.loads(raw) if raw else {}


def write_csv(path: str | os.PathLike, df: pd.DataFrame, index: bool = True) -> Path:
    """Atomically write ``df`` as CSV (ISO-8601 times, ``\\n`` line ends)."""
    text = df.to_csv(index=index, lineterminator="\n", date_format="%Y-%m-%dT%H:%M:%S.%f%z")
    return atomic_write_text(path, text)


def file_digest(path: str | os.PathLike, algorithm: str = "sha256") -> str:
    """Hex digest of a file's bytes, read in chunks."""
    h = hashlib.new(algorithm)
    with open(path, "rb") as fh:
        for chunk in iter(lambda: fh.read(1 << 20), b""):
            h.update(chunk)
    return f"{algorithm}:{h.hexdigest()}"


def frame_digest(df: pd.DataFrame) -> str:
    """Stable digest of a DataFrame's values, index and column names."""
    h = hashlib.sha256()
    h.update(json.dumps([str(c) for c in df.columns]).encode())
    h.update(pd.util.hash_pandas_object(df, index=True).values.tobytes())
    return f"sha256:{h.hexdigest()}"


def package_versions(names: Iterable[str] = ("walkcomfort", "numpy", "pandas", "pvlib", "thermofeel",
                                              "lightgbm", "scikit-learn", "shapely", "pyproj")) -> dict:
    """Installed versions of the packages that shape results."""
    from importlib.metadata import PackageNotFoundError, version

    out = {}
    for name in names:
        try:
            out[name] = version(name)
        except PackageNotFoundError:
            out[name] = None
    return out


def provenance(inputs: Iterable[str | os.PathLike] = (), parameters: dict | None = None,
               base: str | os.PathLike | None = None) -> dict:
    """A provenance record: tool version, input digests (paths relative to ``base``), parameters.

    Deliberately carries no wall-clock time, so identical runs give identical bytes.
    """
    from walkcomfort import __version__

    files = {}
    for p in inputs:
        p = Path(p)
        key = p.relative_to(base).as_posix() if base is not None else p.as_posix()
        files[key] = file_digest(p)
    return {
        "tool": "walkcomfort",
        "version": __version__,
        "python": platform.python_version(),
        "inputs": dict(sorted(files.items())),
        "parameters": parameters or {},
    }
