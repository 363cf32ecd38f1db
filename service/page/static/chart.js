// The band chart: plain SVG drawn by hand (no library), one flat step per window.
//
// Counts belong to whole windows, so every window is drawn as a flat step across [start, end):
// a band for each central interval, the median as a line, nothing but a hatched column when the
// window is wholly in closed time. Windows are placed by their absolute instants (the API's
// times carry offsets), so days of 23 or 25 hours come out shorter or longer, as they are.
//
// A band [lo, hi] is drawn from lo - 1/2 to hi + 1/2 (cut at 0): each whole count owns a cell one
// unit tall, and the band covers the cells of the counts it includes.

import { dayLabel, fixed, levelKeys, localParts, percent, prob, windowLabel, el } from "./format.js";

const NS = "http://www.w3.org/2000/svg";

/** Days past the history for which the project checked its bands on real data (README). */
export const CHECKED_DAYS = 7;

/** A window wholly in closed time: the forecast is exactly zero (mean 0 and P(N = 0) = 1). */
export function isClosed(w) {
  return w.mean === 0 && w.p_zero === 1;
}

/** The smallest 1, 2 or 5 times a power of ten that is at least ``v``. */
export function niceMax(v) {
  const top = Math.max(v, 1);
  const power = 10 ** Math.floor(Math.log10(top));
  for (const m of [1, 2, 5, 10]) if (m * power >= top) return m * power;
  return 10 * power;
}

/** Tick values from 0 to ``max`` at a 1, 2 or 5 spacing, about ``count`` of them. */
export function ticks(max, count = 5) {
  const raw = max / count;
  const power = 10 ** Math.floor(Math.log10(raw));
  const step = [1, 2, 5, 10].map((m) => m * power).find((s) => s >= raw);
  const out = [];
  for (let v = 0; v <= max + 1e-9; v += Math.max(1, step)) out.push(Math.round(v));
  return out;
}

/** A new SVG element with attributes, appended to ``parent``. */
export function svgEl(parent, tag, attrs = {}, text) {
  const node = document.createElementNS(NS, tag);
  for (const [k, v] of Object.entries(attrs)) node.setAttribute(k, String(v));
  if (text !== undefined) node.textContent = text;
  if (parent) parent.appendChild(node);
  return node;
}

/** The plot's frame: instants and counts to pixels, for windows ``ws`` and counts up to ``yMax``. */
export function geometry(host, ws, yMax, { height } = {}) {
  const width = Math.max(320, Math.floor(host.clientWidth || 960));
  const narrow = width < 600;
  const box = {
    width,
    height: height ?? (narrow ? 260 : 340),
    left: narrow ? 40 : 52,
    right: 12,
    top: 26,
    bottom: 46,
  };
  box.plotWidth = box.width - box.left - box.right;
  box.plotHeight = box.height - box.top - box.bottom;
  box.t0 = Date.parse(ws[0].start);
  box.t1 = Date.parse(ws[ws.length - 1].end);
  box.yMax = yMax;
  box.x = (t) => box.left + ((t - box.t0) / (box.t1 - box.t0)) * box.plotWidth;
  box.y = (v) => box.top + box.plotHeight * (1 - v / box.yMax);
  return box;
}

/** Axes: counts on the left, local days (and hours on short ranges) along the bottom. */
export function drawAxes(svg, box, ws, yTitle) {
  const g = svgEl(svg, "g", { class: "axes", "aria-hidden": "true" });
  for (const v of ticks(box.yMax)) {
    const y = box.y(v);
    svgEl(g, "line", { class: "grid", x1: box.left, x2: box.left + box.plotWidth, y1: y, y2: y });
    svgEl(g, "text", { class: "tick y", x: box.left - 6, y: y + 4 }, String(v));
  }
  svgEl(g, "text", { class: "axis-title", x: 4, y: 12 }, yTitle);
  const days = ws.filter((w) => localParts(w.start).time === "00:00");
  const spanDays = (box.t1 - box.t0) / 86_400_000;
  let lastLabel = -Infinity;
  for (const w of days) {
    const x = box.x(Date.parse(w.start));
    svgEl(g, "line", { class: "day", x1: x, x2: x, y1: box.top, y2: box.top + box.plotHeight + 6 });
    if (x - lastLabel >= 64 && x <= box.left + box.plotWidth - 30) {
      svgEl(g, "text", { class: "tick x", x: x + 3, y: box.top + box.plotHeight + 18 }, dayLabel(localParts(w.start).date));
      lastLabel = x;
    }
  }
  if (spanDays <= 3) {
    for (const w of ws) {
      const p = localParts(w.start);
      const hour = Number(p.time.slice(0, 2));
      if (p.time.endsWith(":00") && hour % 6 === 0 && hour !== 0) {
        const x = box.x(Date.parse(w.start));
        svgEl(g, "line", { class: "hour", x1: x, x2: x, y1: box.top + box.plotHeight, y2: box.top + box.plotHeight + 4 });
        svgEl(g, "text", { class: "tick x hour-label", x, y: box.top + box.plotHeight + 34 }, p.time);
      }
    }
  }
  svgEl(g, "line", { class: "baseline", x1: box.left, x2: box.left + box.plotWidth, y1: box.y(0), y2: box.y(0) });
  return g;
}

/** Index of the window containing instant ``t`` (ms), by bisection over sorted starts. */
export function windowAt(ws, t) {
  let lo = 0;
  let hi = ws.length - 1;
  while (lo < hi) {
    const mid = (lo + hi + 1) >> 1;
    if (Date.parse(ws[mid].start) <= t) lo = mid;
    else hi = mid - 1;
  }
  return lo;
}

/** Keyboard and pointer reading of a chart: arrows, Page Up/Down (a day), Home/End. */
export function attachCursor(svg, box, ws, select) {
  const pick = (event) => {
    const point = svg.createSVGPoint();
    point.x = event.clientX;
    point.y = event.clientY;
    const local = point.matrixTransform(svg.getScreenCTM().inverse());
    if (local.x < box.left || local.x > box.left + box.plotWidth) return;
    const t = box.t0 + ((local.x - box.left) / box.plotWidth) * (box.t1 - box.t0);
    select(windowAt(ws, t));
  };
  svg.addEventListener("pointermove", pick);
  svg.addEventListener("pointerdown", pick);
  svg.addEventListener("keydown", (event) => {
    const current = Number(svg.dataset.selected ?? -1);
    const dayAfter = (i, sign) => {
      const target = Date.parse(ws[Math.max(0, i)].start) + sign * 86_400_000;
      return windowAt(ws, Math.min(Math.max(target, box.t0), box.t1 - 1));
    };
    const moves = {
      ArrowRight: () => Math.min(ws.length - 1, current + 1),
      ArrowLeft: () => Math.max(0, current - 1),
      PageDown: () => dayAfter(current, 1),
      PageUp: () => dayAfter(current, -1),
      Home: () => 0,
      End: () => ws.length - 1,
    };
    const move = moves[event.key];
    if (!move) return;
    event.preventDefault();
    select(current < 0 && event.key !== "End" ? 0 : move());
  });
  svg.addEventListener("focus", () => {
    if (svg.dataset.selected === undefined) select(0);
  });
}

/** The chart of predicted arrivals per window, with the readout of the selected window. */
export class BandChart {
  constructor(host, readout, key) {
    this.host = host;
    this.readout = readout;
    this.key = key;
    this.doc = null;
    this.actuals = new Map();
    this.svg = null;
  }

  /** Draw ``doc`` (a forecast document); ``ctx`` has k, historyEnd, checkedUntil, summary. */
  render(doc, ctx) {
    this.doc = doc;
    this.ctx = ctx;
    const ws = doc.windows;
    this.levels = levelKeys(ws[0]);
    const widest = this.levels[this.levels.length - 1];
    let top = 1;
    ws.forEach((w, i) => {
      if (!isClosed(w)) top = Math.max(top, w.intervals[widest][1] + 0.5);
      if (this.actuals.has(i)) top = Math.max(top, this.actuals.get(i) + 0.5);
    });
    const box = geometry(this.host, ws, niceMax(top));
    this.box = box;
    const selected = this.svg?.dataset.selected;
    const svg = svgEl(null, "svg", {
      class: "rc-chart",
      viewBox: `0 0 ${box.width} ${box.height}`,
      width: box.width,
      height: box.height,
      role: "img",
      tabindex: 0,
      "aria-label": `${ctx.summary}. Focus here and use the left and right arrow keys to read each window; Page Up and Page Down move a day.`,
      "data-y-max": box.yMax,
      "data-left": box.left,
      "data-top": box.top,
      "data-plot-width": box.plotWidth,
      "data-plot-height": box.plotHeight,
      "data-t0": box.t0,
      "data-t1": box.t1,
    });
    svgEl(svg, "title", {}, ctx.summary);
    const defs = svgEl(svg, "defs");
    const hatch = svgEl(defs, "pattern", { id: "rc-hatch", width: 6, height: 6, patternUnits: "userSpaceOnUse", patternTransform: "rotate(45)" });
    svgEl(hatch, "rect", { class: "hatch-ground", width: 6, height: 6 });
    svgEl(hatch, "line", { class: "hatch-line", x1: 0, y1: 0, x2: 0, y2: 6 });

    const far = ws.findIndex((w) => localParts(w.start).date >= ctx.checkedUntil);
    if (far >= 0) {
      const x = box.x(Date.parse(ws[far].start));
      svgEl(svg, "rect", { class: "far", x, y: box.top, width: box.left + box.plotWidth - x, height: box.plotHeight, "data-from": ws[far].start });
    }
    drawAxes(svg, box, ws, "arrivals per window");

    const layer = svgEl(svg, "g", { class: "windows" });
    let run = null;
    const runs = [];
    ws.forEach((w, i) => {
      const x0 = box.x(Date.parse(w.start));
      const x1 = box.x(Date.parse(w.end));
      const closed = isClosed(w);
      const g = svgEl(layer, "g", {
        class: closed ? "win closed" : "win",
        "data-i": i,
        "data-start": w.start,
        "data-end": w.end,
        "data-mean": w.mean,
        "data-p-zero": w.p_zero,
      });
      if (closed) {
        svgEl(g, "rect", { class: "closed-hours", x: x0, y: box.top, width: x1 - x0, height: box.plotHeight });
        if (run && run.end === i - 1) run.end = i;
        else runs.push((run = { start: i, end: i }));
        return;
      }
      for (const level of [...this.levels].reverse()) {
        const [lo, hi] = w.intervals[level];
        const yTop = box.y(hi + 0.5);
        const yBottom = box.y(Math.max(lo - 0.5, 0));
        svgEl(g, "rect", {
          class: `band b${Math.round(Number(level) * 100)}`,
          "data-level": level,
          "data-lo": lo,
          "data-hi": hi,
          x: x0,
          y: yTop,
          width: x1 - x0,
          height: yBottom - yTop,
        });
      }
      const median = w.quantiles["0.5"];
      svgEl(g, "line", { class: "median", "data-value": median, x1: x0, x2: x1, y1: box.y(median), y2: box.y(median) });
    });
    for (const r of runs) {
      const x0 = box.x(Date.parse(ws[r.start].start));
      const x1 = box.x(Date.parse(ws[r.end].end));
      if (x1 - x0 >= 46) {
        svgEl(layer, "text", { class: "closed-label", x: (x0 + x1) / 2, y: box.top + 16 }, "closed");
      }
    }
    svgEl(layer, "path", { class: "riser", d: this.risers(ws, box) });

    const history = ws.findIndex((w) => localParts(w.start).date >= ctx.historyEnd);
    if (history > 0) {
      const x = box.x(Date.parse(ws[history].start));
      svgEl(svg, "line", { class: "history-end", x1: x, x2: x, y1: box.top, y2: box.top + box.plotHeight });
      svgEl(svg, "text", { class: "marker-label", x: x + 4, y: box.top + box.plotHeight - 6 }, "history ends");
    }
    if (far > 0) {
      const x = box.x(Date.parse(ws[far].start));
      svgEl(svg, "text", { class: "marker-label", x: x + 4, y: box.top + 30 }, `over ${CHECKED_DAYS} days ahead`);
    }

    const actual = svgEl(svg, "g", { class: "actuals" });
    for (const [i, count] of this.actuals) {
      const w = ws[i];
      const x0 = box.x(Date.parse(w.start));
      const x1 = box.x(Date.parse(w.end));
      const level = this.levels.includes("0.8") ? "0.8" : widest;
      const [lo, hi] = isClosed(w) ? [0, 0] : w.intervals[level];
      const outside = count < lo || count > hi;
      svgEl(actual, "line", { class: outside ? "actual outside" : "actual", "data-i": i, "data-count": count, x1: x0, x2: x1, y1: box.y(count), y2: box.y(count) });
      svgEl(actual, "circle", { class: outside ? "actual-dot outside" : "actual-dot", cx: (x0 + x1) / 2, cy: box.y(count), r: outside ? 3.5 : 2.5 });
    }
    svgEl(svg, "rect", { class: "cursor", x: 0, y: box.top, width: 0, height: box.plotHeight, visibility: "hidden" });

    this.host.replaceChildren(svg);
    this.svg = svg;
    attachCursor(svg, box, ws, (i) => this.select(i));
    this.drawKey(far >= 0, this.actuals.size > 0);
    if (selected !== undefined && Number(selected) < ws.length) this.select(Number(selected));
    return svg;
  }

  /** Vertical strokes joining the medians of neighbouring open windows, so the steps read as one line. */
  risers(ws, box) {
    const parts = [];
    for (let i = 1; i < ws.length; i++) {
      const a = ws[i - 1];
      const b = ws[i];
      if (isClosed(a) || isClosed(b)) continue;
      const x = box.x(Date.parse(b.start));
      parts.push(`M${x.toFixed(2)} ${box.y(a.quantiles["0.5"]).toFixed(2)}V${box.y(b.quantiles["0.5"]).toFixed(2)}`);
    }
    return parts.join("") || "M0 0";
  }

  /** Show window ``i`` in the readout and outline it on the chart. */
  select(i) {
    const w = this.doc.windows[i];
    const box = this.box;
    this.svg.dataset.selected = String(i);
    const cursor = this.svg.querySelector(".cursor");
    const x0 = box.x(Date.parse(w.start));
    cursor.setAttribute("x", x0);
    cursor.setAttribute("width", Math.max(1, box.x(Date.parse(w.end)) - x0));
    cursor.setAttribute("visibility", "visible");
    const out = this.readout;
    out.replaceChildren();
    out.dataset.i = String(i);
    el(out, "strong", windowLabel(w), { "data-field": "window" });
    const flags = [];
    if (localParts(w.start).date >= this.ctx.checkedUntil) flags.push(`more than ${CHECKED_DAYS} days past the history: trust less`);
    if (localParts(w.start).date < this.ctx.historyEnd) flags.push("inside the fitted history");
    if (isClosed(w)) {
      el(out, "span", "closed: no arrivals expected (mean 0, P(0) = 1)", { "data-field": "closed" });
    } else {
      const item = (label, value, field) => {
        const span = el(out, "span", `${label} `);
        el(span, "b", value, { "data-field": field });
      };
      item("mean", fixed(w.mean, 2), "mean");
      item("median", String(w.quantiles["0.5"]), "median");
      for (const level of this.levels) {
        const [lo, hi] = w.intervals[level];
        item(`${percent(level)} band`, `${lo}\u2013${hi}`, `band-${level}`);
      }
      item("P(0)", prob(w.p_zero), "p-zero");
      for (const [k, p] of Object.entries(w.at_least ?? {})) item(`P(N \u2265 ${k})`, prob(p), `at-least-${k}`);
    }
    if (this.actuals.has(i)) el(out, "span", `counted ${this.actuals.get(i)}`, { "data-field": "actual" });
    for (const f of flags) el(out, "span", f, { class: "flag" });
  }

  /** The key to the chart's marks (text beside a swatch, so no mark is told by colour alone). */
  drawKey(far, actuals) {
    const list = this.key;
    list.replaceChildren();
    const item = (swatchClass, text) => {
      const li = el(list, "li");
      const s = svgEl(li, "svg", { width: 26, height: 14, "aria-hidden": "true", class: "rc-chart swatch" });
      if (swatchClass === "median") svgEl(s, "line", { class: "median", x1: 1, x2: 25, y1: 7, y2: 7 });
      else if (swatchClass === "actual") {
        svgEl(s, "line", { class: "actual", x1: 1, x2: 25, y1: 7, y2: 7 });
        svgEl(s, "circle", { class: "actual-dot", cx: 13, cy: 7, r: 2.5 });
      } else if (swatchClass === "history-end") svgEl(s, "line", { class: "history-end", x1: 13, x2: 13, y1: 0, y2: 14 });
      else svgEl(s, "rect", { class: swatchClass, x: 1, y: 1, width: 24, height: 12 });
      el(li, "span", text);
    };
    item("median", "median (half the chance below)");
    for (const level of this.levels) item(`band b${Math.round(Number(level) * 100)}`, `${percent(level)} band`);
    item("closed-hours", "closed: no arrivals expected");
    item("history-end", "end of the fitted history");
    if (far) item("far", `more than ${CHECKED_DAYS} days past the history`);
    if (actuals) item("actual", "counted arrivals");
  }

  /**
   * Overlay counted arrivals: ``actuals`` is a list of ``{start, end, count}`` with the API's time
   * strings. Each is matched to the shown window with the same start and end instants; returns
   * how many were drawn and the ones that matched no window.
   */
  drawActuals(actuals) {
    if (!this.doc) throw new Error("draw a forecast before its actual counts");
    const index = new Map(this.doc.windows.map((w, i) => [`${Date.parse(w.start)}/${Date.parse(w.end)}`, i]));
    const unmatched = [];
    this.actuals = new Map();
    for (const a of actuals) {
      if (!Number.isInteger(a.count) || a.count < 0) {
        throw new Error(`actual count ${JSON.stringify(a.count)} for ${a.start} is not a whole number >= 0`);
      }
      const i = index.get(`${Date.parse(a.start)}/${Date.parse(a.end)}`);
      if (i === undefined) unmatched.push(a);
      else this.actuals.set(i, a.count);
    }
    this.render(this.doc, this.ctx);
    return { drawn: this.actuals.size, unmatched };
  }

  /** The chart as a standalone SVG document (its styles and colours written in). */
  toSvgText() {
    return standaloneSvg(this.svg);
  }
}

/** Copy of ``svg`` with the page's chart rules and resolved colours in a <style> element. */
export function standaloneSvg(svg) {
  const copy = svg.cloneNode(true);
  copy.querySelector(".cursor")?.remove();
  copy.setAttribute("xmlns", NS);
  copy.removeAttribute("tabindex");
  const rules = [];
  const root = getComputedStyle(document.documentElement);
  const vars = [];
  for (const sheet of document.styleSheets) {
    for (const rule of sheet.cssRules) {
      if (rule.selectorText === ":root") {
        for (const name of rule.style) if (name.startsWith("--")) vars.push(`${name}: ${root.getPropertyValue(name).trim()};`);
      } else if (rule.selectorText?.includes(".rc-chart")) rules.push(rule.cssText);
    }
  }
  const style = document.createElementNS(NS, "style");
  style.textContent = `.rc-chart { ${vars.join(" ")} font-family: sans-serif; }\n${rules.join("\n")}`;
  copy.insertBefore(style, copy.firstChild);
  svgEl(copy, "rect", { class: "paper", x: 0, y: 0, width: "100%", height: "100%" });
  copy.insertBefore(copy.lastChild, style.nextSibling);
  return new XMLSerializer().serializeToString(copy);
}

/** A PNG (as a Blob) of an SVG document's text, drawn at ``scale`` times its size. */
export function svgToPng(text, width, height, scale = 2) {
  return new Promise((resolve, reject) => {
    const url = URL.createObjectURL(new Blob([text], { type: "image/svg+xml" }));
    const img = new Image();
    img.onload = () => {
      const canvas = document.createElement("canvas");
      canvas.width = width * scale;
      canvas.height = height * scale;
      const ctx = canvas.getContext("2d");
      ctx.scale(scale, scale);
      ctx.drawImage(img, 0, 0, width, height);
      URL.revokeObjectURL(url);
      canvas.toBlob((blob) => (blob ? resolve(blob) : reject(new Error("the browser made no PNG"))), "image/png");
    };
    img.onerror = () => {
      URL.revokeObjectURL(url);
      reject(new Error("the chart could not be drawn as an image"));
    };
    img.src = url;
  });
}

