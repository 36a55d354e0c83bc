"""Errors that carry a message for the user, shared by the CLI, the store and the web."""


class InputError(ValueError):
    """Bad input: ``field`` names where (a dotted/indexed path), ``problem`` says what.

    The CLI prints ``field: problem`` on one line and exits 2; the web answers 4xx with it.
    """

    def __init__(self, field: str, problem: str):
        self.field = field
        self.problem = problem
        super().__init__(f"{field}: {problem}" if field else problem)
