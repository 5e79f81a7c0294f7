"""Read a data file into a DataFrame, turning every parser failure into a one-line InputError.

A CSV is parsed as it streams from the file, and hashed on the way (``read_table_hashed``): the
file is read once, and never held in memory beside the frame (10^6 rows × 50 columns is a
few hundred MB of text).
"""

from __future__ import annotations

import csv
import hashlib
import io
from collections import Counter
from pathlib import Path
from typing import Any, BinaryIO

import pandas as pd

from tunelab.errors import InputError, first_line

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
    return read_table_hashed(path)[0]


def read_table_hashed(path: str | Path) -> tuple[pd.DataFrame, str]:
    """Read a file as ``read_table`` does, and the sha256 of its bytes, from one pass over a CSV."""
    path = Path(path)
    if not path.exists():
        raise InputError(f"data file not found: {path}", "check the path")
    if path.is_dir():
        raise InputError(f"{path} is a folder, not a data file", "pass a .csv or .parquet file")
    if path.stat().st_size == 0:
        raise InputError(f"data file is empty: {path}", "pass a file with a header row and data rows")
    if path.suffix.lower() in PARQUET_SUFFIXES:
        frame, sha = _read_parquet(path), file_sha256(path)
    else:
        frame, sha = _read_csv(path)
    if frame.shape[0] == 0:
        raise InputError(f"data file has a header but no rows: {path}", "pass a file with data rows")
    if frame.shape[1] < 2:
        raise InputError(
            f"data file has only {frame.shape[1]} column: {path}",
            "tunelab needs a target column and at least one feature column",
        )
    return frame, sha


def _read_parquet(path: Path) -> pd.DataFrame:
    try:
        frame = pd.read_parquet(path)
    except Exception as exc:  # pyarrow raises many types; all mean "not a readable parquet file"
        raise InputError(f"cannot read {path} as Parquet: {first_line(exc)}", "check the file") from exc
    _check_unique_columns(list(map(str, frame.columns)), path)
    frame.columns = [str(c) for c in frame.columns]
    return frame


class _Hashing(io.RawIOBase):
    """A binary file read through once, its bytes hashed as they pass."""

    def __init__(self, handle: BinaryIO) -> None:
        self.handle = handle
        self.digest = hashlib.sha256()
        self.consumed = 0

    def readable(self) -> bool:
        return True

    def readinto(self, buffer: Any) -> int:
        chunk = self.handle.read(len(buffer))
        self.digest.update(chunk)
        self.consumed += len(chunk)
        buffer[:len(chunk)] = chunk
        return len(chunk)

    def finish(self) -> str:
        """Hash whatever the parser left unread (it may stop before the end), and return the digest."""
        for chunk in iter(lambda: self.handle.read(1 << 20), b""):
            self.digest.update(chunk)
        return self.digest.hexdigest()


def _not_utf8(path: Path, exc: UnicodeDecodeError | None = None) -> InputError:
    byte = f" (byte 0x{exc.object[exc.start]:02x} cannot be decoded)" if exc is not None else ""
    return InputError(f"{path} is not UTF-8 text{byte}",
                      f"re-save it as UTF-8, e.g. iconv -f latin1 -t utf-8 {path.name} > fixed.csv")


def _read_csv(path: Path) -> tuple[pd.DataFrame, str]:
    with open(path, "rb") as handle:
        head = handle.read(_SNIFF_BYTES)
    if b"\x00" in head:
        raise InputError(f"{path} looks binary, not CSV text", "export the data as UTF-8 CSV or Parquet")
    whole = len(head) < _SNIFF_BYTES
    # the head may end inside a character: decode up to its last line break (all of it if it is the file)
    cut = head if whole or b"\n" not in head else head[:head.rindex(b"\n") + 1]
    try:
        text = cut.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise _not_utf8(path, exc) from exc
    if whole and not text.strip():
        raise InputError(f"data file is empty: {path}", "pass a file with a header row and data rows")
    delimiter = _sniff_delimiter(text)
    header = next(csv.reader(io.StringIO(text), delimiter=delimiter), [])
    _check_unique_columns([h.strip() for h in header], path)
    with open(path, "rb") as handle:
        stream = _Hashing(handle)
        try:
            frame = pd.read_csv(io.BufferedReader(stream, 1 << 20), sep=delimiter, skipinitialspace=True,
                                low_memory=False, encoding="utf-8-sig")
        except UnicodeDecodeError as exc:
            raise _not_utf8(path, exc) from exc
        except pd.errors.EmptyDataError as exc:
            raise InputError(f"data file is empty: {path}", "pass a file with a header row and data rows") from exc
        except (pd.errors.ParserError, ValueError) as exc:
            raise InputError(f"cannot parse {path} as CSV: {first_line(exc)}",
                             "check quoting and delimiters") from exc
        sha = stream.finish()
    frame.columns = [str(c).strip() for c in frame.columns]
    return frame, sha


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
