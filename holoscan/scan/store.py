"""The segment store of a scan: immutable Parquet segments, one per solved chunk.

Layout under ``results/<scan>/segments/``: ``<chunk>.parquet`` (the rows) and ``<chunk>.json``
(its seal: sha256 of the Parquet bytes, the point keys it holds, the code hash). A segment counts
only when its seal exists and the checksum matches; anything else (missing seal, truncated or
altered bytes, unreadable or malformed seal) is ignored and its points become missing again, so
they are solved anew under a new chunk id; a run holding the workflow lock later moves its files to
``results/<scan>/quarantine/``. Indexing never moves a file. Files are written under a temporary name in the same folder
and renamed when complete (atomic on POSIX filesystems), seal before segment.
"""
from __future__ import annotations

import hashlib
import json
import os
import shutil
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path


def sha256_file(path: Path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def text_hash(text: str) -> str:
    """The hash a plan file's name carries: the first 12 hex digits of the sha256 of its text."""
    return hashlib.sha256(text.encode()).hexdigest()[:12]


def temporary_name(path: Path) -> Path:
    """The hidden name ``path`` is written under before it is renamed into place (same folder,
    so the rename is atomic; the process id keeps concurrent writers apart)."""
    path = Path(path)
    return path.with_name(f".{path.name}.tmp-{os.getpid()}")


def _fsync(path: Path) -> None:
    with open(path, "rb+") as fh:
        os.fsync(fh.fileno())


@contextmanager
def atomic_path(path: Path, durable: bool = True) -> Iterator[Path]:
    """The one way files are written atomically: the body writes the yielded temporary path, which
    is then (fsynced when ``durable``) renamed to ``path``. Should the body raise, the temporary
    file is removed and ``path`` is left as it was. The folder is created if missing."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = temporary_name(path)
    try:
        yield tmp
        if durable:
            _fsync(tmp)
        os.replace(tmp, path)
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise


def atomic_write_bytes(path: Path, data: bytes, durable: bool = True) -> None:
    """Write ``data`` to ``path`` atomically (:func:`atomic_path`)."""
    with atomic_path(path, durable) as tmp:
        tmp.write_bytes(data)


def atomic_write_text(path: Path, text: str, durable: bool = True) -> None:
    """Write ``text`` (UTF-8) to ``path`` atomically (:func:`atomic_path`)."""
    atomic_write_bytes(path, text.encode(), durable)


def _write_parquet(table, path: Path) -> None:
    import pyarrow.parquet as pq

    pq.write_table(table, path)


def atomic_write_table(table, path: Path) -> None:
    """Write an Arrow table as Parquet to ``path`` atomically and durably (:func:`atomic_path`)."""
    with atomic_path(path) as tmp:
        _write_parquet(table, tmp)


def seal_path(segment: Path) -> Path:
    return Path(segment).with_suffix(".json")


def seal_segment(tmp_segment: Path, segment: Path, keys: list[str], code_hash: str) -> None:
    """Rename a fully written temporary segment into place, with its seal written first."""
    seal = {"sha256": sha256_file(tmp_segment), "keys": list(keys), "code_hash": code_hash,
            "chunk": Path(segment).stem}
    atomic_write_text(seal_path(segment), json.dumps(seal))
    os.replace(tmp_segment, segment)


def write_segment(table, segment: Path, keys: list[str], code_hash: str) -> None:
    """Write an Arrow table as the sealed segment ``segment``: Parquet under its temporary name,
    fsynced, then sealed and renamed into place (:func:`seal_segment`)."""
    segment = Path(segment)
    segment.parent.mkdir(parents=True, exist_ok=True)
    tmp = temporary_name(segment)
    try:
        _write_parquet(table, tmp)
        _fsync(tmp)
        seal_segment(tmp, segment, keys, code_hash)
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise


@dataclass
class StoreIndex:
    """Which valid segment holds each point key, and which segments are damaged or incomplete."""

    where: dict = field(default_factory=dict)  # key -> chunk id
    invalid: dict = field(default_factory=dict)  # chunk id -> reason (left in place by indexing)
    quarantined: list = field(default_factory=list)  # (chunk id, reason) moved by quarantine()


def _seal_doc(seal: Path):
    """The seal's keys if it is well formed, else the reason it is not."""
    try:
        meta = json.loads(seal.read_text())
    except (ValueError, OSError, UnicodeDecodeError) as exc:
        return None, f"unreadable seal: {type(exc).__name__}"
    if not isinstance(meta, dict) or not isinstance(meta.get("sha256"), str):
        return None, "malformed seal (no sha256)"
    keys = meta.get("keys")
    if not isinstance(keys, list) or not all(isinstance(k, str) for k in keys):
        return None, "malformed seal (no list of keys)"
    return meta, None


def index_store(seg_dir: Path) -> StoreIndex:
    """Verify every segment in ``seg_dir`` and index the keys of the valid ones. Read-only: a
    damaged or incomplete segment is listed in ``invalid`` and left where it is.

    Where two valid segments hold the same key (possible after an interrupted run), the one with the
    smaller chunk id wins, so the choice never depends on timing.
    """
    seg_dir = Path(seg_dir)
    index = StoreIndex()
    if not seg_dir.is_dir():
        return index
    chunks = sorted({p.stem for p in seg_dir.glob("*.parquet")} | {p.stem for p in seg_dir.glob("*.json")})
    for chunk in chunks:
        seg, seal = seg_dir / f"{chunk}.parquet", seg_dir / f"{chunk}.json"
        reason, meta = None, None
        if not seg.exists():
            reason = "seal without segment"
        elif not seal.exists():
            reason = "segment without seal"
        else:
            meta, reason = _seal_doc(seal)
            if meta is not None and meta["sha256"] != sha256_file(seg):
                reason = "checksum mismatch"
        if reason:
            index.invalid[chunk] = reason
            continue
        for k in meta["keys"]:
            index.where.setdefault(k, chunk)
    return index


def quarantine(seg_dir: Path, invalid: dict, *, older_than: float) -> list:
    """Move the files of the ``invalid`` chunks to ``results/<scan>/quarantine/``; only for a run
    that holds the workflow lock. A chunk whose files changed at or after ``older_than`` (a POSIX
    time) is left alone: a job of a run still going (a cluster job outliving its Snakemake
    process) may be between writing its seal and renaming its segment. Returns (chunk, reason)."""
    seg_dir = Path(seg_dir)
    qdir = seg_dir.parent / "quarantine"
    moved = []
    for chunk, reason in sorted(invalid.items()):
        files = [p for p in (seg_dir / f"{chunk}.parquet", seg_dir / f"{chunk}.json") if p.exists()]
        try:
            if not files or max(p.stat().st_mtime for p in files) >= older_than:
                continue
        except OSError:
            continue
        qdir.mkdir(parents=True, exist_ok=True)
        for p in files:
            shutil.move(str(p), str(qdir / p.name))
        moved.append((chunk, reason))
    return moved
