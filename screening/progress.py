"""The progress callback type shared by the job layers (a step name in, nothing out)."""

from __future__ import annotations

from collections.abc import Callable

Progress = Callable[[str], None]
