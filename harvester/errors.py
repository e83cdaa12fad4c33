"""Errors that carry a one-line message for the user (exit code 2 at the command line)."""


class CaseError(ValueError):
    """Bad input: names the file, the key, the value and what would be accepted."""

    def __init__(self, message: str, *, file: str | None = None, key: str | None = None):
        self.file = file
        self.key = key
        where = ": ".join(p for p in (file, key) if p)
        super().__init__(f"{where}: {message}" if where else message)


class UntrustedResult(RuntimeError):
    """A numerical result the tool cannot vouch for (diverged trajectory, fit out of range)."""
