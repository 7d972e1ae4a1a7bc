"""Where a build may write: a build replaces its output folder entirely, so only a folder that
is new, empty, the workspace's own public/, or an earlier build (marked) may be the output."""

from __future__ import annotations

from pathlib import Path

from conftest import BASE_ROWS, long_csv
from monitor.publish.build import MARKER


def _files(folder: Path) -> dict[str, bytes]:
    """Every file's bytes (the store's WAL index aside: opening the store rewrites it)."""
    return {p.relative_to(folder).as_posix(): p.read_bytes() for p in folder.rglob("*")
            if p.is_file() and not p.name.endswith("-shm")}


def test_publish_refuses_the_workspace_folder_and_keeps_the_store(lf):
    lf("load", lf.write("base.csv", long_csv(BASE_ROWS)))
    before, store = _files(lf.root), lf.dump()
    result = lf("publish", "--out", str(lf.root), code=2)
    assert "holds the store" in result.output
    assert _files(lf.root) == before and lf.dump() == store


def test_publish_refuses_a_folder_it_did_not_make(lf, tmp_path):
    notes = tmp_path / "notes"
    notes.mkdir()
    (notes / "notes.txt").write_text("mine", encoding="utf-8")
    result = lf("publish", "--out", str(notes), code=2)
    assert "not made by levelfield publish" in result.output
    assert _files(notes) == {"notes.txt": b"mine"}


def test_publish_into_a_new_folder_then_again_into_its_own_build(lf, tmp_path):
    lf("load", lf.write("base.csv", long_csv(BASE_ROWS)))
    out = tmp_path / "site"
    lf("publish", "--out", str(out))
    assert (out / MARKER).is_file() and (out / "index.html").is_file()
    (out / "stray.txt").write_text("left by hand", encoding="utf-8")
    lf("publish", "--out", str(out))  # an earlier build may be replaced, strays with it
    assert not (out / "stray.txt").exists() and (out / "index.html").is_file()


def test_the_workspace_public_folder_is_replaced_even_without_the_marker(lf):
    lf("load", lf.write("base.csv", long_csv(BASE_ROWS)))
    public = lf.root / "public"
    (public / "index.html").write_text("a build made before the marker existed", encoding="utf-8")
    lf("publish")
    assert (public / MARKER).is_file()
    assert "a build made before" not in (public / "index.html").read_text(encoding="utf-8")
