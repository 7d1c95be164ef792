"""The one exception type that means "the user gave us something wrong".

Library code raises :class:`InputError` in domain terms: the *field* that was wrong (a target
key such as ``device.errors.gate_2q``, or a parameter such as ``budget``), what was wrong, and what
is allowed. The command line maps a parameter field to the option the user typed (``budget`` ->
``--budget``) and prints the whole thing as one line on stderr with exit code 2.
"""

from __future__ import annotations

from collections.abc import Mapping


class InputError(ValueError):
    """Bad input from the user (a target file, an out directory, a data file, a parameter).

    ``problem`` says what is wrong; ``field`` names where (a target key, a function parameter, a
    file); ``allowed`` says what would be accepted; ``source`` names the file it came from.
    Older call sites pass one complete message and no field; that still works.

    >>> e = InputError("'fast' is not a budget", field="budget", allowed="quick, standard, overnight")
    >>> str(e)
    "budget: 'fast' is not a budget; allowed: quick, standard, overnight"
    >>> e.describe(options={"budget": "--budget"})
    "--budget: 'fast' is not a budget; allowed: quick, standard, overnight"
    >>> str(InputError("targets/x.toml: device.name: too long"))
    'targets/x.toml: device.name: too long'
    """

    def __init__(self, problem: str, *, field: str | None = None, allowed: str | None = None,
                 source: str | None = None) -> None:
        self.problem = problem
        self.field = field
        self.allowed = allowed
        self.source = source
        super().__init__(self.describe())

    def describe(self, *, options: Mapping[str, str] | None = None) -> str:
        """The one-line message; ``options`` maps parameter fields to the CLI's option names."""
        where = self.field
        if where is not None and options:
            where = options.get(where, where)
        parts = [p for p in (self.source, where) if p]
        text = ": ".join([*parts, self.problem])
        if self.allowed:
            text += f"; allowed: {self.allowed}"
        return text
