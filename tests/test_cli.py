"""The command line: exit codes, messages and outputs, error paths included."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pandas as pd
from typer.testing import CliRunner

from screening.cli import EXIT_NOTHING_SCREENED, EXIT_OK, EXIT_SOME_REJECTED, app
from screening.pipeline import RESULT_COLUMNS
from tests.conftest import worked_wall

ROOT = Path(__file__).resolve().parents[1]
SAMPLE = ROOT / "sample_inventory"
runner = CliRunner()


def _csv(tmp_path: Path, rows: list[dict], name: str = "register.csv") -> Path:
    path = tmp_path / name
    pd.DataFrame(rows).to_csv(path, index=False)
    return path


def test_run_clean_register_exit_0(tmp_path: Path) -> None:
    reg = _csv(tmp_path, [worked_wall("A", 2.0), worked_wall("B", 1.5, drainage="working")])
    result = runner.invoke(app, ["run", str(reg), "--out", str(tmp_path / "out")])
    assert result.exit_code == EXIT_OK, result.output
    results = pd.read_csv(tmp_path / "out" / "results.csv")
    assert list(results.columns) == list(RESULT_COLUMNS)
    walls = pd.read_csv(tmp_path / "out" / "walls.csv")
    assert {
        "wall_id",
        "worst_case",
        "governing_check",
        "utilisation",
        "margin",
        "rank",
        "outside_middle_third",
        "over_allowable_bearing",
    } <= set(walls.columns)
    assert sorted(walls["rank"]) == [1, 2]
    assert "qualified engineer" in result.output


def test_run_with_rejected_rows_exit_1_and_good_rows_screened(tmp_path: Path) -> None:
    reg = _csv(tmp_path, [worked_wall("A", 2.0), worked_wall("BAD", 2.0, top_width_m=3.0)])
    result = runner.invoke(app, ["run", str(reg), "--out", str(tmp_path / "out")])
    assert result.exit_code == EXIT_SOME_REJECTED
    assert "BAD" in result.output
    walls = pd.read_csv(tmp_path / "out" / "walls.csv")
    assert list(walls.wall_id) == ["A"]
    problems = pd.read_csv(tmp_path / "out" / "problems.csv")
    assert problems.loc[0, "row"] == 3 and problems.loc[0, "column"] == "base_width_m"


def test_missing_file_exit_2_without_traceback(tmp_path: Path) -> None:
    result = runner.invoke(app, ["run", str(tmp_path / "nope.csv")])
    assert result.exit_code == EXIT_NOTHING_SCREENED
    assert "no such file" in result.output
    assert "Traceback" not in result.output


def test_missing_required_column_suggests_a_name(tmp_path: Path) -> None:
    reg = _csv(tmp_path, [{"wall_id": "A", "hieght_m": 3, "base_width_m": 2, "top_width_m": 1}])
    result = runner.invoke(app, ["run", str(reg), "--out", str(tmp_path / "o")])
    assert result.exit_code == EXIT_NOTHING_SCREENED
    assert "height_m" in result.output and "hieght_m" in result.output


def test_no_usable_rows_exit_2(tmp_path: Path) -> None:
    reg = _csv(tmp_path, [worked_wall("BAD", 2.0, top_width_m=3.0)])
    result = runner.invoke(app, ["run", str(reg), "--out", str(tmp_path / "o")])
    assert result.exit_code == EXIT_NOTHING_SCREENED


def test_config_file_changes_required_factors(tmp_path: Path) -> None:
    reg = _csv(tmp_path, [worked_wall("A", 1.5, drainage="working")])
    cfg = tmp_path / "c.toml"
    cfg.write_text("fos_sliding_required = 3.0\nuplift = false\n")
    runner.invoke(app, ["run", str(reg), "--out", str(tmp_path / "a")])
    runner.invoke(app, ["run", str(reg), "--out", str(tmp_path / "b"), "--config", str(cfg)])
    a = pd.read_csv(tmp_path / "a" / "results.csv")
    b = pd.read_csv(tmp_path / "b" / "results.csv")
    assert (b.sliding_utilisation.iloc[0] / a.sliding_utilisation.iloc[0]) == 2.0
    assert b.uplift_kn_m.max() == 0.0


def test_unknown_config_key_is_an_error(tmp_path: Path) -> None:
    reg = _csv(tmp_path, [worked_wall("A", 2.0)])
    cfg = tmp_path / "c.toml"
    cfg.write_text("fos_sliding = 3.0\n")
    result = runner.invoke(app, ["run", str(reg), "--config", str(cfg), "--out", str(tmp_path / "o")])
    assert result.exit_code == EXIT_NOTHING_SCREENED
    assert "unknown setting 'fos_sliding'" in result.output


def test_sample_register_with_mapping(tmp_path: Path) -> None:
    reg = SAMPLE / "register_2026.xlsx"
    before = reg.read_bytes()
    result = runner.invoke(
        app, ["run", str(reg), "--mapping", str(SAMPLE / "mapping.toml"), "--out", str(tmp_path / "o")]
    )
    # the sample carries a handful of deliberate mistakes
    assert result.exit_code == EXIT_SOME_REJECTED, result.output
    problems = pd.read_csv(tmp_path / "o" / "problems.csv")
    errors = problems[problems.severity == "error"]
    assert {"HV-017", "HV-044", "HV-081", "HV-095", "HV-063"} <= set(errors.wall_id)
    assert "approx 1800" in set(errors.value)
    assert reg.read_bytes() == before  # the input is never modified


def test_python_dash_m_runs_the_same_cli() -> None:
    out = subprocess.run([sys.executable, "-m", "screening", "--version"], capture_output=True, text=True)
    assert out.returncode == 0 and "wallscreen" in out.stdout


def test_register_text_is_printed_literally(tmp_path: Path) -> None:
    # rich markup in a register must not be interpreted by the terminal output
    reg = _csv(tmp_path, [worked_wall("[bold]X[/bold]", 2.0, top_width_m=3.0), worked_wall("OK", 2.0)])
    result = runner.invoke(app, ["check", str(reg)])
    assert "[bold]X[/bold]" in result.output
    result = runner.invoke(app, ["run", str(tmp_path / "[red]missing.csv")])
    assert "[red]missing.csv" in result.output
