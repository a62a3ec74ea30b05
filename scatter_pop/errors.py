"""The one exception type for mistakes a user can make (spec, catalogue, flags).

The command line turns an :class:`InputError` into one line on stderr and exit
status 2, with no traceback.  Library callers get the exception itself.
"""

import re

__all__ = ["InputError"]

# a name counts as a word unless it is part of a longer name, a dotted spec key or a path
_BEFORE = r"(?<![\w.\-/'\"])"
_AFTER = r"(?![\w\-/'\"])"


class InputError(ValueError):
    """A user-supplied value is not allowed.

    The message is a single line that names the key or column, the value that
    was given and what is allowed.  Library code names its own arguments and
    spec keys, never command-line flags; ``arguments`` lists the argument names
    the message uses (as words, or as ``name=True`` in advice), so that the
    command line can say them as its flags (:meth:`in_terms_of`).
    """

    def __init__(self, message: str, *, arguments: tuple[str, ...] = ()):
        super().__init__(" ".join(str(message).split()))
        self.arguments = tuple(arguments)

    def in_terms_of(self, flags) -> str:
        """The message with each of :attr:`arguments` that ``flags`` maps (name -> flag) replaced."""
        text = str(self)
        for name in self.arguments:
            flag = flags.get(name)
            if flag is None:
                continue
            text = re.sub(_BEFORE + re.escape(name) + r"(=True)?" + _AFTER, flag, text)
        return text
