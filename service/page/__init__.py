"""The capacity page: a browser view of bands, staffing and exports, served by the API's own app.

Everything it needs (HTML, CSS, JavaScript) ships in ``service/page/static``; the page reads the
JSON API from the same origin and works offline. See ``docs/page.md``.
"""

from __future__ import annotations

from service.page.router import PAGE_PATH, router

__all__ = ["PAGE_PATH", "router"]
