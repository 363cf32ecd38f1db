"""Read a published version's fit verdict from its manifest (no PyMC; for the CLI, API and
catalogue): a version published with ``force`` past a failing diagnostics gate is degraded."""

from __future__ import annotations

from typing import Any

__all__ = ["fit_problems", "is_degraded"]


def is_degraded(manifest: dict[str, Any]) -> bool:
    """Whether the version was published past a failing diagnostics gate.

    Manifests written before the ``degraded`` field existed say so by ``"forced": true``.

    Examples
    --------
    >>> is_degraded({"fit": {"degraded": True}}), is_degraded({"fit": {"forced": True}})
    (True, True)
    >>> is_degraded({"fit": {"forced": False}}), is_degraded({})
    (False, False)
    """
    fit = manifest.get("fit") or {}
    return bool(fit.get("degraded", fit.get("forced", False)))


def fit_problems(manifest: dict[str, Any]) -> list[str]:
    """The gate's problems of a degraded version (empty for a version that passed)."""
    if not is_degraded(manifest):
        return []
    fit = manifest.get("fit") or {}
    problems = fit.get("problems")
    if problems is None:
        problems = (manifest.get("diagnostics") or {}).get("problems", [])
    return [str(p) for p in problems]
