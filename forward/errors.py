"""Errors raised by the forward model."""


class ForwardModelError(ValueError):
    """A set-up the forward model cannot solve; the message says why and what would fix it."""


class IllPosedError(ForwardModelError):
    """The face conditions admit no unique steady state (e.g. no face fixes the temperature level)."""
