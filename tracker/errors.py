"""The one exception type that reaches the user as a single line (exit code 1)."""


class UserError(Exception):
    """A mistake in the user's input or setup, reported as one line with no traceback.

    Messages name files, rows, columns and codes, never names or dates of birth.
    """
