"""Bulk field equations of the charged black branes holoscan solves (no files, no workflow)."""
from .charged_brane import ChargedBrane, Constant
from .scalar_brane import ScalarBrane

__all__ = ["ChargedBrane", "Constant", "ScalarBrane"]
