"""The one error a user sees for bad input: file, key, value and what is allowed."""


class ProblemError(Exception):
    """Bad input in a problem file or on the command line; str() is one line."""

    def __init__(self, source: str, key: str, value, reason: str):
        self.source = source
        self.key = key
        self.value = value
        self.reason = reason
        where = f"{source}: {key}" if key else source
        shown = "" if value is _NO_VALUE else f" = {value!r}"
        super().__init__(f"{where}{shown}: {reason}")


class _NoValue:
    def __repr__(self):
        return "<none>"


_NO_VALUE = _NoValue()
NO_VALUE = _NO_VALUE
