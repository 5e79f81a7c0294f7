"""Model files: a zip holding ``meta.json`` and the pickled pipeline, checked before unpickling.

The pipeline bytes' sha256 is in ``meta.json``; ``load`` verifies it and the input columns
*before* it unpickles anything.  Pickles run code when loaded: load only files you trust.
"""

from __future__ import annotations

import hashlib
import io
import json
import zipfile
import zlib
from pathlib import Path
from typing import Any

import joblib
import pandas as pd

from tunelab.errors import ModelFileError, first_line
from tunelab.files import write_atomically

FORMAT = "tunelab-model"
FORMAT_VERSION = 1


def write_model_file(path: Path, pipeline: Any, meta: dict[str, Any]) -> str:
    """Write the model file atomically; returns the sha256 of the whole file."""
    buffer = io.BytesIO()
    joblib.dump(pipeline, buffer, compress=3)
    payload = buffer.getvalue()
    meta = {**meta, "format": FORMAT, "format_version": FORMAT_VERSION,
            "pipeline_sha256": hashlib.sha256(payload).hexdigest()}
    def write(tmp: Path) -> None:
        with zipfile.ZipFile(tmp, "w", compression=zipfile.ZIP_STORED) as archive:
            archive.writestr("meta.json", json.dumps(meta, indent=2, default=str))
            archive.writestr("pipeline.joblib", payload)

    write_atomically(path, write, "model file")
    return hashlib.sha256(path.read_bytes()).hexdigest()


def read_meta(path: Path) -> dict[str, Any]:
    """The metadata of a model file, without unpickling anything."""
    if not path.exists():
        raise ModelFileError(f"model file not found: {path}", "write one with `tunelab export STUDY --out FILE`")
    try:
        with zipfile.ZipFile(path) as archive:
            meta = json.loads(archive.read("meta.json"))
    except (zipfile.BadZipFile, KeyError, EOFError, zlib.error, json.JSONDecodeError, UnicodeDecodeError) as exc:
        if _zip_header(path) and "meta.json" in _names(path):  # a model file that got damaged
            raise ModelFileError(f"model file {path} is damaged ({first_line(exc)})", _EXPORT_AGAIN) from exc
        raise ModelFileError(f"{path} is not a tunelab model file", "export one with `tunelab export`") from exc
    except OSError as exc:
        raise ModelFileError(f"cannot read the model file {path}: {exc.strerror or exc}",
                             "check the path and its permissions") from exc
    if meta.get("format") != FORMAT:
        raise ModelFileError(f"{path} is not a tunelab model file", "export one with `tunelab export`")
    if meta.get("format_version", 0) > FORMAT_VERSION:
        raise ModelFileError(f"{path} was written by a newer tunelab", "upgrade tunelab")
    return meta


def check_columns(meta: dict[str, Any], frame: pd.DataFrame) -> None:
    """Refuse input whose columns differ from the training columns, listing what differs."""
    expected = list(meta["columns"])
    present = set(map(str, frame.columns))
    missing = [c for c in expected if c not in present]
    if missing:
        raise ModelFileError(f"input lacks {len(missing)} column(s) the model needs: {', '.join(missing[:10])}",
                             "pass data with the same columns as the training file")


def load_pipeline(path: Path, meta: dict[str, Any]) -> Any:
    """Unpickle the pipeline after its sha256 matches the one recorded at export."""
    try:
        with zipfile.ZipFile(path) as archive:
            payload = archive.read("pipeline.joblib")
    except (zipfile.BadZipFile, KeyError, EOFError, zlib.error, OSError) as exc:
        raise ModelFileError(f"model file {path} is damaged ({first_line(exc)})", _EXPORT_AGAIN) from exc
    if hashlib.sha256(payload).hexdigest() != meta.get("pipeline_sha256"):
        raise ModelFileError(f"{path} was altered after export (pipeline hash differs)",
                             "export the model again; do not load a file you cannot trust")
    return joblib.load(io.BytesIO(payload))


_EXPORT_AGAIN = "export the model again from its study: tunelab export STUDY --out FILE"


def _zip_header(path: Path) -> bool:
    with open(path, "rb") as handle:
        return handle.read(4) == b"PK\x03\x04"


def _names(path: Path) -> list[str]:
    """The member names a zip's directory lists, or none when even that cannot be read."""
    try:
        with zipfile.ZipFile(path) as archive:
            return archive.namelist()
    except (zipfile.BadZipFile, OSError, EOFError):
        return []
