"""Named errors raised by the altox library; the CLI turns them into one message and exit status 2."""

from __future__ import annotations


class AltoxError(ValueError):
    """Base class of every error altox raises on purpose for bad input.

    Attributes
    ----------
    field : str or None
        The option or plan field at fault (``"--altitude"``, ``"days[3].sleep"``).
    value : object
        The offending value, as the user wrote it where possible.
    expected : str or None
        What would have been accepted.
    """

    def __init__(self, message: str, *, field: str | None = None, value=None,
                 expected: str | None = None):
        super().__init__(message)
        self.message = message
        self.field = field
        self.value = value
        self.expected = expected

    def __str__(self) -> str:  # pragma: no cover - trivial
        return self.message


class UnitError(AltoxError):
    """A quantity whose unit is missing, unknown or of the wrong kind."""


class OutOfRangeError(AltoxError):
    """A value outside the validity range of a model or of physical sense."""


class ProfileError(AltoxError):
    """A plan file that cannot be read or does not follow the plan format.

    Carries ``path``, ``line`` and ``column`` (1-based) where known.
    """

    def __init__(self, message: str, *, path: str | None = None, line: int | None = None,
                 column: int | None = None, field: str | None = None, value=None,
                 expected: str | None = None):
        super().__init__(message, field=field, value=value, expected=expected)
        self.path = path
        self.line = line
        self.column = column

    def location(self) -> str:
        parts = [self.path or "<plan>"]
        if self.line is not None:
            parts.append(str(self.line))
            if self.column is not None:
                parts.append(str(self.column))
        return ":".join(parts)
