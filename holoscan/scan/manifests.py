"""Manifests of workflow jobs (chunks, lines, shared states): reading one, checked, and the code
check every job makes before solving."""
from __future__ import annotations

import json
from datetime import UTC, datetime
from pathlib import Path

from .identity import code_hash
from .store import text_hash


class StaleManifest(RuntimeError):
    pass


def utc_now() -> str:
    return datetime.now(UTC).isoformat(timespec="microseconds")


def read_manifest(path) -> dict:
    """A manifest, checked: JSON text whose hash is the one its name carries
    (``<id>.<text hash>[...].json``, see scan/plan.py). Raises StaleManifest otherwise."""
    p = Path(path)
    try:
        text = p.read_text()
        doc = json.loads(text)
    except (OSError, ValueError, UnicodeDecodeError) as exc:
        raise StaleManifest(f"{p}: unreadable manifest ({type(exc).__name__}); run the workflow again to re-plan") from None
    parts = p.name.split(".")
    if len(parts) >= 3 and text_hash(text) != parts[1]:
        raise StaleManifest(f"{p}: damaged manifest (its text does not match its name); run the workflow again")
    if not isinstance(doc, dict) or "code_hash" not in doc:
        raise StaleManifest(f"{p}: not a holoscan manifest")
    return doc


def check_code(manifest: dict) -> None:
    """Raise StaleManifest when the manifest was planned with other physics code than this one."""
    if manifest["code_hash"] != code_hash():
        raise StaleManifest(f"manifest made with physics code {manifest['code_hash']}, this is {code_hash()}: "
                            "the code changed after planning; run the workflow again to re-plan")


__all__ = ["StaleManifest", "check_code", "read_manifest", "utc_now"]
