"""What a new user tripped on: each test here failed before its fix."""

from __future__ import annotations

from pathlib import Path

import pandas as pd
import pytest
from typer.testing import CliRunner

from screening.cli import EXIT_NOTHING_SCREENED, app, plural, print_changes
from screening.history import compare
from tests.conftest import worked_wall

runner = CliRunner()


def _csv(tmp_path: Path, rows: list[dict], name: str = "register.csv") -> Path:
    path = tmp_path / name
    pd.DataFrame(rows).to_csv(path, index=False)
    return path


@pytest.mark.parametrize("command", ["run", "explain", "demo", "map", "template", "check"])
def test_help_shows_no_type_beside_flags(command: str) -> None:
    result = runner.invoke(app, [command, "--help"])
    assert result.exit_code == 0
    assert "<bool>" not in result.output


def test_plurals() -> None:
    assert plural(1, "warning") == "1 warning"
    assert plural(2, "warning") == "2 warnings"
    assert plural(0, "wall") == "0 walls"


def test_summary_words_counts_in_the_right_number(tmp_path: Path) -> None:
    reg = _csv(tmp_path, [worked_wall("A", 2.0)])
    result = runner.invoke(app, ["run", str(reg), "--out", str(tmp_path / "o"), "--no-history"])
    assert "1 wall screened" in result.output
    assert "0 rows rejected" in result.output
    assert "wall(s)" not in result.output and "1 walls" not in result.output
    # the table lists the top of the ranking whatever the band: its title says so
    assert "Inspect first (top" not in result.output
    assert "Top of the ranking (1 of 1 wall" in result.output


def test_template_refuses_to_overwrite_without_force(tmp_path: Path) -> None:
    target = tmp_path / "register.xlsx"
    target.write_bytes(b"the user's own work")
    result = runner.invoke(app, ["template", str(target)])
    assert result.exit_code == EXIT_NOTHING_SCREENED
    assert "--force" in result.output
    assert target.read_bytes() == b"the user's own work"
    result = runner.invoke(app, ["template", str(target), "--force"])
    assert result.exit_code == 0, result.output
    assert target.read_bytes()[:2] == b"PK"  # now an .xlsx (a zip)


@pytest.mark.parametrize("command", ["run", "demo"])
def test_bad_map_assets_dir_fails_before_any_work(tmp_path: Path, command: str) -> None:
    empty = tmp_path / "assets"
    empty.mkdir()
    out = tmp_path / "out"
    args = [command]
    if command == "run":
        args.append(str(_csv(tmp_path, [worked_wall("A", 2.0)])))
    result = runner.invoke(app, [*args, "--out", str(out), "--map-assets-dir", str(empty)])
    assert result.exit_code == EXIT_NOTHING_SCREENED
    assert "leaflet.js" in result.output and "Traceback" not in result.output
    assert len(result.output.strip().splitlines()) == 1
    assert not out.exists()  # nothing written


def test_tile_template_without_placeholders_is_refused(tmp_path: Path) -> None:
    reg = _csv(tmp_path, [worked_wall("A", 2.0)])
    out = tmp_path / "out"
    result = runner.invoke(
        app, ["run", str(reg), "--out", str(out), "--map-tiles", "https://tiles.example/x.png"]
    )
    assert result.exit_code == EXIT_NOTHING_SCREENED and "{z}" in result.output
    assert not out.exists()


def _walls(lean: float, band: str, n: int = 1) -> pd.DataFrame:
    return pd.DataFrame(
        {
            "wall_id": [f"W{k}" for k in range(n)],
            "lean_deg": lean,
            "priority_band": band,
            "utilisation": 0.5,
            "rank": range(1, n + 1),
        }
    )


def test_changes_speak_the_users_words_at_the_inputs_precision() -> None:
    before, after = _walls(1.04, "routine"), _walls(2.36, "inspect_soon")
    changes = compare(before, after)
    row = changes.iloc[0]
    assert row["priority_band_before"] == "Routine inspection"
    assert row["priority_band_after"] == "Inspect soon"
    assert "lean_deg: 1 → 2.4" in row["inputs_changed"]
    from screening.history import describe_change

    assert "band Routine inspection → Inspect soon" in describe_change(row)


def test_the_terminal_says_how_many_changes_it_left_out(capsys: pytest.CaptureFixture[str]) -> None:
    changes = compare(_walls(1.0, "routine", n=8), _walls(2.0, "routine", n=8))
    print_changes(changes, limit=6)
    out = capsys.readouterr().out
    assert "changed 8" in out
    assert "… 2 more in changes.csv" in out


def test_explain_finds_ids_case_insensitively(tmp_path: Path) -> None:
    reg = _csv(tmp_path, [worked_wall("HV-7", 2.0)])
    result = runner.invoke(app, ["explain", str(reg), "hv-7", "--out", str(tmp_path / "o")])
    assert result.exit_code == 0, result.output
    assert "HV-7" in result.output


def test_explain_names_ids_that_differ_only_by_case(tmp_path: Path) -> None:
    reg = _csv(tmp_path, [worked_wall("W1", 2.0), worked_wall("w1", 2.0)])
    result = runner.invoke(app, ["explain", str(reg), "W1", "--out", str(tmp_path / "o")])
    assert result.exit_code == 0  # exact match wins
    result = runner.invoke(app, ["explain", str(reg), "w1", "--out", str(tmp_path / "o")])
    assert result.exit_code == 0  # and so does "w1"
    reg2 = _csv(tmp_path, [worked_wall("Ab", 2.0), worked_wall("aB", 2.0)], name="r2.csv")
    result = runner.invoke(app, ["explain", str(reg2), "AB", "--out", str(tmp_path / "o2")])
    assert result.exit_code == EXIT_NOTHING_SCREENED
    assert "Ab" in result.output and "aB" in result.output and "differ only by case" in result.output


def _problems(rows: list[dict]) -> pd.DataFrame:
    from screening import evaluate

    return evaluate(pd.DataFrame(rows)).problems


def test_messages_carry_the_numbers_needed_to_fix_the_row() -> None:
    problems = _problems([worked_wall("A", 2.0, height_m=3.1, retained_height_m=3.4)])
    message = problems.loc[problems["column"] == "retained_height_m", "message"].iloc[0]
    assert "retained height 3.4 m above the wall height 3.1 m" in message


def test_duplicate_id_message_names_the_first_row() -> None:
    problems = _problems([worked_wall("A", 2.0), worked_wall("B", 2.0), worked_wall("A", 1.5)])
    dup = problems[problems["column"] == "wall_id"]
    assert list(dup["row"]) == [4]
    assert "also on row 2" in dup["message"].iloc[0]


def test_a_zero_height_does_not_suggest_millimetres() -> None:
    problems = _problems([worked_wall("Z", 2.0, height_m=0.0), worked_wall("S", 2.0, height_m=0.004)])
    by_wall = problems.set_index("wall_id")["message"]
    assert "millimetres" not in by_wall["Z"] and "above 0 m" in by_wall["Z"]
    assert "millimetres" in by_wall["S"]


def test_nothing_user_facing_names_a_development_file() -> None:
    from screening import evaluate

    walls = [
        {"wall_id": "A", "height_m": 3.0, "base_width_m": 2.0, "top_width_m": 0.6},
        {
            "wall_id": "B",
            "height_m": 3.0,
            "base_width_m": 2.0,
            "top_width_m": 0.6,
            "wall_unit_weight_kn_m3": 21.0,
        },
    ]
    run = evaluate(pd.DataFrame(walls))
    for text in run.prepared.assumptions.long()["source"].astype(str):
        assert "shared/" not in text and ".md" not in text, text


def test_a_height_of_millimetres_given_as_metres_is_not_shown_as_zero() -> None:
    # a 4 mm "height" beside a 5.3 m retained height: the message must show 0.004 m, not 0 m
    problems = _problems([worked_wall("T", 2.0, height_m=0.004, retained_height_m=5.3)])
    messages = " ".join(problems.loc[problems["wall_id"] == "T", "message"])
    assert "wall height 0 m" not in messages
    assert "0.004" in messages
