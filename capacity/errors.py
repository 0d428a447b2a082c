"""The one exception type users see for bad input.

Every message names the field, the value received and how to fix it; the command line turns it into a
readable message and exit status 2 (no traceback).
"""

from __future__ import annotations


class InputError(ValueError):
    """Bad input: names the offending ``field``, the ``value`` received and a ``fix``.

    Parameters
    ----------
    field : str
        Dotted path of the offending entry, e.g. ``"receiver[1].radius"`` or ``"channel.symbol_interval"``.
    value : object
        What was received (shown with ``repr``).
    problem : str
        What is wrong, e.g. ``"must be positive"``.
    fix : str
        What to do instead, e.g. ``"give a radius such as 5 um"``.
    """

    def __init__(self, field: str, value: object, problem: str, fix: str = ""):
        self.field = field
        self.value = value
        self.problem = problem
        self.fix = fix
        text = f"{field} = {value!r}: {problem}"
        if fix:
            text += f". Fix: {fix}"
        super().__init__(text)
