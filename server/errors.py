"""Errors that carry a message for the user, shared by the CLI, the store and the web."""


class InputError(ValueError):
    """Bad input: ``field`` names where (a dotted/indexed path), ``problem`` says what.

    The CLI prints ``field: problem`` on one line and exits 2; the web answers 4xx with it.
    """

    def __init__(self, field: str, problem: str):
        self.field = field
        self.problem = problem
        super().__init__(f"{field}: {problem}" if field else problem)


class OptionNeededError(InputError):
    """Bad input that one of a file reader's options resolves; ``option`` is that option's
    keyword argument (``"repair"`` for ``repair=True``), so each caller can name its own
    control for it (the command line a flag, a web form a field). The message stays neutral."""

    def __init__(self, field: str, problem: str, option: str):
        super().__init__(field, problem)
        self.option = option
