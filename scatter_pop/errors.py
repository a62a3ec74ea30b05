"""The one exception type for mistakes a user can make (spec, catalogue, flags).

The command line turns an :class:`InputError` into one line on stderr and exit
status 2, with no traceback.  Library callers get the exception itself.
"""

__all__ = ["InputError"]


class InputError(ValueError):
    """A user-supplied value is not allowed.

    The message is a single line that names the key or column, the value that
    was given and what is allowed.
    """

    def __init__(self, message: str):
        super().__init__(" ".join(str(message).split()))
