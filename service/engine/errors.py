"""Exception classes raised by the engine.

Every class derives from :class:`EngineError`, which is also a ``ValueError``,
so a caller that only knows Python's built-ins still catches them. Each carries
the offending values as attributes so that the HTTP layer (``service.api``)
can put them in a problem-details body without parsing the message.
"""

from __future__ import annotations


class EngineError(ValueError):
    """Base class of every error the engine raises on bad input."""

    #: Short machine-readable name; the API maps it to a problem type.
    slug = "invalid-input"

    def __init__(self, message: str, *, field: str | None = None, **details):
        super().__init__(message)
        self.message = message
        self.field = field
        self.details = details

    def as_dict(self) -> dict:
        """The error's extension members: ``field`` plus any detail values."""
        out = {"field": self.field} if self.field is not None else {}
        out.update(self.details)
        return out


class InvalidLoadHistory(EngineError):
    """A load history cannot be counted (too short, not numeric, not finite).

    ``sample_index`` names the first offending sample where there is one.
    """

    slug = "invalid-load-history"

    def __init__(self, message: str, *, sample_index: int | None = None,
                 channel: str | None = None, field: str | None = "samples"):
        details = {}
        if sample_index is not None:
            details["sample_index"] = int(sample_index)
        if channel is not None:
            details["channel"] = channel
        super().__init__(message, field=field, **details)
        self.sample_index = sample_index
        self.channel = channel


class InvalidParameter(EngineError):
    """A numeric or categorical option is outside its admissible range."""

    slug = "invalid-parameter"

    def __init__(self, message: str, *, field: str, value=None, limit=None):
        details = {}
        if value is not None:
            details["value"] = value
        if limit is not None:
            details["limit"] = limit
        super().__init__(message, field=field, **details)
        self.value = value
        self.limit = limit


class UnknownMethod(EngineError):
    """A method or catalogue name is not one the engine knows.

    ``valid`` lists the names that would have been accepted.
    """

    slug = "unknown-method"

    def __init__(self, message: str, *, field: str, value, valid):
        super().__init__(message, field=field, value=value, valid=sorted(valid))
        self.value = value
        self.valid = sorted(valid)


class IncompatibleState(EngineError):
    """A continuation state does not belong to the counting it is passed to."""

    slug = "incompatible-state"


def unknown(field: str, value, valid) -> UnknownMethod:
    """Build an :class:`UnknownMethod` whose message lists the valid names."""
    valid = sorted(valid)
    return UnknownMethod(
        f"{field} {value!r} is not known; valid values: {', '.join(map(str, valid))}",
        field=field, value=value, valid=valid)
