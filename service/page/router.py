"""Routes of the capacity page: the HTML document, its static assets, and one CSV route.

The page and its assets hold no data and are served without a token; every number the page shows
comes from the read routes of the API (``/v1/series``, ``/bands``, ``/forecast``, ``/staffing``),
which check the read token as usual. The CSV route below answers the page's whole-day windows
(local midnight to local midnight, 23 or 25 hours on daylight-saving days), which the ``bands``
route cannot cut (its ``1d`` step is 24 hours of absolute time).
"""

from __future__ import annotations

from functools import cache
from importlib.resources import files

from fastapi import APIRouter
from fastapi.responses import Response

from service.api.errors import ApiError

__all__ = ["ASSETS", "PAGE_PATH", "router"]

#: Where the page is served; its assets are under ``PAGE_PATH + "/assets/"``.
PAGE_PATH = "/page"

#: Every static file the page may load, with its media type (nothing else is served).
ASSETS: dict[str, str] = {
    "page.css": "text/css; charset=utf-8",
    "page.js": "text/javascript; charset=utf-8",
    "chart.js": "text/javascript; charset=utf-8",
    "staffing.js": "text/javascript; charset=utf-8",
    "format.js": "text/javascript; charset=utf-8",
}

# Same-origin only: no CDN, no inline script, nothing sent elsewhere. blob: and data: images let
# the page turn its own chart into a PNG.
_HEADERS = {
    "Content-Security-Policy": (
        "default-src 'none'; script-src 'self'; style-src 'self'; connect-src 'self'; "
        "img-src 'self' blob: data:; base-uri 'none'; form-action 'none'; frame-ancestors 'none'"
    ),
    "X-Content-Type-Options": "nosniff",
    "Referrer-Policy": "no-referrer",
    "Cache-Control": "no-cache",
}

router = APIRouter(include_in_schema=False)


@cache
def _static(name: str) -> bytes:
    return (files("service.page") / "static" / name).read_bytes()


@router.get(PAGE_PATH)
async def page() -> Response:
    """The page itself (one HTML document)."""
    return Response(_static("index.html"), media_type="text/html; charset=utf-8", headers=_HEADERS)


@router.get(PAGE_PATH + "/assets/{name}")
async def asset(name: str) -> Response:
    """One of the page's static files, by name."""
    media = ASSETS.get(name)
    if media is None:
        raise ApiError(
            404,
            "not_found",
            f"the page has no asset {name[:100]!r}",
            field="name",
            value=name,
            allowed=", ".join(sorted(ASSETS)),
        )
    return Response(_static(name), media_type=media, headers=_HEADERS)
