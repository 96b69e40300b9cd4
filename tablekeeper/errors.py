"""The exception hierarchy of tablekeeper.

One root, ``TablekeeperError``. Each concrete error also subclasses the matching builtin, keeps its
fields and builds its one-sentence message from them, so the faces can print ``str(error)`` and exit
with status 2 (bad input) without a traceback.
"""

from __future__ import annotations


class TablekeeperError(Exception):
    """Root of every error tablekeeper raises on purpose."""


class InputError(TablekeeperError, ValueError):
    """Bad input, located: file, record and field where known."""

    def __init__(self, reason: str, *, file: str | None = None, record: str | None = None,
                 field: str | None = None) -> None:
        self.reason = reason
        self.file = file
        self.record = record
        self.field = field
        super().__init__(self._message())

    def _message(self) -> str:
        where = []
        if self.file:
            where.append(str(self.file))
        if self.record:
            where.append(f"record {self.record}")
        if self.field:
            where.append(f"field {self.field}")
        prefix = ", ".join(where)
        return f"{prefix}: {self.reason}" if prefix else self.reason


class UnitError(InputError):
    """A unit that does not parse or does not fit the field's dimension."""


class FormulaError(InputError):
    """A chemical formula that does not parse."""


class IdentifierError(InputError):
    """An identifier that is not a safe slug."""


class NotFoundError(TablekeeperError, KeyError):
    """A named record does not exist."""

    def __init__(self, kind: str, ident: str) -> None:
        self.kind = kind
        self.ident = ident
        super().__init__(f"no {kind} named {ident!r}")

    def __str__(self) -> str:  # KeyError would quote the message
        return self.args[0]


class ConflictError(TablekeeperError):
    """Someone else saved the record first; both versions are kept in the error."""

    def __init__(self, target: str, expected: int, found: int, theirs: dict | None = None,
                 mine: dict | None = None) -> None:
        self.target = target
        self.expected = expected
        self.found = found
        self.theirs = theirs
        self.mine = mine
        super().__init__(
            f"{target}: changed by someone else (you loaded revision {expected}, the file is now at "
            f"revision {found}); reload and apply your change again")


class PermissionDenied(TablekeeperError, PermissionError):
    """The dataset's roles do not allow this user this action."""

    def __init__(self, user: str, action: str, roles: tuple[str, ...]) -> None:
        self.user = user
        self.action = action
        self.roles = roles
        super().__init__(f"user {user!r} may not {action}: the dataset gives that to the "
                         f"{' or '.join(roles)} role")


class ReleaseRefused(TablekeeperError):
    """The release gate refused (errors, blocking flags, version rules)."""


class DamagedFileError(InputError):
    """A file on disk that cannot be read as what it should be."""
