"""Phase structure: which branch wins at a point, and where the transition lines are.

- :mod:`.dominance`: the dominant phase at one (T, mu) from its branches (no solving);
- :mod:`.fixed_mu`: solution curves of a sourced dilaton model at fixed mu, with their folds,
  equal-Omega points, crossover peaks and the critical endpoint;
- :mod:`.family`: folds of a conformal (unsourced) dilaton family in mu/T;
- :mod:`.lines`: per model kind, every located line point and critical point.
"""
