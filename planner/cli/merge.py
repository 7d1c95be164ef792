"""`planner merge`: combine sample directories from several machines, counting each chunk once."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from planner.cli._common import one_line_errors, plain, stderr_console
from planner.cli.options import QuietOpt


def register(app: typer.Typer) -> None:
    app.command("merge", no_args_is_help=True,
                help="Copy the samples of several out directories into one (--out). A chunk "
                "already in the destination is skipped, so merging twice adds nothing; "
                "directories of another target or other stim/sinter/pymatching versions are "
                "refused.")(merge_command)


@one_line_errors
def merge_command(
    sources: Annotated[list[Path], typer.Argument(help="Out directories to merge from.")],
    out: Annotated[Path, typer.Option("--out", help="Destination out directory (created if "
                                      "missing; may be one of the sources).",
                                      rich_help_panel="Output")],
    quiet: QuietOpt = False,
) -> None:
    from planner.store import merge_directories, print_notice

    err = stderr_console(quiet=quiet)
    merged = merge_directories(sources, out)
    for message in merged.notices:
        print_notice(message)
    result = merged.result
    where = f" -> {merged.shard}" if merged.shard else ""
    err.print(f"merged {merged.sources} directories into {plain(out)}: {result.copied_rows} new chunks "
              f"({result.copied_shots:,} shots), {result.skipped_rows} already present{where}")
