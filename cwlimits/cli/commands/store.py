"""``cwlimits store``: what a results store holds, and forgetting it."""

from collections import Counter
from pathlib import Path

from cwlimits._defaults import STORE_NAME
from cwlimits.cli.commands._common import add_parser, echo, format_rows
from cwlimits.errors import InputError

__all__ = ["ORDER", "register", "run"]

ORDER = 90


def register(subparsers, common):
    parser = add_parser(
        subparsers, common, "store",
        help="list the runs and finished chunks of a results store, or delete it",
        description="Long commands (limits, rank, validate) keep every finished chunk in "
                    f"{STORE_NAME} in their output folder, so that a rerun resumes.  This "
                    "lists the runs it holds (command, finished chunks per part, when) or, "
                    "with --clear, deletes the store so the next run starts afresh.  Only a "
                    "file that is verifiably a cwlimits store is read or deleted.",
        examples=["cwlimits store limits/", "cwlimits store limits/ --clear"])
    parser.add_argument("folder", metavar="FOLDER", help="output folder holding the store")
    parser.add_argument("--clear", action="store_true",
                        help="delete the store (finished chunks are then computed again)")
    parser.set_defaults(run=run)


def run(args):
    from cwlimits.runtime.store import is_store, open_store

    folder = Path(args.folder)
    path = folder / STORE_NAME
    if not (path.is_file() or path.is_symlink()):
        raise InputError(f"no results store ({STORE_NAME}) in this folder", file=str(folder))
    if not is_store(path):
        # Listing and clearing both refuse it: cwlimits deletes only what it wrote.
        raise InputError("not a cwlimits results store (no SQLite header or no cwlimits "
                         "tables); nothing was deleted", file=str(path))
    if args.clear:
        with open_store(folder) as store:
            busy = store.live_claims()
        if busy:
            raise InputError(f"the store is in use by process {busy[0]} (it is computing "
                             "chunks); clear it when that run has finished", file=str(path))
        # SQLite keeps its write-ahead log beside the database: remove all three files
        # (the side files only if they are plain files, never through a link).
        path.unlink()
        for suffix in ("-wal", "-shm"):
            side = Path(f"{path}{suffix}")
            if side.is_file() and not side.is_symlink():
                side.unlink()
        echo(args, f"deleted {path}")
        return 0
    with open_store(folder) as store:
        log = store.chunk_log()
        rows = []
        for run_id in store.runs():
            config = store.run_config(run_id)
            mine = [entry for entry in log if entry["run_id"] == run_id]
            parts = Counter(entry["part"] or "-" for entry in mine)
            last = max((entry["finished_at"] for entry in mine), default="-")
            rows.append([run_id[:12], str(config.get("command", "?")),
                         ", ".join(f"{part}: {n}" for part, n in sorted(parts.items()))
                         or "none", str(last)])
    echo(args, f"{path}: {len(rows)} run(s)")
    if rows:
        echo(args, format_rows(["run", "command", "finished chunks per part", "last chunk"],
                               rows))
    return 0
