"""The one exception type that means "the user gave us something wrong".

Library code raises :class:`InputError` with a message that names the file and the field; the
command line prints that message as one line on stderr and exits with code 2.
"""

from __future__ import annotations


class InputError(ValueError):
    """Bad input from the user (a target file, an out directory, a command-line value).

    The message is complete on its own: ``"targets/x.toml: device.errors.gate_2q: must be ..."``.
    """
