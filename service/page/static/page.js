// The capacity page: controls, the link that holds them, calls to the API, the table and exports.
//
// Every number shown comes from the JSON API of the same server; nothing is computed here but
// layout. The read token (when the server needs one) is kept in this tab's sessionStorage and sent
// as an Authorization header; it is never written into the link.

import { BandChart, CHECKED_DAYS, isClosed, standaloneSvg, svgToPng } from "./chart.js";
import { addDays, dayLabel, el, fixed, isDay, levelKeys, localParts, percent, prob, windowLabel } from "./format.js";
import { PLAN_STEPS, STAFF_DEFAULTS, STAFF_LIMITS, renderStaffing, staffingBody } from "./staffing.js";

const STEPS = { "15min": "15 minutes", "30min": "30 minutes", "1h": "1 hour", "1d": "1 day" };
const LEVELS = ["0.5", "0.8", "0.95"];
const DEFAULTS = { step: "30min", levels: ["0.8", "0.95"], k: 10, days: 7 };
const TOKEN_KEY = "ratecast.read-token";
const MAX_K = 1_000_000_000;

const $ = (id) => document.getElementById(id);

/** An error answer of the API, with its one-line message. */
class ApiProblem extends Error {
  constructor(status, body) {
    super(body?.message ? `${body.message}${body.allowed ? ` (allowed: ${body.allowed})` : ""}` : `the server answered ${status}`);
    this.status = status;
    this.body = body;
  }
}

/** A call to the API of this server; throws ApiProblem on an error answer. */
async function call(path, { method = "GET", body, accept = "application/json" } = {}) {
  const headers = { Accept: accept };
  const token = sessionStorage.getItem(TOKEN_KEY);
  if (token) headers.Authorization = `Bearer ${token}`;
  if (body !== undefined) headers["Content-Type"] = "application/json";
  const response = await fetch(path, {
    method,
    headers,
    body: body === undefined ? undefined : JSON.stringify(body),
    cache: "no-store",
    credentials: "omit",
  });
  if (!response.ok) {
    let detail = null;
    try {
      detail = await response.json();
    } catch {
      detail = null;
    }
    throw new ApiProblem(response.status, detail);
  }
  return response;
}

// ------------------------------------------------------------------------------------ state
/** Check one setting (from the link or the form); returns [value, problem]. */
function check(name, raw) {
  const bad = (allowed) => [undefined, `${name} ${JSON.stringify(raw)} is not allowed; allowed: ${allowed}`];
  switch (name) {
    case "series":
      return raw ? [raw, null] : bad("one of the served series");
    case "from":
    case "to":
      return isDay(raw) ? [raw, null] : bad("a date written YYYY-MM-DD");
    case "step":
      return raw in STEPS ? [raw, null] : bad(Object.keys(STEPS).join(", "));
    case "levels": {
      const levels = String(raw).split(",").filter(Boolean);
      return levels.length && levels.every((l) => LEVELS.includes(l)) ? [LEVELS.filter((l) => levels.includes(l)), null] : bad(`one or more of ${LEVELS.join(", ")}, separated by commas`);
    }
    case "k": {
      const k = Number(raw);
      return raw !== "" && Number.isInteger(k) && k >= 0 && k <= MAX_K ? [k, null] : bad(`a whole number from 0 to ${MAX_K}`);
    }
    default: {
      const [lo, hi, allowed] = STAFF_LIMITS[name];
      const v = Number(raw);
      return raw !== "" && Number.isFinite(v) && v >= lo && v <= hi ? [v, null] : bad(allowed);
    }
  }
}

const KEYS = ["series", "from", "to", "step", "levels", "k", ...Object.keys(STAFF_DEFAULTS)];

/** The settings held by a link (only those present), and what is wrong with it. */
function readLink(params) {
  const state = {};
  const problems = [];
  for (const name of KEYS) {
    if (!params.has(name)) continue;
    const [value, problem] = check(name, params.get(name));
    if (problem) problems.push(`The link's ${problem}.`);
    else state[name] = value;
  }
  for (const name of params.keys()) {
    if (!KEYS.includes(name)) problems.push(`The link's setting ${JSON.stringify(name)} is unknown; allowed: ${KEYS.join(", ")}.`);
  }
  return { state, problems };
}

/** The settings in the form, and what is wrong with them. */
function readForm() {
  const raw = {
    series: $("series").value,
    from: $("from").value,
    to: $("to").value,
    step: $("step").value,
    levels: [...document.querySelectorAll("input[name=level]:checked")].map((b) => b.value).join(","),
    k: $("k").value,
  };
  for (const name of Object.keys(STAFF_DEFAULTS)) raw[name] = $(name).value;
  const state = {};
  const problems = [];
  for (const [name, value] of Object.entries(raw)) {
    const [v, problem] = check(name, value);
    if (problem) problems.push(`${problem[0].toUpperCase()}${problem.slice(1)}.`);
    else state[name] = v;
  }
  if (state.from && state.to && state.to < state.from) problems.push(`Last day ${state.to} is before the first day ${state.from}; allowed: a last day on or after the first.`);
  if (problems.length === 0) state.end = addDays(state.to, 1);
  return { state, problems };
}

/** Put the settings into the form. */
function fillForm(state) {
  $("series").value = state.series;
  $("from").value = state.from;
  $("to").value = state.to;
  $("step").value = state.step;
  for (const box of document.querySelectorAll("input[name=level]")) box.checked = state.levels.includes(box.value);
  $("k").value = String(state.k);
  for (const name of Object.keys(STAFF_DEFAULTS)) $(name).value = String(state[name]);
}

/** Write the settings into the page's link (query string), so the view can be shared. */
function writeLink(state) {
  const params = new URLSearchParams();
  for (const name of KEYS) params.set(name, name === "levels" ? state.levels.join(",") : String(state[name]));
  history.replaceState(null, "", `${location.pathname}?${params}`);
}

/** Default settings for a series: the week after its history, within what it can forecast. */
function defaultsFor(entry) {
  const last = addDays(entry.forecast_until, -1);
  const from = entry.history.end_day <= last ? entry.history.end_day : entry.history.first_day;
  const to = addDays(from, DEFAULTS.days - 1) <= last ? addDays(from, DEFAULTS.days - 1) : last;
  return { series: entry.series, from, to, step: DEFAULTS.step, levels: DEFAULTS.levels, k: DEFAULTS.k, ...STAFF_DEFAULTS };
}

// ------------------------------------------------------------------------------------ the page
const page = {
  catalogue: new Map(),
  chart: null,
  doc: null,
  state: null,
  renders: 0,
};

function say(text) {
  $("status").textContent = text;
}

function problem(lines) {
  const box = $("problem");
  box.replaceChildren();
  for (const line of [].concat(lines)) el(box, "p", line);
}

function askForToken(why) {
  $("access").hidden = false;
  $("access-why").textContent = why;
  $("token").focus();
}

/** Load the catalogue; false if a token is needed first. */
async function loadCatalogue() {
  try {
    const doc = await (await call("v1/series")).json();
    page.catalogue = new Map(doc.series.map((s) => [s.series, s]));
  } catch (err) {
    if (err.status === 401 || err.status === 403) {
      if (err.status === 403) sessionStorage.removeItem(TOKEN_KEY);
      askForToken(err.status === 401 ? "This server asks for a read token before it shows forecasts." : "That token was refused; enter the read token of this server.");
      return false;
    }
    throw err;
  }
  $("access").hidden = true;
  const select = $("series");
  select.replaceChildren();
  for (const s of page.catalogue.values()) el(select, "option", `${s.series} (${s.tz}, ${s.model_version})`, { value: s.series });
  return true;
}

/** The calls for the settings: bands for steps within a day, whole local days otherwise. */
function forecastCalls(state, entry) {
  if (state.step !== "1d") {
    const q = new URLSearchParams({ start: state.from, end: state.end, step: state.step, tz: entry.tz, quantiles: "0.5", at_least: String(state.k) });
    for (const level of state.levels) q.append("levels", level);
    return { path: `v1/series/${encodeURIComponent(state.series)}/bands?${q}`, csv: { path: `v1/series/${encodeURIComponent(state.series)}/bands?${q}` } };
  }
  // Whole local days (23 or 25 hours on daylight-saving days): the API reads dates in the zone.
  const days = [];
  for (let d = state.from; d < state.end; d = addDays(d, 1)) days.push({ start: d, end: addDays(d, 1) });
  const body = { windows: days, tz: entry.tz, levels: state.levels.map(Number), quantiles: [0.5], at_least: [state.k] };
  return {
    path: `v1/series/${encodeURIComponent(state.series)}/forecast`,
    body,
    csv: { path: `v1/series/${encodeURIComponent(state.series)}/forecast`, body },
  };
}

async function request(spec, accept) {
  return spec.body === undefined ? call(spec.path, { accept }) : call(spec.path, { method: "POST", body: spec.body, accept });
}

/** Fill the table of windows from a forecast document. */
function renderTable(doc, ctx) {
  const table = $("table");
  const levels = levelKeys(doc.windows[0]);
  const k = Object.keys(doc.windows[0].at_least ?? {})[0];
  const head = table.tHead;
  head.replaceChildren();
  const hr = el(head, "tr");
  for (const h of ["window", "mean", "median", ...levels.map((l) => `${percent(l)} band`), "P(0)", `P(N \u2265 ${k})`, "note"]) el(hr, "th", h, { scope: "col" });
  const body = table.tBodies[0];
  const rows = [];
  for (const [i, w] of doc.windows.entries()) {
    const tr = el(null, "tr", undefined, { "data-i": i, "data-start": w.start, "data-end": w.end });
    el(tr, "th", windowLabel(w), { scope: "row" });
    const day = localParts(w.start).date;
    const note = day >= ctx.checkedUntil ? `over ${CHECKED_DAYS} days ahead` : day < ctx.historyEnd ? "in the history" : "";
    if (isClosed(w)) {
      tr.classList.add("closed");
      el(tr, "td", "closed: no arrivals expected", { colspan: 4 + levels.length, "data-field": "closed" });
    } else {
      el(tr, "td", fixed(w.mean, 2), { "data-field": "mean" });
      el(tr, "td", String(w.quantiles["0.5"]), { "data-field": "median" });
      for (const l of levels) el(tr, "td", `${w.intervals[l][0]}\u2013${w.intervals[l][1]}`, { "data-field": `band-${l}` });
      el(tr, "td", prob(w.p_zero), { "data-field": "p-zero" });
      el(tr, "td", prob(w.at_least[k]), { "data-field": "at-least" });
    }
    el(tr, "td", note);
    rows.push(tr);
  }
  body.replaceChildren(...rows);
}

function versionNote(entry) {
  const note = $("version-note");
  const diag = entry.diagnostics;
  if (diag && diag.ok === false) {
    note.hidden = false;
    note.replaceChildren();
    el(note, "strong", `Version ${entry.model_version} of ${entry.series} was flagged by its fit's checks.`);
    el(note, "span", ` ${diag.problems?.length ? diag.problems.join("; ") + ". " : ""}Its bands may be too narrow or off-centre: ask for a refit before relying on them.`);
  } else {
    note.hidden = true;
  }
}

/** Draw the view the form describes. */
async function show() {
  const { state, problems } = readForm();
  if (problems.length) {
    problem(problems);
    return;
  }
  problem([]);
  const entry = page.catalogue.get(state.series);
  if (!entry) {
    problem(`Series ${JSON.stringify(state.series)} is not served; allowed: ${[...page.catalogue.keys()].join(", ")}.`);
    return;
  }
  writeLink(state);
  page.state = state;
  say(`Loading ${state.series}\u2026`);
  const spec = forecastCalls(state, entry);
  let doc;
  try {
    doc = await (await request(spec, "application/json")).json();
  } catch (err) {
    say("");
    if (err.status === 401 || err.status === 403) askForToken(err.message);
    problem(err.message);
    return;
  }
  page.doc = doc;
  page.spec = spec;
  const ctx = {
    k: state.k,
    historyEnd: entry.history.end_day,
    checkedUntil: addDays(entry.history.end_day, CHECKED_DAYS),
    summary: `${doc.windows.length} windows of ${STEPS[state.step]} for ${doc.series} (${doc.tz}), ${dayLabel(state.from)} to ${dayLabel(state.to)}, model ${doc.model_version}`,
  };
  page.ctx = ctx;
  versionNote(entry);
  page.chart.actuals = new Map();
  page.chart.render(doc, ctx);
  renderTable(doc, ctx);
  $("chart-summary").textContent = `${ctx.summary}. Times are local to ${doc.tz}; the history ends on ${dayLabel(entry.history.end_day)}.`;
  $("forecast-caution").textContent = doc.caution;
  for (const id of ["export-csv", "export-svg", "export-png"]) $(id).disabled = false;
  say(`Showing ${doc.windows.length} windows.`);
  page.renders += 1;
  performance.mark(`ratecast:drawn:${page.renders}`);
  document.body.dataset.drawn = String(page.renders);
  staff();
}

/** Fill the staffing panel for the range shown. */
async function staff() {
  const state = page.state;
  const status = $("staffing-status");
  const panel = { caution: $("staffing-caution"), definitions: $("staffing-definitions"), chart: $("staffing-chart"), days: $("staffing-days"), table: $("staffing-table") };
  if (!state) return;
  const { state: now, problems } = readForm();
  if (problems.length) {
    problem(problems);
    return;
  }
  Object.assign(state, Object.fromEntries(Object.keys(STAFF_DEFAULTS).map((n) => [n, now[n]])));
  writeLink(state);
  if (!PLAN_STEPS.includes(state.step)) {
    status.textContent = "Staffing is planned per interval of 15, 30 or 60 minutes: choose one of those windows to see it.";
    for (const node of [panel.definitions, panel.chart, panel.days.tBodies[0], panel.table.tBodies[0]]) node.replaceChildren();
    document.body.dataset.staffed = String(page.renders);
    return;
  }
  status.textContent = "Working out staff\u2026";
  try {
    const entry = page.catalogue.get(state.series);
    const doc = await (await call(`v1/series/${encodeURIComponent(state.series)}/staffing`, { method: "POST", body: staffingBody(state, entry.tz, state) })).json();
    renderStaffing(panel, doc);
    status.textContent = `${doc.intervals.length} intervals, ${doc.target.queue}, target ${state.share}% answered within ${state.within} s.`;
    page.staffing = doc;
  } catch (err) {
    status.textContent = "";
    problem(err.message);
  }
  performance.mark(`ratecast:staffed:${page.renders}`);
  document.body.dataset.staffed = String(page.renders);
}

function download(blob, name) {
  const url = URL.createObjectURL(blob);
  const a = el(document.body, "a", undefined, { href: url, download: name });
  a.click();
  a.remove();
  setTimeout(() => URL.revokeObjectURL(url), 10_000);
}

function fileName(ext) {
  const s = page.state;
  return `${page.doc.series}-${page.doc.model_version}-${s.from}-to-${s.to}-${s.step}.${ext}`;
}

async function exportCsv() {
  try {
    const response = await request(page.spec.csv, "text/csv");
    download(new Blob([await response.text()], { type: "text/csv" }), fileName("csv"));
  } catch (err) {
    problem(err.message);
  }
}

function exportSvg() {
  download(new Blob([page.chart.toSvgText()], { type: "image/svg+xml" }), fileName("svg"));
}

async function exportPng() {
  const svg = page.chart.svg;
  try {
    const blob = await svgToPng(standaloneSvg(svg), Number(svg.getAttribute("width")), Number(svg.getAttribute("height")));
    download(blob, fileName("png"));
  } catch (err) {
    problem(err.message);
  }
}

async function start() {
  page.chart = new BandChart($("chart"), $("readout"), $("key"));
  $("controls").addEventListener("submit", (e) => {
    e.preventDefault();
    show();
  });
  $("staffing-form").addEventListener("submit", (e) => {
    e.preventDefault();
    staff();
  });
  $("series").addEventListener("change", () => {
    const entry = page.catalogue.get($("series").value);
    const { state } = readForm();
    const d = defaultsFor(entry);
    if (!state.from || state.from < entry.history.first_day || state.from >= entry.forecast_until) {
      $("from").value = d.from;
      $("to").value = d.to;
    }
  });
  $("token-form").addEventListener("submit", async (e) => {
    e.preventDefault();
    sessionStorage.setItem(TOKEN_KEY, $("token").value);
    $("token").value = "";
    await boot();
  });
  $("export-csv").addEventListener("click", exportCsv);
  $("export-svg").addEventListener("click", exportSvg);
  $("export-png").addEventListener("click", exportPng);
  new ResizeObserver(() => {
    // Redraw only when the width changed (drawing the chart changes the box's height too).
    const now = Math.floor($("chart").clientWidth);
    const drawnWidth = Number(page.chart.svg?.getAttribute("width") ?? now);
    if (page.doc && Math.abs(Math.max(320, now) - drawnWidth) > 4) {
      page.chart.render(page.doc, page.ctx);
      if (page.staffing) renderStaffing({ caution: $("staffing-caution"), definitions: $("staffing-definitions"), chart: $("staffing-chart"), days: $("staffing-days"), table: $("staffing-table") }, page.staffing);
    }
  }).observe($("chart"));
  window.ratecastPage = {
    /** The hook for counted arrivals: ``[{start, end, count}]`` drawn over the shown windows. */
    drawActuals: (actuals) => page.chart.drawActuals(actuals),
    get doc() {
      return page.doc;
    },
    get staffing() {
      return page.staffing;
    },
  };
  await boot();
}

async function boot() {
  say("Loading the series\u2026");
  let ready;
  try {
    ready = await loadCatalogue();
  } catch (err) {
    say("");
    problem(`The series could not be listed: ${err.message}`);
    return;
  }
  if (!ready) {
    say("");
    return;
  }
  if (page.catalogue.size === 0) {
    say("");
    problem("This server serves no series yet: publish one with `ratecast fit`.");
    return;
  }
  const { state: link, problems } = readLink(new URLSearchParams(location.search));
  if (link.series && !page.catalogue.has(link.series)) {
    problems.push(`The link's series ${JSON.stringify(link.series)} is not served; allowed: ${[...page.catalogue.keys()].join(", ")}.`);
    delete link.series;
  }
  const first = page.catalogue.get(link.series) ?? page.catalogue.values().next().value;
  fillForm({ ...defaultsFor(first), ...link });
  if (problems.length) {
    say("");
    problem([...problems, "Fix the settings below and press Show."]);
    return;
  }
  await show();
}

start();

