# Figures of a finished scan (matplotlib, PNG and PDF) under results/<scan>/figures/.


def figure_targets():
    """Every figure file the current plan produces (listed in rule all)."""
    return []
