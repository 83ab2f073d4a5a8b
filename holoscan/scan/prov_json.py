"""A minimal writer of W3C PROV documents in the PROV-JSON serialisation, with plain ``json``.

PROV-JSON (W3C Member Submission, https://www.w3.org/Submission/prov-json/) is one JSON object with
a ``prefix`` map and one object per record kind (``entity``, ``activity``, ``agent``, ``used``,
``wasGeneratedBy``, ``wasAssociatedWith``, ``wasDerivedFrom``), each mapping a record identifier to
its attributes. Conventions here:

- identifiers and attribute names are qualified names ``prefix:local``;
- attribute values are JSON strings or integers, or typed literals ``{"$": text, "type": datatype}``
  (a qualified-name value uses the datatype ``xsd:QName``, as in the submission);
- times (``prov:startTime``, ``prov:endTime``, ``prov:time``) are ISO 8601 strings with a UTC offset;
- relations have blank-node identifiers ``_:<kind>-<n>``, numbered in the order the relations sort
  (by their attribute values), so the same records always give the same text;
- the output is sorted by key at every level (:meth:`ProvDoc.to_json`): a deterministic file.

No validation happens here; the tests read the output back with the general-purpose ``prov``
library and check that every relation refers to a declared record.
"""
from __future__ import annotations

import json

#: relation kind -> (short blank-node tag, its formal attributes in PROV-JSON order)
RELATIONS = {
    "used": ("use", ("prov:activity", "prov:entity")),
    "wasGeneratedBy": ("gen", ("prov:entity", "prov:activity")),
    "wasAssociatedWith": ("assoc", ("prov:activity", "prov:agent")),
    "wasDerivedFrom": ("der", ("prov:generatedEntity", "prov:usedEntity")),
}


def qname(value: str) -> dict:
    """A qualified-name attribute value (e.g. ``prov:SoftwareAgent``) as a typed literal."""
    return {"$": value, "type": "xsd:QName"}


class ProvDoc:
    """Records of one PROV document; ``to_json()`` gives its PROV-JSON text.

    Parameters
    ----------
    prefixes : dict
        Namespace prefix -> IRI. ``prov`` and ``xsd`` are predefined by PROV-JSON and need no entry.
    """

    def __init__(self, prefixes: dict):
        self.prefixes = dict(prefixes)
        self.records = {"entity": {}, "activity": {}, "agent": {}}
        self.relations = {kind: set() for kind in RELATIONS}

    def _add(self, kind: str, ident: str, attrs: dict) -> str:
        clean = {k: v for k, v in attrs.items() if v is not None}
        old = self.records[kind].get(ident)
        if old is not None and old != clean:
            raise ValueError(f"{kind} {ident} declared twice with different attributes")
        self.records[kind][ident] = clean
        return ident

    def entity(self, ident: str, attrs: dict | None = None) -> str:
        return self._add("entity", ident, attrs or {})

    def activity(self, ident: str, start: str | None = None, end: str | None = None,
                 attrs: dict | None = None) -> str:
        """An activity; ``start``/``end`` become ``prov:startTime``/``prov:endTime`` (None: unknown)."""
        return self._add("activity", ident, {**(attrs or {}), "prov:startTime": start, "prov:endTime": end})

    def agent(self, ident: str, attrs: dict | None = None) -> str:
        return self._add("agent", ident, attrs or {})

    def relate(self, kind: str, *formal: str, attrs: dict | None = None) -> None:
        """Add a relation of ``kind`` between the records ``formal`` (in the order of RELATIONS)."""
        names = RELATIONS[kind][1]
        if len(formal) != len(names):
            raise ValueError(f"{kind} takes {len(names)} records, got {len(formal)}")
        a = {**dict(zip(names, formal)), **(attrs or {})}
        self.relations[kind].add(json.dumps(a, sort_keys=True))

    def to_dict(self) -> dict:
        doc = {"prefix": dict(self.prefixes)}
        for kind, recs in self.records.items():
            if recs:
                doc[kind] = {k: recs[k] for k in sorted(recs)}
        for kind, rels in self.relations.items():
            if rels:
                tag = RELATIONS[kind][0]
                doc[kind] = {f"_:{tag}-{i + 1}": json.loads(r) for i, r in enumerate(sorted(rels))}
        return doc

    def to_json(self) -> str:
        return json.dumps(self.to_dict(), indent=1, sort_keys=True, allow_nan=False) + "\n"

