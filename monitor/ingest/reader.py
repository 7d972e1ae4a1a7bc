"""Reading a file's bytes safely: checksum, gzip with a decompressed-size cap, decoding, CSV rows."""

from __future__ import annotations

import csv
import hashlib
import io
import zlib
from dataclasses import dataclass
from pathlib import Path
from typing import Iterator

from monitor.errors import DataError, Problem, UsageError
from monitor.ingest.fields import shown

GZIP_MAGIC = b"\x1f\x8b"


@dataclass(frozen=True)
class RawFile:
    path: Path
    name: str
    data: bytes  # the raw bytes as delivered
    sha256: str

    @property
    def size(self) -> int:
        return len(self.data)


def read_raw(path: Path) -> RawFile:
    data = path.read_bytes()
    return RawFile(path, path.name, data, hashlib.sha256(data).hexdigest())


def decompressed(raw: RawFile, max_bytes: int) -> bytes:
    """The file's content, gunzipped when it starts with the gzip magic; refuse past ``max_bytes``."""
    if not raw.data.startswith(GZIP_MAGIC):
        return raw.data
    out = bytearray()
    data = raw.data
    try:
        while data:
            stream = zlib.decompressobj(wbits=31)  # gzip member
            chunk = stream.decompress(data, max_bytes + 1 - len(out))
            while True:
                out += chunk
                if len(out) > max_bytes:
                    raise DataError(
                        [Problem(raw.name, None, None,
                                 f"gzip content is larger than the {max_bytes // 2**20} MB cap "
                                 "(load.max_decompressed_mb); refused")]
                    )
                if stream.eof or not stream.unconsumed_tail:
                    break
                chunk = stream.decompress(stream.unconsumed_tail, max_bytes + 1 - len(out))
            if not stream.eof:
                raise DataError([Problem(raw.name, None, None, "gzip file is truncated")])
            data = stream.unused_data  # concatenated members
            if data and not data.startswith(GZIP_MAGIC):
                break  # trailing garbage after the last member is ignored, as gzip(1) does
    except zlib.error as exc:
        raise DataError([Problem(raw.name, None, None, f"not a valid gzip file ({exc})")]) from None
    return bytes(out)


def decode(name: str, content: bytes, encoding: str | None, delimiter: str = ",") -> str:
    """Decode as UTF-8 (a BOM is fine) unless ``encoding`` is given; a bad byte names its row
    and column."""
    chosen = encoding or "utf-8-sig"
    try:
        text = content.decode(chosen)
    except LookupError:
        raise UsageError(f"unknown encoding {encoding!r} (try utf-8 or cp1252)") from None
    except UnicodeDecodeError as exc:
        row = content.count(b"\n", 0, exc.start) + 1
        column, column_name = _cell_at(content[:exc.start], exc.encoding, delimiter)
        hint = "" if encoding else "; if the file is in another encoding, pass --encoding (e.g. --encoding cp1252)"
        inside = f" (in column {column_name!r})" if column_name else ""
        raise DataError(
            [Problem(name, row, f"#{column}" if column else None,
                     f"byte 0x{content[exc.start]:02x}{inside} is not valid {chosen.replace('-sig', '')}{hint}")]
        ) from None
    text = text.removeprefix("\ufeff")  # a BOM is not part of the header, whatever the encoding
    if "\x00" in text:
        row = text.count("\n", 0, text.index("\x00")) + 1
        raise DataError([Problem(name, row, None, "contains NUL bytes: this is not a text CSV file")])
    return text


def _cell_at(before: bytes, encoding: str, delimiter: str) -> tuple[int | None, str]:
    """The 1-based field number of the cell that the bytes ``before`` end in (the cell where a
    bad byte sits), and that column's header name when the header could be read; ``(None, "")``
    when the prefix cannot be read as CSV."""
    try:
        text = before.decode(encoding).removeprefix("\ufeff")
    except (UnicodeDecodeError, LookupError):
        return None, ""
    # read the prefix as CSV; the last record is the one the bad byte interrupts (a trailing
    # sentinel keeps an empty last cell, and an open quote, from being lost)
    reader = csv.reader(io.StringIO(text + "\x00", newline=""), delimiter=delimiter)
    header: list[str] | None = None
    last: list[str] = []
    try:
        for cells in reader:
            if header is None:
                header = cells
            last = cells
    except csv.Error:
        return None, ""
    if not last:
        return None, ""
    column = len(last)
    name = ""
    if header is not None and last is not header and column <= len(header):
        name = shown(header[column - 1].strip())
    return column, name


def csv_rows(name: str, text: str, delimiter: str = ",") -> Iterator[tuple[int, list[str]]]:
    """Yield ``(row_number, cells)``; row numbers are physical lines (header = 1)."""
    reader = csv.reader(io.StringIO(text, newline=""), delimiter=delimiter, strict=True)
    start = 1
    try:
        for cells in reader:
            yield start, cells
            start = reader.line_num + 1
    except csv.Error as exc:
        raise DataError([Problem(name, reader.line_num or start, None, f"malformed CSV: {exc}")]) from None
