"""Phase structure: which branch wins at a point, and where the transition lines are.

- :mod:`.dominance`: the dominant phase at one (T, mu) from its branches (no solving);
- :mod:`.lines`: the line and critical-point records and the driver that asks a model's kind to
  locate them (the finders live with each kind, e.g. :mod:`holoscan.kinds.emd.lines`).
"""
