"""The one family of exceptions the tool raises for bad input or settings."""

from __future__ import annotations


class ScreeningError(Exception):
    """Base class: a problem the user can fix; the CLI prints it without a traceback."""


class ConfigError(ScreeningError):
    """The configuration file is unreadable or names an unknown setting."""


class RegisterError(ScreeningError):
    """The register cannot be screened at all (unreadable, no usable rows, columns missing)."""
