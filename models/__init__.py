"""ratecast modelling library: binning, model description, fitting, storage and prediction.

This package never imports ``service`` or any HTTP framework.
"""

from __future__ import annotations

__all__ = ["__version__"]

__version__ = "0.1.0"
