"""The capacity page in a real browser: a real ``ratecast serve`` and headless Chromium.

Every number the page shows is compared with the API's own answer for the same windows (fetched
here with httpx, independently of the page); exports are compared with the API's CSV. Screenshots
go to ``$RATECAST_TEST_ARTEFACTS/page`` (default: pytest's temporary folder).

Needs Debian's ``chromium`` at /usr/bin/chromium (``apt-get install -y chromium``) and the
``playwright`` Python package (the ``dev`` extra); Playwright's own browser download is not used.
"""

from __future__ import annotations

import os
import xml.etree.ElementTree as ET
from collections.abc import Iterator
from pathlib import Path
from typing import Any
from urllib.parse import parse_qs, urlsplit

import httpx
import pytest

CHROMIUM = Path("/usr/bin/chromium")
if not CHROMIUM.exists():
    pytest.skip(
        "needs Debian's chromium at /usr/bin/chromium (apt-get install -y chromium)",
        allow_module_level=True,
    )

from playwright.sync_api import Browser, Page, sync_playwright  # noqa: E402

from service.queries.forecast import forecast_csv  # noqa: E402
from tests.service.api.test_e2e import serve  # noqa: E402
from tests.service.page.support import READER, TZ, publish_page_store  # noqa: E402

pytestmark = pytest.mark.e2e

AUTH = {"Authorization": f"Bearer {READER}"}
#: Friday to Monday: Saturday closes at 13:00, Sunday (23 hours: clocks go forward) is closed.
RANGE = {"from": "2026-03-06", "to": "2026-03-09"}


@pytest.fixture(scope="module")
def server(tmp_path_factory: pytest.TempPathFactory) -> Iterator[str]:
    root = tmp_path_factory.mktemp("page")
    store = publish_page_store(root / "store", draws=60)
    log = root / "server.log"
    # An empty admin token means "not set": the page's server needs only the read token.
    with serve(store, log, RATECAST_READ_TOKEN=READER, RATECAST_ADMIN_TOKEN="") as base:
        yield base
    assert READER not in log.read_text(), "the read token was written to the server log"


@pytest.fixture(scope="module")
def browser() -> Iterator[Browser]:
    with sync_playwright() as p:
        chromium = p.chromium.launch(executable_path=str(CHROMIUM), headless=True)
        yield chromium
        chromium.close()


@pytest.fixture(scope="module")
def artefacts(tmp_path_factory: pytest.TempPathFactory) -> Path:
    base = os.environ.get("RATECAST_TEST_ARTEFACTS")
    folder = (Path(base) if base else tmp_path_factory.getbasetemp() / "artefacts") / "page"
    folder.mkdir(parents=True, exist_ok=True)
    return folder


@pytest.fixture
def page(browser: Browser) -> Iterator[Page]:
    context = browser.new_context(viewport={"width": 1280, "height": 800}, accept_downloads=True)
    tab = context.new_page()
    errors: list[str] = []
    tab.on("pageerror", lambda exc: errors.append(str(exc)))
    # The browser logs every refused call; the 401 before the token is given is expected.
    expected = ("status of 401", "status of 403")
    tab.on(
        "console",
        lambda m: (
            errors.append(m.text)
            if m.type == "error" and not any(e in m.text for e in expected)
            else None
        ),
    )
    yield tab
    context.close()
    assert not errors, f"the page reported errors: {errors}"


def api(server: str) -> httpx.Client:
    return httpx.Client(base_url=server, headers=AUTH, timeout=30)


def drawn(tab: Page) -> int:
    return int(tab.evaluate("Number(document.body.dataset.drawn ?? 0)"))


def open_with_token(tab: Page, url: str) -> None:
    """Open ``url``, give the read token the page asks for, wait for the first drawing."""
    tab.goto(url)
    tab.wait_for_selector("#access:not([hidden])")
    tab.fill("#token", READER)
    tab.click("#token-form button")
    tab.wait_for_function("() => document.body.dataset.drawn >= 1")


def show(tab: Page, *, series: str, step: str, levels: tuple[str, ...], k: int) -> None:
    """Choose the settings with the controls, press Show, wait for the new drawing."""
    before = drawn(tab)
    tab.select_option("#series", series)
    tab.fill("#from", RANGE["from"])
    tab.fill("#to", RANGE["to"])
    tab.select_option("#step", step)
    for box in tab.query_selector_all("input[name=level]"):
        box.set_checked(box.get_attribute("value") in levels)
    tab.fill("#k", str(k))
    tab.click("#show")
    tab.wait_for_function(f"() => Number(document.body.dataset.drawn) > {before}")
    tab.wait_for_function(f"() => Number(document.body.dataset.staffed) >= {before + 1}")


def bands_query(step: str, levels: tuple[str, ...], k: int) -> list[tuple[str, str]]:
    end = "2026-03-10"  # the day after the last day shown
    query = [("start", RANGE["from"]), ("end", end), ("step", step), ("tz", TZ)]
    return [*query, ("quantiles", "0.5"), ("at_least", str(k)), *(("levels", lv) for lv in levels)]


def close_to(text: str, value: float, digits: int) -> bool:
    """The page's text for ``value`` shown with ``digits`` decimals (or "< 0.001" / "> 0.999")."""
    if text.startswith("<"):
        return 0 < value < 0.0005
    if text.startswith(">"):
        return 0.9995 <= value < 1
    return abs(float(text) - value) <= 0.5 * 10**-digits + 1e-12


def chart_frame(tab: Page) -> dict[str, float]:
    return tab.evaluate(
        """() => { const s = document.querySelector('#chart svg').dataset;
        return {yMax: +s.yMax, left: +s.left, top: +s.top, width: +s.plotWidth,
                height: +s.plotHeight, t0: +s.t0, t1: +s.t1}; }"""
    )


def windows_drawn(tab: Page) -> list[dict[str, Any]]:
    return tab.evaluate(
        """() => [...document.querySelectorAll('#chart g.win')].map((g) => ({
          start: g.dataset.start, end: g.dataset.end, mean: +g.dataset.mean,
          p_zero: +g.dataset.pZero, closed: g.classList.contains('closed'),
          closedRect: g.querySelector('.closed-hours') && {
            x: +g.querySelector('.closed-hours').getAttribute('x'),
            width: +g.querySelector('.closed-hours').getAttribute('width'),
            height: +g.querySelector('.closed-hours').getAttribute('height')},
          bands: [...g.querySelectorAll('rect.band')].map((r) => ({
            level: r.dataset.level, lo: +r.dataset.lo, hi: +r.dataset.hi,
            x: +r.getAttribute('x'), width: +r.getAttribute('width'),
            y: +r.getAttribute('y'), height: +r.getAttribute('height')})),
          median: g.querySelector('line.median') && {
            value: +g.querySelector('line.median').dataset.value,
            y: +g.querySelector('line.median').getAttribute('y1')},
        }))"""
    )


def table_rows(tab: Page) -> list[dict[str, Any]]:
    return tab.evaluate(
        """() => [...document.querySelectorAll('#table tbody tr')].map((tr) => ({
          start: tr.dataset.start, end: tr.dataset.end, closed: tr.classList.contains('closed'),
          cells: Object.fromEntries([...tr.querySelectorAll('[data-field]')].map(
            (c) => [c.dataset.field, c.textContent])),
        }))"""
    )


def test_token_is_asked_for_and_sent_as_a_header_never_in_the_link(server, page) -> None:
    seen: list[tuple[str, str | None]] = []
    page.on("request", lambda r: seen.append((r.url, r.headers.get("authorization"))))
    page.goto(f"{server}/page")
    page.wait_for_selector("#access:not([hidden])")
    page.fill("#token", "not-the-token")
    page.click("#token-form button")
    page.wait_for_function(
        "() => document.querySelector('#access-why').textContent.includes('refused')"
    )
    page.fill("#token", READER)
    page.click("#token-form button")
    page.wait_for_function("() => document.body.dataset.drawn >= 1")
    data_calls = [(url, auth) for url, auth in seen if "/v1/" in url]
    assert data_calls and data_calls[-1][1] == f"Bearer {READER}"
    assert all(READER not in url for url, _ in seen)
    assert READER not in page.url
    assert page.evaluate("sessionStorage.getItem('ratecast.read-token')") == READER
    assert page.evaluate("localStorage.length") == 0


def test_chart_and_table_show_the_api_numbers_closed_hours_and_dst(server, page, artefacts) -> None:
    levels = ("0.5", "0.8", "0.95")
    open_with_token(page, f"{server}/page")
    show(page, series="desk-a", step="1h", levels=levels, k=5)
    with api(server) as http:
        doc = http.get("/v1/series/desk-a/bands", params=bands_query("1h", levels, 5)).json()
    expected = doc["windows"]

    # The link holds the state (and can be shared).
    state = parse_qs(urlsplit(page.url).query)
    assert {k: v[0] for k, v in state.items() if k in ("series", "from", "to", "step", "levels", "k")} == {
        "series": "desk-a", "from": "2026-03-06", "to": "2026-03-09", "step": "1h",
        "levels": "0.5,0.8,0.95", "k": "5",
    }  # fmt: skip

    frame = chart_frame(page)
    drawn_windows = windows_drawn(page)
    assert [(w["start"], w["end"]) for w in drawn_windows] == [
        (w["start"], w["end"]) for w in expected
    ]

    def x(stamp: str) -> float:
        t = page.evaluate(f"Date.parse({stamp!r})")
        return frame["left"] + (t - frame["t0"]) / (frame["t1"] - frame["t0"]) * frame["width"]

    def y(count: float) -> float:
        return frame["top"] + frame["height"] * (1 - count / frame["yMax"])

    closed_seen = 0
    for got, want in zip(drawn_windows, expected, strict=True):
        assert got["mean"] == want["mean"] and got["p_zero"] == want["p_zero"]
        if want["mean"] == 0 and want["p_zero"] == 1:
            # Closed: a hatched column across the plot, no band, no median.
            closed_seen += 1
            assert got["closed"] and not got["bands"] and got["median"] is None
            assert got["closedRect"]["height"] == pytest.approx(frame["height"])
            continue
        assert not got["closed"]
        assert got["median"] == {"value": want["quantiles"]["0.5"],
                                 "y": pytest.approx(y(want["quantiles"]["0.5"]))}  # fmt: skip
        assert {b["level"]: [b["lo"], b["hi"]] for b in got["bands"]} == want["intervals"]
        for band in got["bands"]:
            # Each count owns the cell [c - 1/2, c + 1/2]; the band spans lo..hi (cut at 0).
            assert band["y"] == pytest.approx(y(band["hi"] + 0.5))
            assert band["y"] + band["height"] == pytest.approx(y(max(band["lo"] - 0.5, 0)))
            assert band["x"] == pytest.approx(x(want["start"]))
            assert band["x"] + band["width"] == pytest.approx(x(want["end"]))
    assert closed_seen == sum(w["mean"] == 0 and w["p_zero"] == 1 for w in expected)
    closed_starts = {w["start"] for w in drawn_windows if w["closed"]}
    # Saturday from 13:00 and all of Sunday are closed (opening hours of the test desk).
    assert {w["start"] for w in expected if w["start"] >= "2026-03-07T13"
            and w["start"] < "2026-03-09"} <= closed_starts  # fmt: skip

    # Saturday 13:00-14:00 is the first closed hour after an open morning.
    saturday = next(w for w in expected if w["start"] == "2026-03-07T13:00:00-06:00")
    assert saturday["mean"] == 0 and saturday["p_zero"] == 1

    # Sunday 2026-03-08 has 23 hourly windows; 02:00 does not exist; the day is 23/24 as wide.
    sunday = [w for w in drawn_windows if w["start"].startswith("2026-03-08")]
    assert len(sunday) == 23
    assert [w["start"] for w in sunday[1:3]] == [
        "2026-03-08T01:00:00-06:00", "2026-03-08T03:00:00-05:00"
    ]  # fmt: skip
    saturday_px = sum(w["closedRect"]["width"] if w["closed"] else w["bands"][0]["width"]
                      for w in drawn_windows if w["start"].startswith("2026-03-07"))  # fmt: skip
    sunday_px = sum(w["closedRect"]["width"] for w in sunday)
    assert sunday_px / saturday_px == pytest.approx(23 / 24)

    # Windows more than 7 days past the history (it ends 2026-03-02) are shaded as far ahead.
    assert page.get_attribute("#chart rect.far", "data-from") == "2026-03-09T00:00:00-05:00"

    rows = table_rows(page)
    assert [(r["start"], r["end"]) for r in rows] == [(w["start"], w["end"]) for w in expected]
    for row, want in zip(rows, expected, strict=True):
        if want["mean"] == 0 and want["p_zero"] == 1:
            assert row["closed"] and row["cells"]["closed"].startswith("closed")
            continue
        cells = row["cells"]
        assert close_to(cells["mean"], want["mean"], 2)
        assert int(cells["median"]) == want["quantiles"]["0.5"]
        for level in levels:
            lo, hi = want["intervals"][level]
            assert cells[f"band-{level}"] == f"{lo}\u2013{hi}"
        assert close_to(cells["p-zero"], want["p_zero"], 3)
        assert close_to(cells["at-least"], want["at_least"]["5"], 3)

    # Pointer: hovering over a window reads it out.
    target = next(i for i, w in enumerate(expected) if w["start"] == "2026-03-06T13:00:00-06:00")
    box = page.locator("#chart svg").bounding_box()
    assert box is not None
    scale = box["width"] / float(page.get_attribute("#chart svg", "width") or 1)
    centre = (x(expected[target]["start"]) + x(expected[target]["end"])) / 2
    page.mouse.move(box["x"] + centre * scale, box["y"] + y(1) * scale)
    assert page.get_attribute("#readout", "data-i") == str(target)
    readout = {
        f: page.text_content(f"#readout [data-field='{f}']")
        for f in ("mean", "median", "band-0.8", "p-zero", "at-least-5")
    }
    want = expected[target]
    assert close_to(readout["mean"] or "", want["mean"], 2)
    assert readout["median"] == str(want["quantiles"]["0.5"])
    assert readout["band-0.8"] == "{}\u2013{}".format(*want["intervals"]["0.8"])
    assert close_to(readout["p-zero"] or "", want["p_zero"], 3)
    assert close_to(readout["at-least-5"] or "", want["at_least"]["5"], 3)

    # Keyboard: the chart takes focus; End, then Page Up (a day back) lands on a closed hour.
    page.focus("#chart svg")
    page.keyboard.press("End")
    assert page.get_attribute("#readout", "data-i") == str(len(expected) - 1)
    page.keyboard.press("Home")
    for _ in range(31):  # Fri 00:00 + 31 h = Sat 07:00, closed until 09:00
        page.keyboard.press("ArrowRight")
    assert expected[31]["start"] == "2026-03-07T07:00:00-06:00"
    assert page.get_attribute("#readout", "data-i") == "31"
    assert "closed" in (page.text_content("#readout [data-field='closed']") or "")

    page.screenshot(path=str(artefacts / "page-1h-dst.png"), full_page=True)


def test_exports_equal_the_api_csv_and_the_chart(server, page, artefacts) -> None:
    # A shared link opens the same view (after the reader gives their own token).
    levels = ("0.8", "0.95")
    link = (f"{server}/page?series=desk-a&from={RANGE['from']}&to={RANGE['to']}&step=30min"
            "&levels=0.8,0.95&k=3&share=80&within=20&aht=240&shrink=30&meet=90")  # fmt: skip
    open_with_token(page, link)
    assert page.input_value("#step") == "30min" and page.input_value("#k") == "3"
    with api(server) as http:
        query = bands_query("30min", levels, 3)
        want_csv = http.get(
            "/v1/series/desk-a/bands", params=query, headers={"Accept": "text/csv"}
        ).content
        doc = http.get("/v1/series/desk-a/bands", params=query).json()
    assert len(windows_drawn(page)) == len(doc["windows"]) == 4 * 48 - 2

    with page.expect_download() as got:
        page.click("#export-csv")
    assert Path(got.value.path()).read_bytes() == want_csv  # byte for byte, CRLF kept

    with page.expect_download() as got:
        page.click("#export-svg")
    svg = ET.parse(got.value.path()).getroot()
    ns = "{http://www.w3.org/2000/svg}"
    assert svg.tag == f"{ns}svg"
    groups = [g for g in svg.iter(f"{ns}g") if "win" in (g.get("class") or "").split()]
    assert [g.get("data-start") for g in groups] == [w["start"] for w in doc["windows"]]
    style = svg.find(f"{ns}style")
    assert style is not None and "--band-80: #" in (style.text or "")

    with page.expect_download() as got:
        page.click("#export-png")
    png = Path(got.value.path()).read_bytes()
    assert png[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature (PNG specification, W3C, 5.2)
    width = int.from_bytes(png[16:20], "big")  # IHDR width
    assert width == 2 * int(page.get_attribute("#chart svg", "width") or 0)

    # Whole days: local midnight to local midnight from the forecast route, 23 hours on Sunday.
    before = drawn(page)
    page.select_option("#step", "1d")
    page.click("#show")
    page.wait_for_function(f"() => Number(document.body.dataset.drawn) > {before}")
    days = [{"start": d, "end": e} for d, e in
            [("2026-03-06", "2026-03-07"), ("2026-03-07", "2026-03-08"),
             ("2026-03-08", "2026-03-09"), ("2026-03-09", "2026-03-10")]]  # fmt: skip
    with api(server) as http:
        body = {"windows": days, "tz": TZ, "levels": [0.8, 0.95], "quantiles": [0.5],
                "at_least": [3]}  # fmt: skip
        daily = http.post("/v1/series/desk-a/forecast", json=body).json()
    drawn_days = windows_drawn(page)
    assert [(w["start"], w["end"], w["mean"]) for w in drawn_days] == [
        (w["start"], w["end"], w["mean"]) for w in daily["windows"]
    ]
    assert drawn_days[2]["closed"]  # Sunday
    sunday = drawn_days[2]["closedRect"]["width"]
    friday = drawn_days[0]["bands"][0]["width"]
    assert sunday / friday == pytest.approx(23 / 24)
    with page.expect_download() as got:
        page.click("#export-csv")
    assert Path(got.value.path()).read_bytes() == forecast_csv(daily).encode()
    assert "Staffing is planned per interval" in (page.text_content("#staffing-status") or "")


def test_staffing_panel_shows_the_api_figures_and_the_caution(server, page) -> None:
    open_with_token(page, f"{server}/page")
    for field, value in {"share": 85, "within": 30, "aht": 300, "shrink": 25, "meet": 95}.items():
        page.fill(f"#{field}", str(value))
    show(page, series="desk-a", step="30min", levels=("0.8",), k=3)
    with api(server) as http:
        want = http.post(
            "/v1/series/desk-a/staffing",
            json={"start": "2026-03-06", "end": "2026-03-10", "step": "30min", "tz": TZ,
                  "handle_time_seconds": 300, "answer_within_seconds": 30, "share": 0.85,
                  "meet_probability": 0.95, "shrinkage": 0.25},
        ).json()  # fmt: skip
    rows = page.evaluate(
        """() => [...document.querySelectorAll('#staffing-table tbody tr')].map((tr) => ({
          start: tr.dataset.start, closed: tr.classList.contains('closed'),
          cells: Object.fromEntries([...tr.querySelectorAll('[data-field]')].map(
            (c) => [c.dataset.field, Number(c.textContent)]))}))"""
    )
    assert [r["start"] for r in rows] == [r["start"] for r in want["intervals"]]
    for got, interval in zip(rows, want["intervals"], strict=True):
        if interval["mean_arrivals"] == 0:
            assert got["closed"]
            continue
        assert got["cells"] == {
            f"{p}-{f}": interval[p][f]
            for p in ("plug_in", "assured")
            for f in ("agents", "scheduled")
        }
    assert any(i["assured"]["agents"] > i["plug_in"]["agents"] for i in want["intervals"])
    assert page.text_content("#staffing-caution") == want["caution"]
    caution = page.text_content("#caution") or ""
    assert "probabilistic" in caution and "advisory" in caution and "labour rules" in caution
    day_rows = page.locator("#staffing-days tbody tr")
    assert day_rows.count() == len(want["days"])


def test_a_flagged_version_is_noted_and_a_bad_link_is_named(server, page) -> None:
    open_with_token(page, f"{server}/page")
    assert page.is_hidden("#version-note")
    show(page, series="desk-b", step="1h", levels=("0.8",), k=3)
    note = page.text_content("#version-note") or ""
    assert "flagged" in note and "max r_hat 1.08" in note

    before = drawn(page)
    page.goto(f"{server}/page?series=desk-a&step=7min")
    page.wait_for_selector("#problem p")
    problem = page.text_content("#problem") or ""
    assert 'step "7min" is not allowed; allowed: 15min, 30min, 1h, 1d' in problem
    assert drawn(page) == 0 < before  # nothing drawn from a bad link


def test_actual_counts_hook_draws_counts_over_their_windows(server, page) -> None:
    open_with_token(page, f"{server}/page")
    show(page, series="desk-a", step="1h", levels=("0.8", "0.95"), k=3)
    with api(server) as http:
        doc = http.get(
            "/v1/series/desk-a/bands", params=bands_query("1h", ("0.8", "0.95"), 3)
        ).json()
    noon = next(w for w in doc["windows"] if w["start"] == "2026-03-06T12:00:00-06:00")
    lo = noon["intervals"]["0.8"][0]
    one = next(w for w in doc["windows"] if w["start"] == "2026-03-06T13:00:00-06:00")
    actuals = [
        {"start": noon["start"], "end": noon["end"], "count": lo},  # inside the 80% band
        {"start": one["start"], "end": one["end"], "count": one["intervals"]["0.95"][1] + 40},
        {"start": "2026-03-06T12:30:00-06:00", "end": "2026-03-06T13:30:00-06:00", "count": 1},
    ]
    result = page.evaluate("(a) => window.ratecastPage.drawActuals(a)", actuals)
    assert result["drawn"] == 2 and result["unmatched"] == [actuals[2]]
    marks = page.evaluate(
        """() => [...document.querySelectorAll('#chart line.actual')].map((l) => ({
          i: +l.dataset.i, count: +l.dataset.count, outside: l.classList.contains('outside'),
          y: +l.getAttribute('y1')}))"""
    )
    frame = chart_frame(page)
    index = [w["start"] for w in doc["windows"]]
    assert [(m["i"], m["count"], m["outside"]) for m in marks] == [
        (index.index(noon["start"]), lo, False), (index.index(one["start"]), actuals[1]["count"], True)
    ]  # fmt: skip
    # The count axis grew to hold the large count.
    assert frame["yMax"] >= actuals[1]["count"] + 0.5
    for mark in marks:
        want_y = frame["top"] + frame["height"] * (1 - mark["count"] / frame["yMax"])
        assert mark["y"] == pytest.approx(want_y)
    with pytest.raises(Exception, match="not a whole number"):
        page.evaluate(
            "(a) => window.ratecastPage.drawActuals(a)",
            [{"start": noon["start"], "end": noon["end"], "count": 2.5}],
        )


def test_labelled_controls_keyboard_and_narrow_window(server, page, artefacts) -> None:
    open_with_token(page, f"{server}/page")
    unlabelled = page.evaluate(
        """() => [...document.querySelectorAll('input, select, button')]
          .filter((c) => c.type !== 'hidden' && !(c.labels?.length || c.textContent.trim()
                   || c.getAttribute('aria-label'))).map((c) => c.id || c.name)"""
    )
    assert unlabelled == []
    page.focus("#series")
    for _ in range(40):
        page.keyboard.press("Tab")
        if page.evaluate("document.activeElement.matches('#chart svg')"):
            break
    else:
        pytest.fail("Tab never reached the chart")
    page.keyboard.press("ArrowRight")
    assert page.get_attribute("#readout", "data-i") == "1"

    page.set_viewport_size({"width": 390, "height": 844})
    page.wait_for_function("() => document.querySelector('#chart svg').getAttribute('width') < 400")
    overflow = page.evaluate(
        "[document.documentElement.scrollWidth, document.documentElement.clientWidth]"
    )
    assert overflow[0] <= overflow[1], f"the page scrolls sideways at 390 px: {overflow}"
    page.screenshot(path=str(artefacts / "page-narrow.png"), full_page=False)


def test_first_view_is_the_week_after_the_history_at_30_minutes(server, page, artefacts) -> None:
    open_with_token(page, f"{server}/page")
    assert page.input_value("#from") == "2026-03-02" and page.input_value("#to") == "2026-03-08"
    assert page.input_value("#step") == "30min"
    assert len(windows_drawn(page)) == 7 * 48 - 2  # the 23-hour Sunday has 46 half-hours
    assert page.locator("#table tbody tr").count() == 7 * 48 - 2
    page.wait_for_function("() => document.body.dataset.staffed >= 1")
    # Read out Tuesday 12:00-12:30 for the picture: 1 day 12 h into a week of 167 h.
    box = page.locator("#chart svg").bounding_box()
    frame = chart_frame(page)
    assert box is not None
    scale = box["width"] / float(page.get_attribute("#chart svg", "width") or 1)
    x = frame["left"] + frame["width"] * (36.25 / 167)
    page.mouse.move(box["x"] + x * scale, box["y"] + (frame["top"] + 40) * scale)
    assert "Tue 03 Mar 12:00" in (page.text_content("#readout") or "")
    page.locator("#readout").scroll_into_view_if_needed()
    page.screenshot(path=str(artefacts / "page.png"), full_page=False)
