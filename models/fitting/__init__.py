"""Fitting: the only package that imports PyMC, PyTensor and ArviZ.

:class:`FitOptions` (sampling settings, with the only copy of their defaults) and
:class:`GateThresholds` import no PyMC. The rest is loaded on first use, so importing this
package to build settings stays cheap:

- :func:`fit_model` samples a model with NUTS and runs the diagnostics gate (:mod:`.gate`);
- :func:`fit_and_publish` fits, gates, compacts and publishes one series;
- :func:`fit_joint` and :func:`publish_joint` do the same for related series fitted together.
"""

from __future__ import annotations

import importlib
from typing import Any

from models.fitting.options import FitOptions, GateThresholds

__all__ = [
    "FitOptions",
    "FitResult",
    "GateThresholds",
    "fit_and_publish",
    "fit_joint",
    "fit_model",
    "publish_joint",
]

_LAZY = {
    "FitResult": "models.fitting.sampling",
    "fit_model": "models.fitting.sampling",
    "fit_and_publish": "models.fitting.publish",
    "fit_joint": "models.fitting.joint",
    "publish_joint": "models.fitting.joint",
}


def __getattr__(name: str) -> Any:
    if name in _LAZY:
        return getattr(importlib.import_module(_LAZY[name]), name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
