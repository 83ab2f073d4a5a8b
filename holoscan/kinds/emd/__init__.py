"""Kind ``emd``: Einstein-Maxwell-dilaton branes in AdS5 with user-given V(phi), f(phi).

- :mod:`.model`: the model class (config block, spec, dispatch to the methods);
- :mod:`.shooter`: horizon-data shooter, coarse scan, Newton, every branch of a target;
- :mod:`.pointwise`: point-by-point solves (method ``shooting``; the atlas path's fallback);
- :mod:`.pressure`: first-law integration of P (zero-density reference, Chebyshev paths);
- :mod:`.brane_map`: the horizon-data map as an atlas (:mod:`holoscan.numerics.lazy`);
- :mod:`.batch`: the production path (method ``atlas``): seeds, Newton on the atlas, one
  verification shot per root, vectorised thermodynamics and error evidence;
- :mod:`.fixed_mu`, :mod:`.family`, :mod:`.lines`: transition lines and the critical endpoint.
"""
from .model import EMDModel

__all__ = ["EMDModel"]
