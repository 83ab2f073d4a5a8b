"""Errors raised for bad input.

Every input problem is reported as :class:`InputError`, which names the offending key (a dotted path
such as ``models[1].kappa_sq``) and the bad value, so that command-line tools can print one clear line
and exit non-zero instead of showing a traceback.
"""
from __future__ import annotations


class InputError(ValueError):
    """Bad user input: names the key path and the offending value.

    Parameters
    ----------
    key : str
        Dotted key path, e.g. ``"models[0].d"`` or ``"--T"``.
    value : object
        The value found there (``repr`` is shown).
    reason : str
        What is wrong, in plain words.
    """

    def __init__(self, key: str, value: object, reason: str):
        self.key = key
        self.value = value
        self.reason = reason
        super().__init__(f"{key} = {value!r}: {reason}")
