"""`planner circuit` (being written)."""

import typer


def register(app: typer.Typer) -> None:
    """Not registered yet."""
