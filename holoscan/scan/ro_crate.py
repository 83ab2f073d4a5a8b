"""RO-Crate metadata of a finished scan: ``results/<scan>/ro-crate-metadata.json``.

JSON-LD per RO-Crate 1.1 (https://w3id.org/ro/crate/1.1), written with plain ``json``, conforming
to the Process Run Crate profile (https://w3id.org/ro/wfrun/process/0.5): the crate root is the scan
folder; every file the PROV record names (see :mod:`holoscan.scan.provenance`) is a ``File`` data
entity with its path relative to the folder as ``@id``, its size (``contentSize``, bytes) and its
SHA-256 (``sha256``, hex; a term this crate adds to its ``@context``); each PROV activity becomes a
``CreateAction`` whose ``instrument`` is the
holoscan ``SoftwareApplication`` (with ``softwareVersion``), ``object`` the files it used,
``result`` the files it generated, and ``startTime``/``endTime`` the activity's times when known.
The PROV-JSON file itself, when it lies inside the folder, is a data entity too.

The workflow definition (Snakefile) lies outside the scan folder and is not part of the crate, so
this is a process run crate, not a workflow run crate.
"""
from __future__ import annotations

import json
from pathlib import Path

from .provenance import build
from .store import atomic_write_text

CONTEXT = "https://w3id.org/ro/crate/1.1/context"
PROFILE = "https://w3id.org/ro/wfrun/process/0.5"
NAME = "ro-crate-metadata.json"
#: ``sha256`` is not an RO-Crate 1.1 term: defined in the crate's context (RO-Crate 1.1, "Extending RO-Crate")
SHA256_TERM = "https://holoscan.example.org/ns#sha256"


def _value(v):
    return v["$"] if isinstance(v, dict) else v


def crate(results_dir, prov_file=None, figures=None) -> dict:
    """The crate's JSON-LD document (a dict); ``figures`` as in :func:`holoscan.scan.provenance.build`."""
    root = Path(results_dir).resolve()
    prov = build(root, figures).to_dict()
    files, path_of = {}, {}
    for ident, a in prov.get("entity", {}).items():
        if "holoscan:path" in a:
            path_of[ident] = a["holoscan:path"]
            files[a["holoscan:path"]] = {
                "@id": a["holoscan:path"], "@type": "File", "name": a["holoscan:path"],
                "contentSize": str(a["holoscan:bytes"]), "sha256": a["holoscan:sha256"],
                "description": f"{_value(a['prov:type']).split(':')[-1]} of the scan",
            }
    if prov_file is not None and Path(prov_file).resolve().is_relative_to(root):
        rel = Path(prov_file).resolve().relative_to(root).as_posix()
        files[rel] = {"@id": rel, "@type": "File", "name": rel, "encodingFormat": "application/json",
                      "description": "W3C PROV record of this scan (PROV-JSON)"}
    agents = {}
    for ident, a in prov.get("agent", {}).items():
        agents[ident] = {"@id": f"#software-{a['holoscan:version']}-{a['holoscan:code_hash']}",
                         "@type": "SoftwareApplication", "name": "holoscan",
                         "softwareVersion": a["holoscan:version"],
                         "description": f"physics-code hash {a['holoscan:code_hash']}"}
    used, generated, instrument = {}, {}, {}
    for r in prov.get("used", {}).values():
        used.setdefault(r["prov:activity"], []).append(r["prov:entity"])
    for r in prov.get("wasGeneratedBy", {}).values():
        generated.setdefault(r["prov:activity"], []).append(r["prov:entity"])
    for r in prov.get("wasAssociatedWith", {}).values():
        instrument.setdefault(r["prov:activity"], []).append(agents[r["prov:agent"]]["@id"])
    actions = []
    for ident, a in sorted(prov.get("activity", {}).items()):
        act = {"@id": "#" + ident.split(":", 1)[1], "@type": "CreateAction",
               "name": f"{_value(a['prov:type']).split(':')[-1]} {ident.split(':', 1)[1]}",
               "instrument": [{"@id": i} for i in sorted(instrument.get(ident, []))],
               "object": [{"@id": path_of[e]} for e in sorted(used.get(ident, [])) if e in path_of],
               "result": [{"@id": path_of[e]} for e in sorted(generated.get(ident, [])) if e in path_of]}
        for k, key in (("startTime", "prov:startTime"), ("endTime", "prov:endTime")):
            if key in a:
                act[k] = a[key]
        actions.append(act)
    scan = root.name
    root_entity = {
        "@id": "./", "@type": "Dataset", "name": f"holoscan scan '{scan}'",
        "description": ("Model computations of charged black-brane thermodynamics and phase structure over a "
                        "(T, mu) grid; not predictions for QCD or any material."),
        "datePublished": max((a["endTime"] for a in actions if "endTime" in a), default=None),
        "license": {"@id": "https://spdx.org/licenses/CC-BY-4.0"},
        "conformsTo": {"@id": PROFILE},
        "hasPart": [{"@id": p} for p in sorted(files)],
        "mentions": [{"@id": a["@id"]} for a in actions],
    }
    graph = [
        {"@id": NAME, "@type": "CreativeWork", "conformsTo": {"@id": "https://w3id.org/ro/crate/1.1"},
         "about": {"@id": "./"}},
        {k: v for k, v in root_entity.items() if v is not None},
        {"@id": PROFILE, "@type": "CreativeWork", "name": "Process Run Crate", "version": "0.5"},
        {"@id": "https://spdx.org/licenses/CC-BY-4.0", "@type": "CreativeWork", "name": "CC BY 4.0"},
        *sorted(agents.values(), key=lambda x: x["@id"]),
        *[files[p] for p in sorted(files)],
        *actions,
    ]
    return {"@context": [CONTEXT, {"sha256": SHA256_TERM}], "@graph": graph}


def write_crate(results_dir, prov_file=None, figures=None) -> Path:
    """Write ``results_dir/ro-crate-metadata.json``; returns its path."""
    out = Path(results_dir) / NAME
    atomic_write_text(out, json.dumps(crate(results_dir, prov_file, figures), indent=1, sort_keys=True) + "\n")
    return out
