"""The output folder under kill -9 and concurrent runs: complete (manifest matches) or recognisably not.

Real subprocesses of ``python -m screening run`` on tests/corpus/good.csv. Common practice, no source:
an output is complete only when its manifest, written last, matches every file.
"""

from __future__ import annotations

import fcntl
import hashlib
import os
import shutil
import signal
import subprocess
import sys
import time
from pathlib import Path

from screening.errors import ScreeningError
from screening.io.outfolder import LOCK_NAME, refuse_incomplete

ROOT = Path(__file__).resolve().parents[1]
GOOD = ROOT / "tests" / "corpus" / "good.csv"


def _cmd(register: Path, out: Path, *extra: str) -> list[str]:
    return [
        sys.executable,
        "-m",
        "screening",
        "run",
        str(register),
        "--out",
        str(out),
        "--no-history",
        *extra,
    ]


def _run(register: Path, out: Path, *extra: str) -> subprocess.CompletedProcess[str]:
    return subprocess.run(_cmd(register, out, *extra), cwd=ROOT, capture_output=True, text=True, timeout=120)


def _digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def _parts(out: Path) -> list[Path]:
    return [p for p in out.rglob(".*.part*")]


def _complete_or_refused(out: Path) -> str:
    try:
        refuse_incomplete(out)
    except ScreeningError as exc:
        assert "did not finish" in str(exc)
        shown = subprocess.run(
            [sys.executable, "-m", "screening", "map", str(out)], cwd=ROOT, capture_output=True, text=True
        )
        assert shown.returncode == 2 and "did not finish" in shown.stderr, shown.stderr
        return "incomplete"
    assert (out / "manifest.json").exists()
    return "complete"


def test_kill_9_leaves_a_complete_or_a_recognisably_incomplete_folder(tmp_path: Path) -> None:
    register = tmp_path / "good.csv"
    shutil.copy(GOOD, register)
    before = _digest(register)
    out = tmp_path / "out"
    first = _run(register, out, "--sheets")
    assert first.returncode == 0, first.stderr
    (out / "sheets" / "GONE-1.html").write_text("a wall no longer in the register", encoding="utf-8")
    for delay in (0.5, 2.0, 3.0, 3.8):
        proc = subprocess.Popen(
            _cmd(register, out, "--sheets"), cwd=ROOT, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL
        )
        time.sleep(delay)
        os.kill(proc.pid, signal.SIGKILL)
        proc.wait()
        assert _complete_or_refused(out) in {"complete", "incomplete"}
        assert _digest(register) == before
    again = _run(register, out, "--sheets")
    assert again.returncode == 0, again.stderr
    assert refuse_incomplete(out)["input_sha256"] == before
    assert _parts(out) == []
    assert not (out / "sheets" / "GONE-1.html").exists()
    assert _digest(register) == before


def test_a_second_run_into_a_locked_folder_fails_cleanly(tmp_path: Path) -> None:
    register = tmp_path / "good.csv"
    shutil.copy(GOOD, register)
    before = _digest(register)
    out = tmp_path / "out"
    assert _run(register, out).returncode == 0
    manifest = (out / "manifest.json").read_bytes()
    with open(out / LOCK_NAME, "a+b") as held:
        fcntl.flock(held.fileno(), fcntl.LOCK_EX | fcntl.LOCK_NB)  # another run holds the folder
        second = _run(register, out)
    assert second.returncode == 2, second.stderr
    assert "another wallscreen run is writing into this folder" in second.stderr
    assert str(out) in second.stderr.replace("\n", "")
    assert (out / "manifest.json").read_bytes() == manifest
    refuse_incomplete(out)
    assert _digest(register) == before


def test_two_concurrent_runs_into_one_folder_never_mix(tmp_path: Path) -> None:
    register = tmp_path / "good.csv"
    shutil.copy(GOOD, register)
    before = _digest(register)
    out = tmp_path / "out"
    procs = [
        subprocess.Popen(
            _cmd(register, out), cwd=ROOT, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True
        )
        for _ in range(2)
    ]
    codes = [p.wait(timeout=120) for p in procs]
    errors = [p.stderr.read() if p.stderr else "" for p in procs]
    for code, text in zip(codes, errors, strict=True):
        assert code == 0 or (code == 2 and "another wallscreen run" in text), text
    assert 0 in codes
    refuse_incomplete(out)  # the manifest matches the files: one run's outputs, not a mix
    assert _parts(out) == []
    assert _digest(register) == before
