"""`planner merge`: combine sample directories from several machines, counting each chunk once."""

from __future__ import annotations

import os
from pathlib import Path
from typing import Annotated, Any

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
    from planner.manifest import TARGET_COPY, check_out_dir, combine_manifests, read_manifest
    from planner.store import SampleStore, print_notice

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
        store = SampleStore(src, notify=None)  # notices are said once the merge worked
        if not store.shard_files():
            raise InputError(f"{src}: holds no samples ({store.samples_dir} has no .csv shards)")
        if target_bytes is None and (src / TARGET_COPY).is_file():
            target_bytes = (src / TARGET_COPY).read_bytes()
        named.append((str(src), m))
        stores.append(store)
    if out.exists() and not out.is_dir():
        raise InputError(f"{out}: --out exists and is not a directory")
    check_out_dir(out)
    existing = read_manifest(out) if out.is_dir() else None
    if existing is not None:
        named.insert(0, (str(out), existing))
    combined = combine_manifests(named)
    if out.is_dir():
        result = _merge_into_dir(out, combined, target_bytes, stores)
    else:
        result = _merge_into_new_dir(out, combined, target_bytes, stores)
    for message in dict.fromkeys(m for store in stores for m in store.notices):
        print_notice(message)
    where = f" -> {out / 'samples' / result.shard.name}" if result.shard else ""
    err.print(f"merged {len(stores)} directories into {plain(out)}: {result.copied_rows} new chunks "
              f"({result.copied_shots:,} shots), {result.skipped_rows} already present{where}")


def _merge_into_dir(out: Path, combined: Any, target_bytes: bytes | None, stores: list[Any]) -> Any:
    """Merge into an existing directory: the manifest first (a superset of the tasks, so rows
    copied next are all read), then one new shard (removed again if copying fails)."""
    from planner.manifest import write_manifest, write_target_copy
    from planner.store import SampleStore, merge_into

    if target_bytes is not None:
        write_target_copy(out, target_bytes)
    write_manifest(out, combined)
    return merge_into(SampleStore(out / "samples"), stores)


def _merge_into_new_dir(out: Path, combined: Any, target_bytes: bytes | None, stores: list[Any]) -> Any:
    """Build the destination in a temporary directory beside it, then rename it into place:
    a merge that fails (disk full, Ctrl-C) leaves no half-made destination."""
    import shutil
    import tempfile

    from planner.errors import InputError
    from planner.fileio import umask, write_error

    parent = out.parent
    try:
        parent.mkdir(parents=True, exist_ok=True)
        build = Path(tempfile.mkdtemp(dir=parent, prefix=f".{out.name}.merging-"))
    except OSError as exc:
        raise InputError(f"{out}: cannot create the out directory ({exc.strerror or exc})") from None
    try:
        os.chmod(build, 0o777 & ~umask())  # mkdtemp makes 0700; an out directory is shared
        result = _merge_into_dir(build, combined, target_bytes, stores)
        try:
            os.rename(build, out)
        except OSError as exc:
            if out.exists():
                raise InputError(f"{out}: appeared while merging (another merge?); nothing was "
                                 "written, run again") from None
            raise write_error(out, exc) from None
    except BaseException:
        shutil.rmtree(build, ignore_errors=True)
        raise
    return result
