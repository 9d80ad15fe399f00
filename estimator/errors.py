"""The one error type users see.

Every rejected input raises :class:`InputError`, which names the field, the value given and what
would have been valid. The CLI prints ``str(error)`` as a single line and exits with status 2.
"""

from __future__ import annotations


class InputError(ValueError):
    """Bad input: names the field, the value and the valid range or dimension.

    Parameters
    ----------
    field : str
        Dotted path of the offending field, e.g. ``"phases[2].oxygen"``.
    value : object
        The value as given by the user.
    expected : str
        What would have been accepted, e.g. ``"a flow such as '2 L/min'"`` or ``"0 to 15 L/min"``.

    Examples
    --------
    >>> str(InputError("patient.weight", "-3 kg", "0.5 to 300 kg"))
    "patient.weight: got '-3 kg'; expected 0.5 to 300 kg"
    """

    def __init__(self, field: str, value: object, expected: str) -> None:
        self.field = field
        self.value = value
        self.expected = expected
        super().__init__(f"{field}: got {_show(value)}; expected {expected}")


def _show(value: object) -> str:
    text = repr(value) if isinstance(value, str) else str(value)
    if len(text) > 80:
        text = text[:77] + "..."
    return text.replace("\n", " ")
