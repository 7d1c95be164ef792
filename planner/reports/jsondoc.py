"""The one JSON-safe conversion, for the report files (fits.json, verify.json) and ``--json``.

JSON has no infinity or nan: those become null; keys become strings; -0.0 becomes 0.0.

>>> json_text({"a": float("inf"), "b": -0.0})
'{"a": null, "b": 0.0}'
"""

from __future__ import annotations

import json
import math
from typing import Any


def json_safe(x: Any) -> Any:
    """A copy JSON can hold: non-finite floats become null (JSON has no inf/nan), keys strings.

    >>> json_safe({"a": float("inf"), 1: [2.0, float("nan")]})
    {'a': None, '1': [2.0, None]}
    """
    if isinstance(x, float) and not math.isfinite(x):
        return None
    if isinstance(x, float) and x == 0:
        return 0.0  # never -0.0
    if isinstance(x, dict):
        return {str(k): json_safe(v) for k, v in x.items()}
    if isinstance(x, list | tuple):
        return [json_safe(v) for v in x]
    return x


def json_text(obj: Any) -> str:
    """One JSON document on one line (``--json`` output)."""
    return json.dumps(json_safe(obj), allow_nan=False)


def json_file_text(obj: Any) -> str:
    """A JSON report file: indented, ending in a newline.

    >>> json_file_text({"x": 1})
    '{\\n "x": 1\\n}\\n'
    """
    return json.dumps(json_safe(obj), indent=1, allow_nan=False) + "\n"
