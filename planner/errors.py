"""The one exception type for mistakes a user can fix (bad file, bad option).

The CLI prints its message as a single line and exits non-zero; anything else
escaping is a bug and keeps its traceback.
"""


class UserError(Exception):
    """A problem in the user's input, described in one line.

    The message names the file, line, option or field and what is wrong.
    """
