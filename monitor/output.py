"""Writing frames as a text table, CSV or JSON (to a file or stdout)."""

from __future__ import annotations

import contextlib
import io
import json
import math
from pathlib import Path

import pandas as pd


def to_text(frame: pd.DataFrame, fmt: str) -> str:
    if fmt == "csv":
        buf = io.StringIO()
        frame.to_csv(buf, index=False, lineterminator="\n")
        return buf.getvalue()
    if fmt == "json":
        records = [
            {k: _jsonable(v) for k, v in row.items()} for row in frame.to_dict(orient="records")
        ]
        return json.dumps(records, indent=1, ensure_ascii=False) + "\n"
    if fmt == "table":
        if frame.empty:
            return "(none)\n"
        return frame.to_string(index=False) + "\n"
    raise ValueError(fmt)


def _jsonable(value):
    if value is None:
        return None
    if isinstance(value, float) and math.isnan(value):
        return None
    if hasattr(value, "item"):
        value = value.item()
        if isinstance(value, float) and math.isnan(value):
            return None
    if value is pd.NA:
        return None
    return value


def write(text: str, out: Path | None) -> None:
    if out is None:
        import click

        click.echo(text, nl=False)
        return
    from monitor.errors import UsageError

    if out.is_dir():
        raise UsageError(f"{out}: is a folder; give a file name for --out")
    if not out.parent.is_dir():
        state = "is not a folder" if out.parent.exists() else "does not exist"
        raise UsageError(f"{out}: the folder {out.parent} {state}; create it first or choose another --out")
    tmp = out.with_name(out.name + ".tmp")
    try:
        tmp.write_text(text, encoding="utf-8")
        tmp.replace(out)
    except OSError as exc:
        with contextlib.suppress(OSError):  # the error below is what the user needs to see
            tmp.unlink(missing_ok=True)
        raise UsageError(f"{out}: cannot write ({exc.strerror or exc})") from None
