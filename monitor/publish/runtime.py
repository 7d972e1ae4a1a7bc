"""The Vega / Vega-Lite / vega-embed runtime, one local JavaScript file, obtained at build time
from vl-convert-python (``vl_convert.javascript_bundle``) and written once into the output.

It is never committed and never fetched from a network: ``vl_convert`` carries the libraries.
Generating the bundle takes a few seconds, so a build reuses the copy already in the output
when its first line names the same versions, and a process keeps the bundle it made.
"""

from __future__ import annotations

import functools
from pathlib import Path

RUNTIME_PATH = "assets/vega-runtime.js"


def _versions() -> dict[str, str]:
    import altair as alt
    import vl_convert as vlc

    wanted = ".".join(alt.SCHEMA_VERSION.lstrip("v").split(".")[:2])
    available = vlc.get_vegalite_versions()
    return {"vega-lite": wanted if wanted in available else available[-1], "vega": vlc.get_vega_version(),
            "vega-embed": vlc.get_vega_embed_version(), "vl-convert": getattr(vlc, "__version__", "unknown")}


def header() -> str:
    v = _versions()
    return (f"/*! levelfield chart runtime: Vega {v['vega']}, Vega-Lite {v['vega-lite']}, vega-embed "
            f"{v['vega-embed']} (each BSD-3-Clause, Copyright the Vega Project / University of Washington "
            f"Interactive Data Lab), bundled by vl-convert-python {v['vl-convert']}. */\n")


@functools.lru_cache(maxsize=1)
def _bundle(head: str, vl_version: str) -> bytes:
    import vl_convert as vlc

    return (head + vlc.javascript_bundle(vl_version=vl_version) + "\n").encode("utf-8")


def vega_runtime(previous: Path | None = None) -> bytes:
    """The runtime's bytes; ``previous`` (the copy in the last build) is reused when current."""
    head = header()
    if previous is not None and previous.is_file():
        with previous.open("rb") as fh:
            first = fh.readline().decode("utf-8", "replace")
        if first == head:
            return previous.read_bytes()
    return _bundle(head, _versions()["vega-lite"])
