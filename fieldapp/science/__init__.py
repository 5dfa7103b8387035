"""Pure salinity computation: no Flask, no SQL, no I/O.

Every public function takes numbers or numpy arrays and returns numpy arrays
(or plain floats for scalar input where stated). Each formula's docstring gives
the equation, the units, the valid range and the published source.
"""


class InputError(ValueError):
    """Input that cannot be a reading (not a number, unknown unit, bad ratio...).

    ``field`` names the input that is wrong so a form can show the message
    beside it; the message says what to type instead.
    """

    def __init__(self, message: str, field: str | None = None):
        super().__init__(message)
        self.field = field
        self.message = message
