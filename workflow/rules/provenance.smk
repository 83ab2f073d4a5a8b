# Provenance of a finished scan in W3C PROV, and the scan's text summary.


def provenance_targets():
    """Every provenance file the current plan produces (listed in rule all)."""
    return []
