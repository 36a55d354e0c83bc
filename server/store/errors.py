"""Errors raised by the store; each carries one plain sentence for the user."""


# Names are the store's public API (others code against them), hence no "Error" suffix.


class StoreError(Exception):
    """Base class: something the store refused to do, with a message a user can read."""

    def __init__(self, message: str):
        self.message = message
        super().__init__(message)


class ProjectNotFound(StoreError):  # noqa: N818
    """No project with that id."""


class ProjectDeleted(ProjectNotFound):
    """The project is in the bin: it can be read and restored, not changed."""


class StaleRevision(StoreError):  # noqa: N818
    """Optimistic concurrency: the project moved on since the caller read it."""

    def __init__(self, current: int, expected: int):
        self.current = current
        self.expected = expected
        super().__init__(
            f"the project changed since you opened it (revision {current}, you had {expected}); "
            "reload and re-apply your edit"
        )


class NothingToUndo(StoreError):  # noqa: N818
    """Undo asked for at the start of the undo chain."""


class RevisionNotFound(StoreError):  # noqa: N818
    """No revision with that number in the project."""


class JobNotFound(StoreError):  # noqa: N818
    """No job with that id."""
