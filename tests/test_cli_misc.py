"""init, status, export results, help and exit codes."""

from __future__ import annotations

import csv
import io
import json

import pytest
from click.testing import CliRunner

from conftest import BASE_ROWS, long_csv, run_subprocess
from monitor.cli import main
from monitor.workspace import ENV_VAR, FOLDERS

EXPORT_COLUMNS = ["cycle", "state", "chamber", "district", "party", "candidate", "votes", "status", "load_id",
                  "special", "seats", "contest_status", "votes_a", "votes_b", "share_a", "winner", "runoff", "decides",
                  "position"]


def test_init_creates_the_workspace_once(tmp_path, monkeypatch):
    monkeypatch.delenv(ENV_VAR, raising=False)
    root = tmp_path / "fresh"
    first = CliRunner().invoke(main, ["--workspace", str(root), "init"])
    assert first.exit_code == 0, first.output
    for name in FOLDERS:
        assert (root / name).is_dir()
        assert f"created {root / name}" in first.stdout
    config = (root / "levelfield.toml").read_text(encoding="utf-8")
    assert "[parties.a]" in config and "[parties.b]" in config and config.lstrip().startswith("#")
    assert (root / "history.sqlite").exists()
    second = CliRunner().invoke(main, ["--workspace", str(root), "init"])
    assert second.exit_code == 0
    assert "already exists; nothing changed" in second.stdout
    assert (root / "levelfield.toml").read_text(encoding="utf-8") == config


def test_the_default_config_is_valid_and_loads(tmp_path, monkeypatch):
    monkeypatch.delenv(ENV_VAR, raising=False)
    root = tmp_path / "defaults"
    runner = CliRunner()
    assert runner.invoke(main, ["-w", str(root), "init"]).exit_code == 0
    data = tmp_path / "d.csv"
    data.write_text(long_csv([[2024, "QV", "federal", "1", "A", "Ann", 3], [2024, "QV", "federal", "1", "B", "Bo", 2]]))
    result = runner.invoke(main, ["-w", str(root), "load", str(data)])
    assert result.exit_code == 0, result.output


def test_the_workspace_comes_from_the_environment(tmp_path, monkeypatch):
    root = tmp_path / "from_env"
    monkeypatch.setenv(ENV_VAR, str(root))
    assert CliRunner().invoke(main, ["init"]).exit_code == 0
    assert (root / "levelfield.toml").exists()


def test_status_of_an_empty_store(lf):
    out = lf("status").stdout
    assert f"workspace {lf.root}" in out
    assert "schema version" in out
    assert "no results stored yet" in out
    assert "last loads (0 shown):" in out
    assert "inbox: 0 pending file(s)" in out


def test_status_after_loads(loaded):
    loaded("load", loaded.write("b.csv", long_csv([[2024, "RX", "state_lower", "4", "Upland", "Wil Tay", 7]])))
    recount = [r[:] for r in BASE_ROWS]
    recount[0][6] = 900
    loaded("load", loaded.write("recount.csv", long_csv(recount)))  # superseded rows are not counted
    (loaded.root / "inbox" / "next.csv").write_text("x", encoding="utf-8")
    out = loaded("status").stdout
    assert "chamber federal: 1 cycle(s), 2022" in out
    assert "chamber state_lower: 1 cycle(s), 2024" in out
    assert "states 2, current contests 4, vote lines 6" in out
    assert "last loads (3 shown):" in out
    assert "#3 " in out and "loaded: recount.csv" in out and "0 new / 1 corrected units" in out
    assert "#2 " in out and "loaded: b.csv" in out and "#1 " in out and "loaded: base.csv" in out
    assert "inbox: 1 pending file(s): next.csv" in out


def _export_csv(lf, *args) -> list[dict]:
    text = lf("export", "results", *args).stdout
    reader = csv.DictReader(io.StringIO(text))
    assert reader.fieldnames == EXPORT_COLUMNS
    return list(reader)


def test_export_results_csv_has_the_view_columns_then_the_reduction(loaded):
    rows = _export_csv(loaded)
    assert len(rows) == len(BASE_ROWS)
    d1 = [r for r in rows if r["district"] == "1"]
    assert {(r["party"], r["votes"]) for r in d1} == {("Harbour", "1200"), ("Upland", "1000")}
    assert {(r["contest_status"], r["votes_a"], r["votes_b"], r["winner"], r["status"], r["load_id"]) for r in d1} == {
        ("contested", "1200", "1000", "a", "certified", "1")}
    assert float(d1[0]["share_a"]) == pytest.approx(1200 / 2200)
    d3 = [r for r in rows if r["district"] == "3"]
    assert (d3[0]["contest_status"], d3[0]["votes_a"], d3[0]["votes_b"], d3[0]["winner"]) == ("uncontested", "0", "800", "b")


def test_export_results_json_to_a_file(loaded):
    out = loaded.files / "results.json"
    result = loaded("export", "results", "--format", "json", "--out", out)
    assert result.stdout == ""
    records = json.loads(out.read_text(encoding="utf-8"))
    assert len(records) == len(BASE_ROWS)
    assert list(records[0]) == EXPORT_COLUMNS
    assert all(isinstance(r["votes"], int) for r in records)


def test_export_shows_only_current_results(loaded):
    rows = [r[:] for r in BASE_ROWS]
    rows[0][6] = 900
    loaded("load", loaded.write("recount.csv", long_csv(rows)))
    exported = _export_csv(loaded)
    assert len(exported) == len(BASE_ROWS)
    assert {r["load_id"] for r in exported} == {"2"}
    assert [r["winner"] for r in exported if r["district"] == "1"] == ["b", "b"]


def test_export_of_an_empty_store_is_a_header(lf):
    assert lf("export", "results").stdout.strip() == ",".join(EXPORT_COLUMNS)


def test_an_unknown_export_format_is_a_usage_error(loaded):
    result = loaded("export", "results", "--format", "xml", code=2)
    assert "Invalid value for '--format'" in result.output


@pytest.mark.parametrize("args", [["--help"], ["init", "--help"], ["load", "--help"], ["status", "--help"],
                                  ["export", "--help"], ["export", "results", "--help"]])
def test_every_command_has_help(lf, args):
    result = lf(*args)
    assert result.stdout.startswith("Usage: ")
    assert len(result.stdout.splitlines()) > 3


def test_an_unknown_command_is_a_usage_error(lf):
    assert "No such command" in lf("publish-everything", code=2).output


def test_an_unknown_option_is_a_usage_error(lf):
    assert "No such option" in lf("load", "--fast", "x.csv", code=2).output


def test_python_dash_m_monitor_in_a_real_process(lf):
    help_ = run_subprocess(lf.root, "--help")
    assert help_.returncode == 0 and help_.stdout.startswith("Usage: ")
    usage = run_subprocess(lf.root, "no-such-command")
    assert usage.returncode == 2 and "No such command" in usage.stderr and "Traceback" not in usage.stderr



# --workspace after the command name ---------------------------------------------------------------

def test_the_workspace_option_works_before_and_after_the_command_name(tmp_path, monkeypatch):
    monkeypatch.delenv(ENV_VAR, raising=False)
    monkeypatch.chdir(tmp_path)  # a stray ./workspace would show here
    before, after = tmp_path / "before", tmp_path / "after"
    data = tmp_path / "d.csv"
    data.write_text(long_csv(BASE_ROWS), encoding="utf-8")
    runner = CliRunner()
    assert runner.invoke(main, ["-w", str(before), "load", str(data)]).exit_code == 0
    result = runner.invoke(main, ["load", str(data), "-w", str(after)])
    assert result.exit_code == 0, result.output
    assert "d.csv: loaded (load #1)" in result.stdout
    for root in (before, after):
        status = runner.invoke(main, ["status", "--workspace", str(root)])
        assert status.exit_code == 0, status.output
        assert f"workspace {root}" in status.stdout and "#1 " in status.stdout
        assert f"workspace {root}" in runner.invoke(main, ["-w", str(root), "status"]).stdout
    for args in (["export", "results", "-w", str(after)], ["export", "-w", str(after), "results"]):
        exported = runner.invoke(main, args)
        assert exported.exit_code == 0, exported.output
        assert len(list(csv.DictReader(io.StringIO(exported.stdout)))) == len(BASE_ROWS)
    assert not (tmp_path / "workspace").exists()


def test_the_workspace_after_the_command_wins_over_the_environment_and_the_group_option(tmp_path, monkeypatch):
    env, group, here = tmp_path / "env", tmp_path / "group", tmp_path / "here"
    monkeypatch.setenv(ENV_VAR, str(env))
    runner = CliRunner()
    assert f"workspace {env}" in runner.invoke(main, ["status"]).stdout
    assert f"workspace {here}" in runner.invoke(main, ["status", "-w", str(here)]).stdout
    assert f"workspace {here}" in runner.invoke(main, ["-w", str(group), "status", "-w", str(here)]).stdout
    assert f"workspace {group}" in runner.invoke(main, ["-w", str(group), "status"]).stdout


@pytest.mark.parametrize("command", [["init"], ["load"], ["status"], ["compute"], ["flags"], ["plans"], ["watch"],
                                     ["export"], ["export", "results"], ["export", "measures"], ["publish"],
                                     ["serve"]])
def test_every_command_shows_the_workspace_option_in_its_help(command):
    result = CliRunner().invoke(main, [*command, "--help"])
    assert result.exit_code == 0, result.output
    assert "-w, --workspace DIRECTORY" in result.stdout


# user mistakes are usage errors (exit 2) naming the path ------------------------------------------

def test_export_into_a_missing_folder_is_a_usage_error(loaded, tmp_path):
    target = tmp_path / "nonexistent" / "dir" / "x.csv"
    result = loaded("export", "results", "--out", target, code=2)
    assert f"error: {target}: the folder {target.parent} does not exist" in result.stderr
    assert not target.parent.exists()


def test_a_store_newer_than_the_code_is_a_usage_error(loaded):
    import sqlite3

    import store

    conn = sqlite3.connect(loaded.store_path)
    conn.execute("INSERT INTO schema_version VALUES (?, 'from the future', 'now')", [store.SCHEMA_VERSION + 1])
    conn.commit()
    conn.close()
    for args in (["status"], ["export", "results"], ["load", loaded.files / "base.csv"]):
        result = loaded(*args, code=2)
        assert f"error: {loaded.store_path}: the store is at schema version {store.SCHEMA_VERSION + 1}, newer " \
               "than this levelfield" in result.stderr


def test_a_folder_in_place_of_the_config_is_a_usage_error(lf):
    config = lf.root / "levelfield.toml"
    config.unlink()
    config.mkdir()
    for args in (["status"], ["load", lf.write("d.csv", long_csv(BASE_ROWS))], ["compute"]):
        result = lf(*args, code=2)
        assert f"error: {config}: is a folder; levelfield.toml must be a file" in result.stderr


def test_a_file_in_place_of_the_store_that_is_no_database_is_a_usage_error(lf):
    lf.store_path.write_bytes(b"not a database at all, just text " * 100)
    result = lf("status", code=2)
    assert f"error: {lf.store_path}: cannot open the store" in result.stderr


# a same-party general, end to end ----------------------------------------------------------------

def test_a_same_party_general_loads_and_exports_as_same_party(lf):
    rows = [[2024, "QV", "state_lower", "9", "Harbour", "Rhea Lund", "4,210"],
            [2024, "QV", "state_lower", "9", "Harbour-Lantern", "Sven Oak", "3,980"],
            [2024, "QV", "state_lower", "10", "Harbour", "Tam Ivo", 500],
            [2024, "QV", "state_lower", "10", "Upland", "Uma Pell", 450]]
    lf("load", lf.write("same.csv", long_csv(rows)))
    exported = [r for r in lf.export_rows() if r["district"] == "9"]
    assert len(exported) == 2
    assert {(r["contest_status"], r["votes_a"], r["votes_b"], r["winner"]) for r in exported} == {
        ("same_party", "8190", "0", "a")}
    assert lf.rows("SELECT district, status FROM contests ORDER BY district") == [
        ("10", "contested"), ("9", "same_party")]
