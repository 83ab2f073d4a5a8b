"""Bulk field equations of the charged black branes holoscan solves (no files, no workflow)."""
from .charged_brane import ChargedBrane, Constant

__all__ = ["ChargedBrane", "Constant"]
