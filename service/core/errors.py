"""Domain errors raised by the numeric core.

Every error names the field it is about (a path relative to the request, such as ``c``,
``q[5]`` or ``lives[3].age``), and a message that says what value was given and what is
allowed. The HTTP layer turns them into problem+json answers; the core never picks a status.
"""

from __future__ import annotations


class DomainError(ValueError):
    """A value outside the domain of a basis or a quantity.

    ``field`` is a path relative to the object being checked: the HTTP layer prefixes it
    with the location of that object in the request (``$.basis.`` or ``$.``).
    """

    def __init__(self, field: str, message: str):
        super().__init__(f"{field}: {message}" if field else message)
        self.field = field
        self.message = message

    def within(self, prefix: str) -> "DomainError":
        """The same error with its field placed under ``prefix`` (e.g. ``base``)."""
        if not prefix:
            return self
        if not self.field:
            field = prefix
        elif self.field.startswith("["):
            field = prefix + self.field
        else:
            field = f"{prefix}.{self.field}"
        return type(self)(field, self.message)


class ComputationLimitError(DomainError):
    """A basis that is valid but cannot be computed within the service's bounds.

    For example a law whose lives would survive for tens of thousands of years: the
    service answers with a clear error rather than tying up a worker.
    """


def fmt(value: float) -> str:
    """A number as it should appear in an error message: shortest round-trip form."""
    return repr(float(value)) if not isinstance(value, int) else str(value)
