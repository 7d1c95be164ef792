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
    from planner.errors import InputError
    from planner.manifest import (TARGET_COPY, combine_manifests, read_manifest, write_manifest,
                                  write_target_copy)
    from planner.store import SampleStore, merge_into

    err = stderr_console(quiet=quiet)
    named = []
    stores = []
    target_bytes = None
    for src in sources:
        if not src.is_dir():
            raise InputError(f"{src}: no such out directory")
        m = read_manifest(src)
        if m is None:
            raise InputError(f"{src}: not a planner out directory (no manifest.json)")
        store = SampleStore(src)
        if not store.shard_files():
            raise InputError(f"{src}: holds no samples ({store.samples_dir} has no .csv shards)")
        if target_bytes is None and (src / TARGET_COPY).is_file():
            target_bytes = (src / TARGET_COPY).read_bytes()
        named.append((str(src), m))
        stores.append(store)
    if out.exists() and not out.is_dir():
        raise InputError(f"{out}: --out exists and is not a directory")
    existing = read_manifest(out) if out.is_dir() else None
    if existing is not None:
        named.insert(0, (str(out), existing))
    combined = combine_manifests(named)
    try:
        out.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise InputError(f"{out}: cannot create the out directory ({exc.strerror or exc})") from None
    if target_bytes is not None:
        write_target_copy(out, target_bytes)
    result = merge_into(SampleStore(out / "samples"), stores)
    write_manifest(out, combined)
    where = f" -> {result.shard}" if result.shard else ""
    err.print(f"merged {len(stores)} directories into {plain(out)}: {result.copied_rows} new chunks "
              f"({result.copied_shots:,} shots), {result.skipped_rows} already present{where}")
