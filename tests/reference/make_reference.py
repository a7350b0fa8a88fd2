"""Write the before/after references of issue #18 (``tests/test_values_kept.py``).

``python -m tests.reference.make_reference`` screens the sample register (``register_2026.xlsx``
as the demo loads it, with the 2025 survey in the history) and a seeded random register of 10^4
walls with blanks (``random_register``), and stores ``results``, ``walls`` and the assumptions as
one fact per row (wall, column, value, source) in gzipped CSV, numbers at 6 significant figures.
Written by commit bf104e0, before the speed work; regenerate it only where a change of the
results is intended (say so in the commit).
"""

from __future__ import annotations

import tempfile
from pathlib import Path

import numpy as np
import pandas as pd

from benchmarks.run import synthetic_register

HERE = Path(__file__).parent
DIGITS = 6
"""Significant figures of the numbers in the references (and of the CSV outputs)."""
BLANKED = (
    "material",
    "foundation",
    "drainage",
    "retained_height_m",
    "condition_rating",
    "consequence",
    "front_batter_m",
    "lean_deg",
)


def random_register(n: int = 10_000, seed: int = 18) -> pd.DataFrame:
    """``benchmarks.synthetic_register`` with a seeded fifth of some cells blank (defaults used),
    measured water on a tenth of the walls and Annex D bearing on another tenth."""
    frame = synthetic_register(n, seed)
    rng = np.random.default_rng(seed + 1)
    for col in BLANKED:
        frame[col] = frame[col].astype(object).where(rng.random(n) >= 0.2, None)
    water = rng.random(n) < 0.1
    retained = pd.to_numeric(frame["retained_height_m"]).fillna(frame["height_m"])
    frame["water_height_m"] = np.where(water, retained * rng.uniform(0, 1, n), np.nan)
    frame["foundation_friction_deg"] = np.where(rng.random(n) < 0.1, rng.uniform(25, 40, n), np.nan)
    return frame


def _before():  # type: ignore[no-untyped-def]
    from screening.config import Config

    return Config(samples=0)  # the references predate the probabilities (issue #14): off


BEFORE = _before()


def sample_job():  # type: ignore[no-untyped-def]
    """The 2026 sample survey screened with the 2025 survey in a fresh history (as the demo)."""
    from screening.demo import sample_paths
    from screening.job import record_history, screen_file

    with tempfile.TemporaryDirectory() as tmp:
        history = Path(tmp) / "history.gpkg"
        first, mapping = sample_paths(2025)
        record_history(screen_file(first, mapping=mapping, history=history, config=BEFORE))
        register, mapping = sample_paths(2026)
        return screen_file(register, mapping=mapping, history=history, config=BEFORE)


def random_job():  # type: ignore[no-untyped-def]
    from screening.job import screen_file

    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "random.csv"
        random_register().to_csv(path, index=False)
        return screen_file(path, config=BEFORE)


def rounded(frame: pd.DataFrame) -> pd.DataFrame:
    """Numbers to 6 significant figures (inf kept), everything else as text."""
    out = pd.DataFrame(index=frame.index)
    for col in frame.columns:
        values = frame[col]
        if pd.api.types.is_bool_dtype(values) or not pd.api.types.is_numeric_dtype(values):
            out[col] = values.astype(object).where(values.notna(), "").astype(str)
        else:
            v = values.to_numpy(dtype=float)
            out[col] = np.where(np.isnan(v), "", np.char.mod(f"%.{DIGITS}g", v))
    return out


def facts(assumptions: pd.DataFrame) -> pd.DataFrame:
    """The assumptions one fact per row (the long form: wall, row, column, value, source), in a
    fixed order."""
    cols = ["wall_id", "row", "column", "value", "source"]
    out = assumptions[cols].copy()
    for col in cols:
        out[col] = out[col].astype(object)
    value = pd.to_numeric(out["value"], errors="coerce")
    text = out["value"].astype(str)
    out["value"] = np.where(value.notna(), [f"%.{DIGITS}g" % v for v in value.fillna(0)], text)
    out = out.astype(str)
    return out.sort_values(cols, kind="stable").reset_index(drop=True)


def tables(job) -> dict[str, pd.DataFrame]:  # type: ignore[no-untyped-def]
    from screening.pipeline import RESULT_COLUMNS

    run = job.screening
    return {
        "results": rounded(run.results.reindex(columns=list(RESULT_COLUMNS)).reset_index(drop=True)),
        "walls": rounded(job.walls.reset_index(drop=True)),
        "assumptions": facts(run.prepared.assumptions.long()),
    }


def main() -> None:
    for name, job in (("sample", sample_job()), ("random", random_job())):
        for table, frame in tables(job).items():
            frame.to_csv(HERE / f"{name}_{table}.csv.gz", index=False)


if __name__ == "__main__":
    main()
