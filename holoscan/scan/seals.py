"""Seals of the finished files of a scan: which plan a file belongs to and which bytes it had.

Every table, summary and lines file a workflow rule writes gets a seal beside it,
``<file>.seal`` (JSON: file name, sha256 and size of its bytes, the hash of the plan it was made
for). A file counts as current only when its seal exists, names the current plan and matches the
file's bytes; otherwise the workflow makes it again, whatever Snakemake's own records (file times,
``.snakemake/metadata``) say. The seal is written after the file (both atomically), so a crash
between the two leaves a file that is simply made again.

Checking a seal only reads; nothing here moves or deletes a file.
"""
from __future__ import annotations

import json
from pathlib import Path

from .store import atomic_write_text, sha256_file

SEAL_SUFFIX = ".seal"


def seal_file(path) -> Path:
    path = Path(path)
    return path.with_name(path.name + SEAL_SUFFIX)


def write_seal(path, plan_hash: str) -> None:
    """Seal ``path`` (already written in place) as made for ``plan_hash``."""
    path = Path(path)
    doc = {"file": path.name, "sha256": sha256_file(path), "bytes": path.stat().st_size, "plan_hash": plan_hash}
    atomic_write_text(seal_file(path), json.dumps(doc, sort_keys=True))


def read_seal(path) -> dict | None:
    """The seal of ``path`` as a dict, or None when it is missing, unreadable or malformed."""
    try:
        doc = json.loads(seal_file(path).read_text())
    except (OSError, ValueError, UnicodeDecodeError):
        return None
    if not (isinstance(doc, dict) and isinstance(doc.get("sha256"), str) and isinstance(doc.get("plan_hash"), str)):
        return None
    return doc


def seal_problem(path, plan_hash: str) -> str | None:
    """Why ``path`` is not the current file of plan ``plan_hash`` (None when it is)."""
    path = Path(path)
    if not path.is_file():
        return "missing"
    doc = read_seal(path)
    if doc is None:
        return "no valid seal"
    if doc["plan_hash"] != plan_hash:
        return f"made for plan {doc['plan_hash']}, not {plan_hash}"
    if doc.get("bytes") != path.stat().st_size or doc["sha256"] != sha256_file(path):
        return "bytes differ from its seal"
    return None


def stale_files(expected: dict) -> dict:
    """``{path: reason}`` for every existing file of ``expected`` ({path: plan hash}) whose seal does
    not hold. Missing files are left out: the workflow makes those anyway."""
    out = {}
    for path, plan_hash in expected.items():
        if Path(path).exists():
            reason = seal_problem(path, plan_hash)
            if reason:
                out[str(path)] = reason
    return out
