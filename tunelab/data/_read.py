"""Read a data file into a DataFrame, turning every parser failure into a one-line InputError."""

from __future__ import annotations

import csv
import hashlib
import io
from collections import Counter
from pathlib import Path

import pandas as pd

from tunelab.errors import InputError

CSV_SUFFIXES = {".csv", ".tsv", ".txt", ".data"}
PARQUET_SUFFIXES = {".parquet", ".pq"}
_SNIFF_BYTES = 64 * 1024


def file_sha256(path: Path) -> str:
    """Hex sha256 of a file's bytes, read in chunks so large files do not fill memory."""
    digest = hashlib.sha256()
    with open(path, "rb") as handle:
        for chunk in iter(lambda: handle.read(1 << 20), b""):
            digest.update(chunk)
    return digest.hexdigest()


def read_table(path: str | Path) -> pd.DataFrame:
    """Read a CSV (delimiter sniffed, UTF-8) or Parquet file.

    Raises
    ------
    InputError
        The file is missing, empty, not UTF-8, unparsable, or has duplicate column names.
    """
    path = Path(path)
    if not path.exists():
        raise InputError(f"data file not found: {path}", "check the path")
    if path.is_dir():
        raise InputError(f"{path} is a folder, not a data file", "pass a .csv or .parquet file")
    if path.stat().st_size == 0:
        raise InputError(f"data file is empty: {path}", "pass a file with a header row and data rows")
    if path.suffix.lower() in PARQUET_SUFFIXES:
        frame = _read_parquet(path)
    else:
        frame = _read_csv(path)
    if frame.shape[0] == 0:
        raise InputError(f"data file has a header but no rows: {path}", "pass a file with data rows")
    if frame.shape[1] < 2:
        raise InputError(
            f"data file has only {frame.shape[1]} column: {path}",
            "tunelab needs a target column and at least one feature column",
        )
    return frame


def _read_parquet(path: Path) -> pd.DataFrame:
    try:
        frame = pd.read_parquet(path)
    except Exception as exc:  # pyarrow raises many types; all mean "not a readable parquet file"
        raise InputError(f"cannot read {path} as Parquet: {_first_line(exc)}", "check the file") from exc
    _check_unique_columns(list(map(str, frame.columns)), path)
    frame.columns = [str(c) for c in frame.columns]
    return frame


def _read_csv(path: Path) -> pd.DataFrame:
    raw = path.read_bytes()
    if b"\x00" in raw[:_SNIFF_BYTES]:
        raise InputError(f"{path} looks binary, not CSV text", "export the data as UTF-8 CSV or Parquet")
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise InputError(
            f"{path} is not UTF-8 text (undecodable byte at offset {exc.start})",
            f"re-save it as UTF-8, e.g. iconv -f latin1 -t utf-8 {path.name} > fixed.csv",
        ) from exc
    if not text.strip():
        raise InputError(f"data file is empty: {path}", "pass a file with a header row and data rows")
    delimiter = _sniff_delimiter(text[:_SNIFF_BYTES])
    header = next(csv.reader(io.StringIO(text), delimiter=delimiter))
    _check_unique_columns([h.strip() for h in header], path)
    try:
        frame = pd.read_csv(io.StringIO(text), sep=delimiter, skipinitialspace=True, low_memory=False)
    except (pd.errors.ParserError, ValueError) as exc:
        raise InputError(f"cannot parse {path} as CSV: {_first_line(exc)}", "check quoting and delimiters") from exc
    frame.columns = [str(c).strip() for c in frame.columns]
    return frame


def _sniff_delimiter(sample: str) -> str:
    lines = sample.splitlines()
    head = "\n".join(lines[:50])
    try:
        return csv.Sniffer().sniff(head, delimiters=",;\t|").delimiter
    except csv.Error:
        return ","


def _check_unique_columns(names: list[str], path: Path) -> None:
    duplicates = sorted(name for name, count in Counter(names).items() if count > 1)
    if duplicates:
        raise InputError(
            f"{path} has duplicate column names: {', '.join(duplicates)}",
            "rename the columns so that each name appears once",
        )


def _first_line(exc: BaseException) -> str:
    text = str(exc).strip().splitlines()
    return text[0] if text else type(exc).__name__
