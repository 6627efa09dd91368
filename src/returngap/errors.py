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
