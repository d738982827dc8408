"""The one exception type that reaches a person: a mistake they can fix, said in one line."""


class UserError(Exception):
    """A problem with the person's input or set-up; the CLI prints it on one line, exit 2."""


def one_line(text: object) -> str:
    """``str(text)`` with line breaks and other control characters escaped, so it stays one line
    (any object: an exception, a path)."""
    return "".join(ch if ch.isprintable() else repr(ch)[1:-1] for ch in str(text))
