"""Errors raised by the statistics layer."""


class InverseError(ValueError):
    """Inputs the statistics layer cannot work with; the message says why and what would fix it."""


class StrengthError(InverseError):
    """No smoothing strength satisfies the requested rule; the message explains why."""
