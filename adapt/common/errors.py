"""User-facing error types.

The CLI turns any ``UserError`` into one line on stderr and exit code 2. Library code raises them for bad
user input (config values, input files); broken internal invariants raise ``RuntimeError`` instead.
"""

from __future__ import annotations


class UserError(ValueError):
    """A problem the user can fix; the message names the key or file, the problem and the fix."""


class ConfigError(UserError):
    """One or more config values are invalid."""


class InputError(UserError):
    """An input file or folder cannot be used."""


class Problems:
    """Collects every problem found while validating, so the user sees them all at once."""

    def __init__(self) -> None:
        self.messages: list[str] = []

    def add(self, message: str) -> None:
        self.messages.append(message)

    def check(self, ok: bool, message: str) -> None:
        if not ok:
            self.add(message)

    def raise_if_any(self, error_type: type[UserError] = ConfigError) -> None:
        if self.messages:
            raise error_type("; ".join(self.messages))
