// Text helpers of the page: local times read from the API's own ISO 8601 strings, numbers, dates.
//
// The API gives every time in the series' zone with its UTC offset
// ("2026-03-08T03:00:00-05:00"). The page reads the wall-clock part from that text and places
// windows by the absolute instant, so it never needs time-zone rules of its own and a 23- or
// 25-hour day simply has fewer or more windows.

const ISO = /^(\d{4})-(\d{2})-(\d{2})T(\d{2}):(\d{2})(?::(\d{2})(?:\.\d+)?)?(Z|[+-]\d{2}:?\d{2})$/;
const DAY = /^\d{4}-\d{2}-\d{2}$/;
const WEEKDAYS = ["Sun", "Mon", "Tue", "Wed", "Thu", "Fri", "Sat"];
const MONTHS = ["Jan", "Feb", "Mar", "Apr", "May", "Jun", "Jul", "Aug", "Sep", "Oct", "Nov", "Dec"];

/** Local date ("2026-03-08"), time ("03:00") and offset ("-05:00") of an API time string. */
export function localParts(text) {
  const m = ISO.exec(text);
  if (!m) throw new Error(`time ${JSON.stringify(text)} is not an ISO 8601 time with an offset`);
  return { date: `${m[1]}-${m[2]}-${m[3]}`, time: `${m[4]}:${m[5]}`, offset: m[7] };
}

/** True for a calendar date written YYYY-MM-DD that exists. */
export function isDay(text) {
  if (typeof text !== "string" || !DAY.test(text)) return false;
  const [y, m, d] = text.split("-").map(Number);
  const t = new Date(Date.UTC(y, m - 1, d));
  return t.getUTCFullYear() === y && t.getUTCMonth() === m - 1 && t.getUTCDate() === d;
}

/** The date ``n`` days after ``day`` (calendar arithmetic, no clock involved). */
export function addDays(day, n) {
  const [y, m, d] = day.split("-").map(Number);
  return new Date(Date.UTC(y, m - 1, d + n)).toISOString().slice(0, 10);
}

/** "Sun 08 Mar" for a YYYY-MM-DD date. */
export function dayLabel(day) {
  const [y, m, d] = day.split("-").map(Number);
  const weekday = WEEKDAYS[new Date(Date.UTC(y, m - 1, d)).getUTCDay()];
  return `${weekday} ${String(d).padStart(2, "0")} ${MONTHS[m - 1]}`;
}

/** Hours a window lasts (absolute time), e.g. 23 for the day clocks go forward. */
export function hoursLong(w) {
  return (Date.parse(w.end) - Date.parse(w.start)) / 3_600_000;
}

/** A window as people read it: "Sun 08 Mar 01:00-03:00", or "Sun 08 Mar (23 h)" for a day. */
export function windowLabel(w) {
  const a = localParts(w.start);
  const b = localParts(w.end);
  const hours = hoursLong(w);
  if (a.time === "00:00" && b.time === "00:00" && b.date === addDays(a.date, 1)) {
    return hours === 24 ? dayLabel(a.date) : `${dayLabel(a.date)} (${hours} h)`;
  }
  const end = b.date === a.date ? b.time : b.time === "00:00" && b.date === addDays(a.date, 1) ? "24:00" : `${dayLabel(b.date)} ${b.time}`;
  const shift = a.offset !== b.offset ? ` (UTC${a.offset} to UTC${b.offset})` : "";
  return `${dayLabel(a.date)} ${a.time}\u2013${end}${shift}`;
}

/** A number with ``digits`` decimals. */
export function fixed(x, digits) {
  return Number(x).toFixed(digits);
}

/** A probability with three decimals; values that would round to 0 or 1 but are not say so. */
export function prob(p) {
  if (p > 0 && p < 0.0005) return "< 0.001";
  if (p < 1 && p >= 0.9995) return "> 0.999";
  return fixed(p, 3);
}

/** "80%" for 0.8. */
export function percent(level) {
  return `${Math.round(Number(level) * 1000) / 10}%`;
}

/** The level keys of a forecast row, widest last ("0.5", "0.8", "0.95"). */
export function levelKeys(row) {
  return Object.keys(row.intervals).sort((a, b) => Number(a) - Number(b));
}

/** A new element with text and attributes, appended to ``parent`` when one is given. */
export function el(parent, tag, text, attrs = {}) {
  const node = document.createElement(tag);
  if (text !== undefined && text !== null) node.textContent = text;
  for (const [k, v] of Object.entries(attrs)) node.setAttribute(k, v);
  if (parent) parent.appendChild(node);
  return node;
}
