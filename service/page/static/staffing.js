// The staffing panel: agents per interval for a service-level target, from the API's staffing
// route (the same code as `ratecast staff`). Two figures per interval: plug-in (agents for the
// predictive mean, forecast uncertainty ignored) and assured (fewest agents meeting the target with
// the chosen chance over the predictive arrival count).

import { drawAxes, geometry, niceMax, svgEl } from "./chart.js";
import { el, fixed, prob, windowLabel } from "./format.js";

/** Interval lengths the staffing route plans with. */
export const PLAN_STEPS = ["15min", "30min", "1h"];

/** Starting values of the target fields (percentages and seconds, as the form shows them). */
export const STAFF_DEFAULTS = { share: 80, within: 20, aht: 240, shrink: 30, meet: 90 };

/** Limits of each field: [lowest, highest, what it is]. */
export const STAFF_LIMITS = {
  share: [1, 99, "a whole percentage from 1 to 99"],
  within: [0, 86400, "seconds from 0 to 86400"],
  aht: [1, 86400, "seconds from 1 to 86400"],
  shrink: [0, 95, "a percentage from 0 to 95"],
  meet: [1, 99, "a whole percentage from 1 to 99"],
};

const noQueue = (row) => row.mean_arrivals === 0;

/** The request body of the staffing route for the page's range and a target. */
export function staffingBody(state, tz, target) {
  return {
    start: state.from,
    end: state.end,
    step: state.step,
    tz,
    handle_time_seconds: target.aht,
    answer_within_seconds: target.within,
    share: target.share / 100,
    meet_probability: target.meet / 100,
    shrinkage: target.shrink / 100,
  };
}

/** Draw agents by interval as two step lines: plug-in dashed, assured solid. */
export function drawStaffChart(host, rows) {
  const ws = rows.map((r) => ({ start: r.start, end: r.end }));
  const top = Math.max(1, ...rows.map((r) => Math.max(r.plug_in.agents, r.assured.agents)));
  const box = geometry(host, ws, niceMax(top + 0.5), { height: 220 });
  const svg = svgEl(null, "svg", {
    class: "rc-chart staff",
    viewBox: `0 0 ${box.width} ${box.height}`,
    width: box.width,
    height: box.height,
    role: "img",
    "aria-label": "Agents on the queue by interval: plug-in (dashed) and assured (solid). The table below lists the figures.",
  });
  drawAxes(svg, box, ws, "agents on the queue");
  for (const [policy, cls] of [["plug_in", "plug-in"], ["assured", "assured"]]) {
    let d = "";
    rows.forEach((r, i) => {
      const x0 = box.x(Date.parse(r.start)).toFixed(2);
      const x1 = box.x(Date.parse(r.end)).toFixed(2);
      const y = box.y(r[policy].agents).toFixed(2);
      d += i === 0 ? `M${x0} ${y}H${x1}` : `V${y}H${x1}`;
    });
    svgEl(svg, "path", { class: `agents ${cls}`, d });
  }
  for (const r of rows.filter(noQueue)) {
    const x0 = box.x(Date.parse(r.start));
    svgEl(svg, "rect", { class: "closed-hours", x: x0, y: box.top, width: box.x(Date.parse(r.end)) - x0, height: box.plotHeight });
  }
  host.replaceChildren(svg);
  return svg;
}

/** Fill the panel from a staffing document. */
export function renderStaffing(panel, doc) {
  panel.caution.textContent = doc.caution;
  panel.definitions.replaceChildren();
  for (const [term, text] of Object.entries(doc.definitions)) {
    el(panel.definitions, "dt", term.replace("_", "-"));
    el(panel.definitions, "dd", text);
  }
  drawStaffChart(panel.chart, doc.intervals);

  const head = panel.days.tHead;
  head.replaceChildren();
  const hr = el(head, "tr");
  for (const h of ["day", "mean arrivals", "plug-in agent-hours", "assured agent-hours", "plug-in paid hours", "assured paid hours"]) el(hr, "th", h, { scope: "col" });
  const body = panel.days.tBodies[0];
  body.replaceChildren();
  for (const d of doc.days) {
    const tr = el(body, "tr");
    el(tr, "th", d.day, { scope: "row" });
    for (const v of [fixed(d.mean_arrivals, 1), fixed(d.plug_in_hours, 1), fixed(d.assured_hours, 1), fixed(d.plug_in_paid_hours, 1), fixed(d.assured_paid_hours, 1)]) el(tr, "td", v);
  }

  const ihead = panel.table.tHead;
  ihead.replaceChildren();
  const top = el(ihead, "tr");
  el(top, "th", "", { scope: "col" });
  el(top, "th", "", { scope: "col" });
  el(top, "th", "plug-in", { scope: "colgroup", colspan: 4 });
  el(top, "th", "assured", { scope: "colgroup", colspan: 4 });
  const sub = el(ihead, "tr");
  for (const h of ["interval", "mean arrivals"]) el(sub, "th", h, { scope: "col" });
  for (let j = 0; j < 2; j++) for (const h of ["agents", "paid", "service level", "P(miss)"]) el(sub, "th", h, { scope: "col" });
  const ibody = panel.table.tBodies[0];
  ibody.replaceChildren();
  for (const r of doc.intervals) {
    const tr = el(ibody, "tr", undefined, { "data-start": r.start, "data-end": r.end });
    el(tr, "th", windowLabel(r), { scope: "row" });
    if (noQueue(r)) {
      tr.classList.add("closed");
      el(tr, "td", "closed: no arrivals expected", { colspan: 9 });
      continue;
    }
    el(tr, "td", fixed(r.mean_arrivals, 2));
    for (const policy of ["plug_in", "assured"]) {
      const p = r[policy];
      el(tr, "td", String(p.agents), { "data-field": `${policy}-agents` });
      el(tr, "td", String(p.scheduled), { "data-field": `${policy}-scheduled` });
      el(tr, "td", prob(p.expected_service_level));
      el(tr, "td", prob(p.miss_probability));
    }
  }
}
