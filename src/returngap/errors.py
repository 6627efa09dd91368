"""One error type for bad input, printed as a single line."""


class InputError(Exception):
    """Bad or unreadable input: names the file and, where known, the line."""

    def __init__(self, file, message, line=None):
        self.file = str(file)
        self.message = " ".join(str(message).split())
        self.line = line
        super().__init__(str(self))

    def __reduce__(self):  # raised in a forked worker, re-raised in the parent
        return (InputError, (self.file, self.message, self.line))

    def __str__(self):
        where = self.file if self.line is None else f"{self.file}:{self.line}"
        return f"{where}: {self.message}"


class IncompleteError(InputError):
    """The board model is incomplete (see completeness.py): one line per problem."""

    def __init__(self, problems):
        self.problems = list(problems)
        first = self.problems[0] if self.problems else None
        super().__init__(
            first.file if first else "<board>",
            "; ".join(p.message for p in self.problems[:1]),
            first.line if first else None,
        )

    def __reduce__(self):
        return (IncompleteError, (self.problems,))

    def __str__(self):
        return "; ".join(str(p) for p in self.problems)
