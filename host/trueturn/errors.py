"""The one exception type that reaches a person: a mistake they can fix, said in one line."""


class UserError(Exception):
    """A problem with the person's input or set-up; the CLI prints it on one line, exit 2."""
