"""The value types every section of a target file is read with: frozen models that refuse
unknown keys, and numbers taken as TOML numbers only (a quoted "4.5e-3", a boolean, nan or inf
is refused, never converted)."""

from __future__ import annotations

from typing import Annotated

from pydantic import BaseModel, ConfigDict, Field, Strict


class Frozen(BaseModel):
    """A section: immutable, unknown keys refused."""

    model_config = ConfigDict(frozen=True, extra="forbid", strict=False)


Number = Annotated[float, Strict(), Field(allow_inf_nan=False)]
Integer = Annotated[int, Strict()]
Probability = Annotated[Number, Field(ge=0.0, le=1.0)]
Positive = Annotated[Number, Field(gt=0.0)]
