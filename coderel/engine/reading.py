"""The dataset cut into partitions by unit, and one reading task per partition on the workers:
the part every command of the dask engine shares (``agree`` summarises the partitions' codings,
``merge`` settles their cells).

See :mod:`coderel.engine.partitions` (files grouped so that no unit is in two groups) and
:mod:`coderel.engine.shuffle` (files that share units repartitioned by a hash of the unit ID).
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    from distributed import Client, Future


@dataclass(frozen=True)
class Partitions:
    """The reading tasks (one future per partition, in a fixed order) and the files (by
    position in ``files``) whose rows were repartitioned by unit rather than read whole."""

    files: list[str]
    tasks: list[Future]
    shuffled: list[int]


def dataset_groups(client: Client, paths: Sequence[Path]) -> tuple[list[str], list[list[int]]]:
    """The dataset's Parquet files and their groups (files that share a unit are one group); the
    unit IDs are read on the workers. Test-retest data are refused."""
    from coderel.engine.partitions import (
        check_no_occasions,
        dataset_files,
        file_groups,
        unit_keys_of,
    )

    files = [str(f) for f in dataset_files(paths)]
    found = client.gather(client.map(unit_keys_of, files, pure=False))
    check_no_occasions(files, [occasion for _, occasion in found])
    return files, file_groups([keys for keys, _ in found])


def partition_tasks(
    client: Client,
    cb: Any,
    files: list[str],
    groups: list[list[int]],
    read_files: Callable[..., Any],
    read_pieces: Callable[..., Any],
) -> Partitions:
    """One task per group of one file (``read_files(cb, [file])``); the files of groups of
    several files (they share units) repartitioned by a hash of the unit ID into as many buckets,
    each bucket one task (``read_pieces(cb, pieces)``). Files that cannot be read column by
    column keep their group, read by one task (``read_files(cb, files)``)."""
    from coderel.engine.shuffle import bucket, is_split, split_file

    tasks = [
        client.submit(read_files, cb, [files[i] for i in g], pure=False)
        for g in groups
        if len(g) == 1
    ]
    shared = [g for g in groups if len(g) > 1]
    if not shared:
        return Partitions(files, tasks, [])
    mixed = sorted(i for g in shared for i in g)
    workers = max(1, len(client.scheduler_info().get("workers", {})))
    n = max(len(mixed), 2 * workers)
    splits = [client.submit(split_file, files[i], n, pure=False) for i in mixed]
    if not all(client.gather([client.submit(is_split, f, pure=False) for f in splits])):
        del splits
        tasks += [client.submit(read_files, cb, [files[i] for i in g], pure=False) for g in shared]
        return Partitions(files, tasks, [])
    for j in range(n):
        pieces = [client.submit(bucket, f, j, pure=False) for f in splits]
        tasks.append(client.submit(read_pieces, cb, pieces, pure=False))
    return Partitions(files, tasks, mixed)


def read_group(codebook: Any, files: list[str]):
    """The codings of one group of files, read by the in-process reader (a task)."""
    from coderel.io.read import read_codings

    return read_codings(codebook, [Path(f) for f in files])


def read_bucket(codebook: Any, pieces: list):
    """The codings of one bucket's pieces, read in file order (a task)."""
    from coderel.io.read import read_long_parts

    return read_long_parts(codebook, [p for p in pieces if len(p.numbers)])


def source_of(path: str):
    """A file's provenance (path, SHA-256, size), made where the file is read (a task)."""
    from coderel.codings import SourceFile
    from coderel.io.atomic import sha256_file

    return SourceFile(path=path, sha256=sha256_file(path), size=Path(path).stat().st_size)
