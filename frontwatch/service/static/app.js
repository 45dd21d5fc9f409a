// frontwatch live page: loads /api/state once, then follows /api/stream (server-sent events).
// A reconnecting EventSource sends Last-Event-ID and the service replays what was missed; when that
// is no longer held it sends "resync" and the page reloads the state. Read-only: only GET requests.
"use strict";

const SVGNS = "http://www.w3.org/2000/svg";
const TOKEN = new URLSearchParams(location.search).get("token");
const PASS_FADE_S = 3 * 3600;      // passage rings fade out over this much data time
const FRONT_WINDOW_S = 3 * 3600;   // passages used for the page's own front estimate

const S = {
  net: "", stations: new Map(), sites: new Map(), events: [], alerts: [], front: null,
  dataTime: null, staleAfter: 600, tzOffsetMin: null, seq: 0, selected: null,
  dirty: new Set(), dirtyAll: false, frameQueued: false, traceDirty: false, lastTraceDraw: 0,
  proj: null, es: null, lostSince: null, updates: 0, frames: 0, lastId: 0,
};

function api(path) {
  if (!TOKEN) return path;
  return path + (path.includes("?") ? "&" : "?") + "token=" + encodeURIComponent(TOKEN);
}
function el(tag, attrs, parent) {
  const e = document.createElementNS(SVGNS, tag);
  for (const k in attrs || {}) e.setAttribute(k, attrs[k]);
  if (parent) parent.appendChild(e);
  return e;
}
function h(tag, cls, text, parent) {
  const e = document.createElement(tag);
  if (cls) e.className = cls;
  if (text !== undefined && text !== null) e.textContent = text;
  if (parent) parent.appendChild(e);
  return e;
}
const tparse = (s) => (s ? Date.parse(s) / 1000 : null);
const fin = (x) => typeof x === "number" && isFinite(x);
function localHM(t) {
  if (t === null || t === undefined) return "--:--";
  const off = S.tzOffsetMin === null ? 0 : S.tzOffsetMin;
  const d = new Date((t + off * 60) * 1000);
  return String(d.getUTCHours()).padStart(2, "0") + ":" + String(d.getUTCMinutes()).padStart(2, "0");
}
function fmtDur(s) {
  const m = Math.round(Math.abs(s) / 60);
  return m >= 90 ? Math.floor(m / 60) + " h " + (m % 60) + " min" : m + " min";
}
const fmt = (x, nd, unit) => (fin(x) ? x.toFixed(nd) + (unit || "") : "–");
const angDiff = (a, b) => Math.abs(((a - b + 540) % 360) - 180);
const kindName = (k) => (k || "event").replace(/_/g, " ");

// Alert states are the alert module's words; map them to four display classes by meaning.
function stateClass(state) {
  const s = String(state || "").toLowerCase();
  if (!s) return "s-none";
  if (/(clear|cancel|expire|ended|over|none|normal|quiet)/.test(s)) return "s-quiet";
  if (/(pass|arriv|onset|now|in_progress|active|under)/.test(s)) return "s-now";
  if (/(warn|immin|soon)/.test(s)) return "s-warn";
  return "s-watch";
}

// ---------------------------------------------------------------- state load
async function loadState() {
  const r = await fetch(api("api/state"), { cache: "no-store" });
  if (!r.ok) throw new Error("state: HTTP " + r.status);
  const st = await r.json();
  S.net = st.network;
  S.seq = st.seq;
  S.lastId = st.seq;
  S.staleAfter = st.stale_after_s;
  S.tzOffsetMin = st.tz_offset_min;
  S.dataTime = tparse(st.data_time);
  const nowMs = performance.now();
  S.stations.clear();
  for (const s of st.stations) {
    S.stations.set(s.id, {
      cfg: s, latest: s.latest, passages: s.passages || [], qc: s.qc_flags, qcRecent: s.qc_recent || [],
      recvMs: s.age_s === null ? null : nowMs - s.age_s * 1000, node: null,
    });
  }
  S.sites.clear();
  for (const s of st.sites) S.sites.set(s.id, { cfg: s, alert: s.alert, forecast: s.forecast, course: s.course, node: null });
  S.events = st.events || [];
  S.alerts = st.alerts || [];
  S.front = st.front;
  document.getElementById("network-name").textContent = S.net;
  const tz = S.tzOffsetMin === null ? "UTC" : "UTC" + (S.tzOffsetMin >= 0 ? "+" : "") + S.tzOffsetMin / 60 + " h";
  document.getElementById("tz-label").textContent = tz;
  buildMap(st.shoreline || []);
  buildPicker();
  renderAll();
  return st.seq;
}

// ---------------------------------------------------------------- map
function buildMap(shore) {
  const svg = document.getElementById("map");
  svg.textContent = "";
  const pts = [];
  for (const s of S.stations.values()) pts.push([s.cfg.lat, s.cfg.lon]);
  for (const s of S.sites.values()) pts.push([s.cfg.lat, s.cfg.lon]);
  if (!pts.length) return;
  const lat0 = pts.reduce((a, p) => a + p[0], 0) / pts.length;
  const kx = Math.cos((lat0 * Math.PI) / 180);
  let x0 = Infinity, x1 = -Infinity, y0 = Infinity, y1 = -Infinity;
  for (const [la, lo] of pts) {
    x0 = Math.min(x0, lo * kx); x1 = Math.max(x1, lo * kx); y0 = Math.min(y0, -la); y1 = Math.max(y1, -la);
  }
  const span = Math.max(x1 - x0, y1 - y0, 1e-3);
  const pad = span * 0.12;
  x0 -= pad; x1 += pad; y0 -= pad; y1 += pad;
  const W = 800, H = Math.max(380, Math.min(900, (W * (y1 - y0)) / (x1 - x0)));
  const sc = Math.min(W / (x1 - x0), H / (y1 - y0));
  const ox = (W - sc * (x1 - x0)) / 2, oy = (H - sc * (y1 - y0)) / 2;
  const kmPerPx = (111.2 * 1) / sc; // one degree of latitude is about 111.2 km
  const spacing = Math.sqrt((W * H) / Math.max(1, S.stations.size));
  S.proj = {
    W, H, kmPerPx, lat0, kx,
    xy: (la, lo) => [ox + (lo * kx - x0) * sc, oy + (-la - y0) * sc],
    arrowMax: Math.max(9, Math.min(60, spacing * 0.45)),
    sectorR: Math.max(5, Math.min(34, spacing * 0.28)),
    dotR: Math.max(2.5, Math.min(6, spacing * 0.06)),
    labels: S.stations.size <= 60,
  };
  svg.setAttribute("viewBox", `0 0 ${W} ${H.toFixed(0)}`);
  const defs = el("defs", {}, svg);
  for (const [id, cls] of [["ah-on", "mk-on"], ["ah-off", "mk-off"], ["ah-front", "mk-front"]]) {
    const m = el("marker", { id, viewBox: "0 0 10 10", refX: "8", refY: "5", markerWidth: "4", markerHeight: "4",
      orient: "auto-start-reverse" }, defs);
    el("path", { d: "M0,0 L10,5 L0,10 z", class: cls }, m);
  }
  const gShore = el("g", { id: "g-shore" }, svg);
  for (const line of shore) {
    const d = line.map((p, i) => (i ? "L" : "M") + S.proj.xy(p[0], p[1]).map((v) => v.toFixed(1)).join(",")).join(" ");
    el("path", { d, class: "shore" }, gShore);
  }
  el("g", { id: "g-sectors" }, svg);
  el("g", { id: "g-front" }, svg);
  el("g", { id: "g-rings" }, svg);
  const gSt = el("g", { id: "g-stations" }, svg);
  const gSites = el("g", { id: "g-sites" }, svg);
  // scale bar
  const bar = el("g", { class: "scale" }, svg);
  const km = niceKm(S.proj.kmPerPx * 120);
  const px = km / S.proj.kmPerPx;
  el("line", { x1: 15, y1: H - 15, x2: 15 + px, y2: H - 15, stroke: "#1d2329", "stroke-width": 2 }, bar);
  el("text", { x: 15, y: H - 20, "font-size": 11 }, bar).textContent = km + " km";
  el("text", { x: W - 20, y: 22, "font-size": 13, "text-anchor": "middle", "font-weight": 700 }, bar).textContent = "N";
  el("line", { x1: W - 20, y1: 45, x2: W - 20, y2: 27, stroke: "#1d2329", "stroke-width": 2, "marker-end": "url(#ah-front)" }, bar);

  const gSec = document.getElementById("g-sectors");
  for (const [id, s] of S.stations) {
    const [x, y] = S.proj.xy(s.cfg.lat, s.cfg.lon);
    s.xy = [x, y];
    el("path", { d: sectorPath(x, y, S.proj.sectorR, s.cfg.onshore_from_deg, s.cfg.onshore_halfwidth_deg), class: "sector" }, gSec);
    const g = el("g", { class: "stn nodata", "data-station": id }, gSt);
    el("title", {}, g).textContent = id;
    const arrow = el("line", { class: "arrow on", x1: x, y1: y, x2: x, y2: y, visibility: "hidden" }, g);
    const r = S.proj.dotR;
    const calm = el("circle", { class: "calm", cx: x, cy: y, r: r + 3.5, visibility: "hidden" }, g);
    const dot = el("circle", { class: "dot", cx: x, cy: y, r }, g);
    const flag = el("text", { class: "flag", x: x + r + 3, y: y + r + 12, visibility: "hidden" }, g);
    if (S.proj.labels) el("text", { class: "lbl", x: x - r - 3, y: y - r - 3, "text-anchor": "end" }, g).textContent = id;
    g.addEventListener("click", () => selectStation(id));
    s.node = { g, arrow, calm, dot, flag, title: g.firstChild };
  }
  for (const [id, s] of S.sites) {
    const [x, y] = S.proj.xy(s.cfg.lat, s.cfg.lon);
    const g = el("g", { class: "site", "data-site": id }, gSites);
    el("path", { d: `M${x},${y - 8} L${x + 8},${y} L${x},${y + 8} L${x - 8},${y} z` }, g);
    const right = x > S.proj.W * 0.6; // keep long names inside the map
    el("text", { x: right ? x - 11 : x + 11, y: y + 4, "text-anchor": right ? "end" : "start" }, g).textContent = s.cfg.name || id;
    s.xy = [x, y];
    s.mapNode = g;
  }
}
function niceKm(k) {
  const p = Math.pow(10, Math.floor(Math.log10(k)));
  for (const m of [5, 2, 1]) if (m * p <= k) return m * p;
  return p;
}
function sectorPath(x, y, r, from, half) {
  // Bearings are clockwise from north; screen y grows downward.
  const a0 = ((from - half) * Math.PI) / 180, a1 = ((from + half) * Math.PI) / 180;
  const p0 = [x + r * Math.sin(a0), y - r * Math.cos(a0)], p1 = [x + r * Math.sin(a1), y - r * Math.cos(a1)];
  const large = 2 * half > 180 ? 1 : 0;
  return `M${x},${y} L${p0[0].toFixed(1)},${p0[1].toFixed(1)} A${r},${r} 0 ${large} 1 ${p1[0].toFixed(1)},${p1[1].toFixed(1)} z`;
}

function stationStatus(s, nowMs) {
  if (!s.latest) return "nodata";
  const age = s.recvMs === null ? Infinity : (nowMs - s.recvMs) / 1000;
  const t = tparse(s.latest.time);
  const lag = S.dataTime !== null && t !== null ? S.dataTime - t : 0;
  if (age > S.staleAfter || lag > S.staleAfter) return "stale";
  return "ok";
}

function drawStation(id, nowMs) {
  const s = S.stations.get(id);
  if (!s || !s.node) return;
  const n = s.node, st = stationStatus(s, nowMs);
  const o = s.latest || {};
  let cls = "stn " + st + (S.selected === id ? " selected" : "");
  let showArrow = false, showCalm = false, flag = "";
  const [x, y] = s.xy;
  if (st === "nodata") flag = "NO DATA";
  else if (st === "stale") flag = "STALE";
  else if (!fin(o.wind_speed_ms)) flag = "NO WIND";
  else if (o.wind_speed_ms < 0.5 || !fin(o.wind_dir_deg)) showCalm = true;
  else {
    showArrow = true;
    const len = S.proj.arrowMax * (0.35 + 0.65 * Math.min(1, o.wind_speed_ms / 10));
    const to = ((o.wind_dir_deg + 180) * Math.PI) / 180;
    const on = angDiff(o.wind_dir_deg, s.cfg.onshore_from_deg) <= s.cfg.onshore_halfwidth_deg;
    n.arrow.setAttribute("x2", (x + len * Math.sin(to)).toFixed(1));
    n.arrow.setAttribute("y2", (y - len * Math.cos(to)).toFixed(1));
    n.arrow.setAttribute("class", "arrow " + (on ? "on" : "off"));
    n.arrow.setAttribute("marker-end", on ? "url(#ah-on)" : "url(#ah-off)");
  }
  if (s.qc > 0 && st === "ok" && qcRecentInHour(s)) flag = flag || "QC";
  n.g.setAttribute("class", cls);
  n.arrow.setAttribute("visibility", showArrow ? "visible" : "hidden");
  n.calm.setAttribute("visibility", showCalm ? "visible" : "hidden");
  n.flag.setAttribute("visibility", flag && (S.proj.labels || flag !== "QC") ? "visible" : "hidden");
  n.flag.textContent = flag;
  n.g.setAttribute("data-status", st);
  n.title.textContent = `${id}${s.cfg.name ? " (" + s.cfg.name + ")" : ""}: ` +
    (st === "ok" ? `${fmt(o.wind_dir_deg, 0, "°")} ${fmt(o.wind_speed_ms, 1, " m/s")}, ${fmt(o.temp_c, 1, " °C")}, ` +
      `dewpoint ${fmt(o.dewpoint_c, 1, " °C")}` : flag);
}
function qcRecentInHour(s) {
  if (!s.qcRecent.length || S.dataTime === null) return false;
  return S.dataTime - tparse(s.qcRecent[s.qcRecent.length - 1].time) < 3600;
}

function drawRings() {
  const g = document.getElementById("g-rings");
  if (!g) return;
  g.textContent = "";
  if (S.dataTime === null) return;
  for (const [id, s] of S.stations) {
    const p = s.passages[s.passages.length - 1];
    if (!p) continue;
    const age = S.dataTime - tparse(p.onset);
    if (age > PASS_FADE_S || age < -600) continue;
    const op = Math.max(0.15, 1 - age / PASS_FADE_S);
    const c = el("circle", { class: "ring k-" + p.kind, cx: s.xy[0], cy: s.xy[1], r: S.proj.dotR + 6, opacity: op.toFixed(2),
      "data-passage": p.id || "" }, g);
    el("title", {}, c).textContent = `${id}: ${kindName(p.kind)} at ${localHM(tparse(p.onset))}`;
  }
}

// The front: the tracker's own line when its outputs carry one; otherwise the page's estimate,
// a plane fitted to onset times of recent breeze-front passages (t = a + b*x + c*y), whose
// isochrone at data time is the front and whose slowness vector gives its motion.
function frontFromTracker() {
  const f = S.front;
  if (!f || typeof f !== "object") return null;
  const raw = f.line || f.points || f.coords || f.coordinates;
  if (!Array.isArray(raw) || raw.length < 2) return null;
  const pts = raw.map((p) => (Array.isArray(p) ? [p[0], p[1]] : [p.lat, p.lon])).filter((p) => fin(p[0]) && fin(p[1]));
  if (pts.length < 2) return null;
  const unc = [f.uncertainty_km, f.position_sd_km, f.spread_km].find(fin);
  const uncM = fin(f.position_sd_m) ? f.position_sd_m : fin(f.uncertainty_m) ? f.uncertainty_m : null;
  return { pts, speed: [f.speed_ms, f.front_speed_ms].find(fin), heading: [f.heading_deg, f.front_heading_deg].find(fin),
    uncKm: fin(unc) ? unc : uncM !== null ? uncM / 1000 : null, source: "tracker" };
}
function frontEstimate() {
  if (S.dataTime === null) return null;
  const P = S.proj, rows = [];
  for (const s of S.stations.values()) {
    for (const p of s.passages) {
      if (p.kind !== "breeze_front") continue;
      const t = tparse(p.onset);
      if (S.dataTime - t > FRONT_WINDOW_S || t > S.dataTime) continue;
      rows.push([(s.cfg.lon - 0) * P.kx * 111200, s.cfg.lat * 111200, t]);
    }
  }
  if (rows.length < 3) return null;
  const mx = rows.reduce((a, r) => a + r[0], 0) / rows.length, my = rows.reduce((a, r) => a + r[1], 0) / rows.length;
  const mt = rows.reduce((a, r) => a + r[2], 0) / rows.length;
  let sxx = 0, sxy = 0, syy = 0, sxt = 0, syt = 0;
  for (const [x, y, t] of rows) {
    const dx = x - mx, dy = y - my, dt = t - mt;
    sxx += dx * dx; sxy += dx * dy; syy += dy * dy; sxt += dx * dt; syt += dy * dt;
  }
  const det = sxx * syy - sxy * sxy;
  if (det <= 1e-6 * (sxx + syy) ** 2) return null; // stations in a line: no 2-D fit
  const b = (sxt * syy - syt * sxy) / det, c = (syt * sxx - sxt * sxy) / det; // s per metre east, north
  const slow = Math.hypot(b, c);
  if (slow === 0) return null;
  const speed = 1 / slow;
  if (speed < 0.2 || speed > 20) return null; // not a coherent moving front
  let ss = 0;
  for (const [x, y, t] of rows) ss += (t - (mt + b * (x - mx) + c * (y - my))) ** 2;
  const sdT = rows.length > 3 ? Math.sqrt(ss / (rows.length - 3)) : null;
  // Isochrone t = dataTime: points p with b*(x-mx) + c*(y-my) = dataTime - mt.
  const d = (S.dataTime - mt) / slow; // metres along the motion from the centroid
  const ux = b / slow, uy = c / slow; // unit vector of motion (east, north)
  const cx = mx + ux * d, cy = my + uy * d, L = 2.5e6;
  const toLL = (x, y) => [y / 111200, x / (P.kx * 111200)];
  const heading = ((Math.atan2(ux, uy) * 180) / Math.PI + 360) % 360;
  return { pts: [toLL(cx - uy * L, cy + ux * L), toLL(cx + uy * L, cy - ux * L)], speed, heading,
    uncKm: sdT === null ? null : (sdT * speed) / 1000, source: "estimate", n: rows.length, center: toLL(cx, cy) };
}
function drawFront() {
  const g = document.getElementById("g-front");
  if (!g) return;
  g.textContent = "";
  const note = document.getElementById("front-note");
  const f = frontFromTracker() || frontEstimate();
  if (!f) {
    note.textContent = "Front line: not drawn until the tracker reports one or at least three stations have had a breeze-front passage in the last 3 h.";
    return;
  }
  const P = S.proj;
  const xy = f.pts.map((p) => P.xy(p[0], p[1]));
  const d = xy.map((p, i) => (i ? "L" : "M") + p[0].toFixed(1) + "," + p[1].toFixed(1)).join(" ");
  if (fin(f.uncKm) && f.uncKm > 0) {
    el("path", { d, class: "front-band-stroke", stroke: "#D55E00", "stroke-opacity": 0.13, fill: "none",
      "stroke-width": Math.min(400, (2 * f.uncKm) / P.kmPerPx).toFixed(1), "stroke-linecap": "round" }, g);
  }
  el("path", { d, class: "front-line" + (f.source === "estimate" ? " est" : ""), "data-front": f.source }, g);
  if (fin(f.heading)) {
    const mid = f.center ? P.xy(f.center[0], f.center[1]) : xy[Math.floor(xy.length / 2)];
    const a = (f.heading * Math.PI) / 180, L = 40;
    el("line", { class: "front-arrow", x1: mid[0], y1: mid[1], x2: mid[0] + L * Math.sin(a), y2: mid[1] - L * Math.cos(a),
      "marker-end": "url(#ah-front)" }, g);
  }
  const motion = fin(f.speed) ? `moving ${fmt(f.speed, 1, " m/s")} toward ${fmt(f.heading, 0, "°")}` : "motion unknown";
  const unc = fin(f.uncKm) ? `, position ± ${fmt(f.uncKm, 1, " km")}` : "";
  note.textContent = f.source === "tracker"
    ? `Front line from the tracker: ${motion}${unc}.`
    : `Front line (dashed) is this page's own estimate from ${f.n} breeze-front passages in the last 3 h ` +
      `(a plane fitted to onset times): ${motion}${unc}. A real front bends; trust the site forecasts first.`;
}

// ---------------------------------------------------------------- site cards
function siteExpectedWind(site) {
  const f = site.forecast || {};
  const x = f.expected && typeof f.expected === "object" ? f.expected : {};
  const dir = [x.wind_dir_deg, f.wind_dir_after_deg].find(fin);
  const spd = [x.wind_speed_ms, f.speed_after_ms].find(fin);
  const gst = [x.wind_gust_ms, f.gust_after_ms].find(fin);
  if (dir !== undefined || spd !== undefined || gst !== undefined)
    return { dir, spd, gst, dT: x.temp_change_c, src: "forecast, from upstream stations" };
  // No forecast yet: what stations have measured after their recent breeze-front passages.
  let sx = 0, sy = 0, n = 0, sp = 0, nsp = 0, g = -Infinity;
  for (const e of S.events) {
    if (e.kind !== "breeze_front" || S.dataTime === null || S.dataTime - tparse(e.onset) > FRONT_WINDOW_S) continue;
    if (fin(e.wind_dir_after_deg)) {
      sx += Math.sin((e.wind_dir_after_deg * Math.PI) / 180); sy += Math.cos((e.wind_dir_after_deg * Math.PI) / 180); n++;
    }
    if (fin(e.speed_after_ms)) { sp += e.speed_after_ms; nsp++; }
    if (fin(e.gust_after_ms)) g = Math.max(g, e.gust_after_ms);
  }
  if (!n) return null;
  return { dir: ((Math.atan2(sx, sy) * 180) / Math.PI + 360) % 360, spd: nsp ? sp / nsp : undefined,
    gst: isFinite(g) ? g : undefined, src: `page estimate: measured after ${n} recent passage${n > 1 ? "s" : ""}` };
}
function buildCards() {
  const box = document.getElementById("sites");
  box.textContent = "";
  if (!S.sites.size) h("p", "note", "No sites in the network file: no forecasts or alerts.", box);
  for (const [id, s] of S.sites) {
    const c = h("article", "card", null, box);
    c.setAttribute("data-site", id);
    const h3 = h("h3", null, null, c);
    h("span", "name", s.cfg.name || id, h3);
    s.node = { card: c, state: h("span", "state", "", h3), eta: h("div", "eta", "", c), dl: h("dl", null, null, c) };
  }
}
function drawCard(id) {
  const s = S.sites.get(id);
  if (!s) return;
  if (!s.node) buildCards();
  const n = s.node, f = s.forecast, a = s.alert;
  const cls = stateClass(a && a.state);
  n.card.className = "card " + cls;
  n.state.textContent = a ? String(a.state).replace(/_/g, " ") : "no alert";
  if (s.mapNode) s.mapNode.setAttribute("class", "site " + cls);
  n.eta.textContent = "";
  if (!f) n.eta.append("no forecast yet");
  else if (f.status === "arrived") n.eta.append("front arrived", small(f.eta ? " at " + localHM(tparse(f.eta)) : ""));
  else if (!f.eta) n.eta.append("not expected ", small(f.reason ? String(f.reason).replace(/_/g, " ") : "front stalled or not heading here"));
  else {
    const eta = tparse(f.eta), dt = S.dataTime === null ? null : eta - S.dataTime;
    if (dt === null) n.eta.append("ETA " + localHM(eta));
    else if (dt > 60) n.eta.append("in " + fmtDur(dt), small(" at " + localHM(eta)));
    else if (dt > -600) n.eta.append("due now", small(" forecast " + localHM(eta)));
    else n.eta.append("overdue " + fmtDur(dt), small(" forecast " + localHM(eta)));
  }
  n.dl.textContent = "";
  const row = (k, v, cl) => { h("dt", null, k, n.dl); const dd = h("dd", cl || null, v, n.dl); return dd; };
  if (f && f.eta && (f.eta_earliest || f.eta_latest)) {
    row("window", `${localHM(tparse(f.eta_earliest))} – ${localHM(tparse(f.eta_latest))}` +
      (f.basis ? ` (${f.basis === "prior" ? "from a prior speed" : f.basis === "fit" ? "fitted to passages" : f.basis})` : ""));
  }
  if (f && (fin(f.front_speed_ms) || fin(f.front_heading_deg)))
    row("front", `${fmt(f.front_speed_ms, 1, "")}${fin(f.front_speed_sd_ms) ? " ± " + fmt(f.front_speed_sd_ms, 1, "") : ""} m/s ` +
      `toward ${fmt(f.front_heading_deg, 0, "°")}${fin(f.front_heading_sd_deg) ? " ± " + fmt(f.front_heading_sd_deg, 0, "°") : ""}` +
      (fin(f.stations) ? `, ${f.stations} stations` : "") + (typeof f.front === "string" ? ` (${f.front})` : ""));
  const w = siteExpectedWind(s);
  if (w) {
    const dd = row("after front", `${fmt(w.dir, 0, "°")} ${fmt(w.spd, 1, " m/s")}` + (fin(w.gst) ? `, gusts ${fmt(w.gst, 1, " m/s")}` : "") +
      (fin(w.dT) ? `, temperature ${w.dT > 0 ? "+" : ""}${fmt(w.dT, 1, " °C")}` : "") + ` (${w.src})`);
    if (fin(w.gst) && fin(s.cfg.gust_limit_ms) && w.gst >= s.cfg.gust_limit_ms) {
      dd.append(" ");
      h("span", "over", `at or above site gust limit ${s.cfg.gust_limit_ms} m/s`, dd);
    }
  } else row("after front", "not known yet");
  if (fin(s.cfg.gust_limit_ms)) row("gust limit", `${s.cfg.gust_limit_ms} m/s (from the site file)`);
  if (fin(s.cfg.course_axis_deg)) row("course axis", `${s.cfg.course_axis_deg}°`);
  const st = s.cfg.station && S.stations.get(s.cfg.station);
  if (st) {
    const stat = stationStatus(st, performance.now());
    const p = st.passages[st.passages.length - 1];
    const dd = row("station " + s.cfg.station, p ? `${kindName(p.kind)} at ${localHM(tparse(p.onset))} ` +
      `(${fmt(p.wind_dir_before_deg, 0, "°")} → ${fmt(p.wind_dir_after_deg, 0, "°")})` : "no passage yet");
    dd.setAttribute("data-last-passage", p ? p.id || "" : "");
    if (stat !== "ok") { dd.append(" "); h("span", "stale-warn", stat === "stale" ? "STALE" : "NO DATA", dd); }
  }
  if (a && a.headline) row("alert", `${a.headline}` + (fin(a.seq) ? ` (#${a.seq})` : ""));
  if (a && Array.isArray(a.thresholds_exceeded) && a.thresholds_exceeded.length) {
    const dd = row("limits", "");
    h("span", "over", a.thresholds_exceeded.map((e) => `${String(e.quantity).replace(/_/g, " ")} ${e.expected} ${e.unit} ` +
      `reaches limit ${e.limit} ${e.unit}`).join("; "), dd);
  }
  if (a && Array.isArray(a.data_warnings) && a.data_warnings.length) {
    const dd = row("data", "");
    h("span", "stale-warn", a.data_warnings.join("; "), dd);
  }
  const c = s.course;
  if (c) {
    const w0 = (c.windows || [])[0];
    row("course", `${c.pattern || "?"}` + (fin(c.shift_deg) ? `, shift ${c.shift_deg}°` : "") +
      (w0 ? `, ${w0.minutes}-min mean ${fmt(w0.dir_deg, 0, "°")} ± ${fmt(w0.spread_deg, 0, "°")} ${fmt(w0.speed_ms, 1, " m/s")}` : "") +
      (c.new_breeze ? `, new breeze since ${localHM(tparse(c.new_breeze_since))}` : ""));
  }
}
function small(t) { const e = document.createElement("small"); e.textContent = t; return e; }

// ---------------------------------------------------------------- logs and health
function drawLogs() {
  const al = document.getElementById("alerts");
  al.textContent = "";
  if (!S.alerts.length) h("li", "empty", "No alerts issued.", al);
  for (const a of S.alerts.slice(-60).reverse()) {
    const li = h("li", stateClass(a.state), null, al);
    h("span", "t", localHM(tparse(a.issued_at)), li);
    h("span", "k", `${a.site_name || a.site} ${String(a.state || "").replace(/_/g, " ")}`, li);
    li.append(" " + (a.headline || "") + (a.eta ? ` · ETA ${localHM(tparse(a.eta))}` : ""));
  }
  const pl = document.getElementById("passages");
  pl.textContent = "";
  if (!S.events.length) h("li", "empty", "No passages detected yet.", pl);
  for (const e of S.events.slice(-60).reverse()) {
    const li = h("li", null, null, pl);
    li.setAttribute("data-event", e.id || "");
    const on = tparse(e.onset), det = tparse(e.detected_at);
    h("span", "t", localHM(on), li);
    h("span", "k", `${e.station} ${kindName(e.kind)}`, li);
    li.append(` · wind ${fmt(e.wind_dir_before_deg, 0, "°")}→${fmt(e.wind_dir_after_deg, 0, "°")}` +
      ` · T ${fmt(e.temp_change_c, 1, " °C")} · Td ${fmt(e.dewpoint_change_c, 1, " °C")}` +
      (fin(e.confidence) ? ` · confidence ${e.confidence.toFixed(2)}` : "") +
      (on !== null && det !== null ? ` · detected +${Math.round((det - on) / 60)} min` : ""));
  }
}
function drawHealth(nowMs) {
  let ok = 0, stale = 0, nod = 0, qc = 0;
  const rows = [];
  for (const [id, s] of S.stations) {
    const st = stationStatus(s, nowMs);
    if (st === "ok") ok++; else if (st === "stale") stale++; else nod++;
    const qh = qcRecentInHour(s);
    if (qh) qc++;
    if (st !== "ok" || qh) rows.push([id, s, st]);
  }
  document.getElementById("health-summary").textContent =
    `${S.stations.size} stations: ${ok} reporting, ${stale} stale, ${nod} never reported, ${qc} with QC flags in the last hour` +
    ` (stale = no record for ${Math.round(S.staleAfter / 60)} min, by this screen's clock or behind data time).`;
  const tb = document.getElementById("health-rows");
  tb.textContent = "";
  for (const [id, s, st] of rows.slice(0, 40)) {
    const tr = h("tr", null, null, tb);
    tr.setAttribute("data-station", id);
    h("td", null, id, tr);
    h("td", st === "ok" ? "qc" : "bad", st === "ok" ? "QC" : st === "stale" ? "STALE" : "NO DATA", tr);
    h("td", null, s.latest ? localHM(tparse(s.latest.time)) : "never", tr);
    h("td", null, String(s.qc || 0), tr);
    const last = s.qcRecent[s.qcRecent.length - 1];
    h("td", null, last ? `${last.reason} at ${localHM(tparse(last.time))}` : "", tr);
  }
  if (rows.length > 40) h("td", null, `… and ${rows.length - 40} more`, h("tr", null, null, tb));
  if (!rows.length) h("td", null, "All stations reporting, no recent QC flags.", h("tr", null, null, tb));
}

// ---------------------------------------------------------------- station trace
function buildPicker() {
  const sel = document.getElementById("station-pick");
  sel.textContent = "";
  for (const id of S.stations.keys()) { const o = h("option", null, id, sel); o.value = id; }
  sel.onchange = () => selectStation(sel.value);
  const first = [...S.sites.values()].map((s) => s.cfg.station).find((x) => x) || S.stations.keys().next().value;
  if (first) selectStation(S.selected && S.stations.has(S.selected) ? S.selected : first);
}
function selectStation(id) {
  const prev = S.selected;
  S.selected = id;
  document.getElementById("station-pick").value = id;
  if (prev) S.dirty.add(prev);
  S.dirty.add(id);
  S.trace = null;
  fetch(api("api/series/" + encodeURIComponent(id)), { cache: "no-store" }).then((r) => r.json()).then((d) => {
    if (S.selected !== id) return;
    S.trace = { station: id, t: d.time.map(tparse), temp: d.temp_c, dew: d.dewpoint_c, spd: d.wind_speed_ms,
      gst: d.wind_gust_ms, dir: d.wind_dir_deg, passages: d.passages };
    drawTrace();
  }).catch(() => {});
  schedule();
}
function traceAppend(o) {
  const T = S.trace;
  if (!T || T.station !== o.station) return;
  T.t.push(tparse(o.time)); T.temp.push(o.temp_c); T.dew.push(o.dewpoint_c); T.spd.push(o.wind_speed_ms);
  T.gst.push(o.wind_gust_ms); T.dir.push(o.wind_dir_deg);
  if (T.t.length > 720) for (const k of ["t", "temp", "dew", "spd", "gst", "dir"]) T[k].shift();
  S.traceDirty = true;
}
function drawTrace() {
  const svg = document.getElementById("trace");
  svg.textContent = "";
  S.lastTraceDraw = performance.now();
  S.traceDirty = false;
  const T = S.trace;
  const W = svg.clientWidth || 600, H = svg.clientHeight || 300;
  svg.setAttribute("viewBox", `0 0 ${W} ${H}`);
  if (!T || !T.t.length) { el("text", { x: 10, y: 20 }, svg).textContent = "No records for this station yet."; return; }
  const st = S.stations.get(T.station);
  const L = 38, R = W - 10, t0 = T.t[0], t1 = Math.max(T.t[T.t.length - 1], t0 + 60);
  const X = (t) => L + ((t - t0) / (t1 - t0)) * (R - L);
  const panels = [[18, 118], [134, 196], [212, H - 18]];
  const series = (vals, y0, y1, lo, hi, cls) => {
    let d = "", pen = false;
    for (let i = 0; i < vals.length; i++) {
      if (!fin(vals[i])) { pen = false; continue; }
      const y = y1 - ((vals[i] - lo) / (hi - lo)) * (y1 - y0);
      d += (pen ? "L" : "M") + X(T.t[i]).toFixed(1) + "," + y.toFixed(1);
      pen = true;
    }
    if (d) el("path", { d, class: cls }, svg);
  };
  const range = (arrs, minSpan) => {
    let lo = Infinity, hi = -Infinity;
    for (const a of arrs) for (const v of a) if (fin(v)) { lo = Math.min(lo, v); hi = Math.max(hi, v); }
    if (!isFinite(lo)) return [0, 1];
    if (hi - lo < minSpan) { const m = (hi + lo) / 2; lo = m - minSpan / 2; hi = m + minSpan / 2; }
    return [Math.floor(lo), Math.ceil(hi)];
  };
  const axis = (y0, y1, lo, hi, unit, title) => {
    el("line", { class: "ax", x1: L, y1: y1, x2: R, y2: y1 }, svg);
    el("line", { class: "ax", x1: L, y1: y0, x2: L, y2: y1 }, svg);
    el("text", { x: L - 4, y: y0 + 8, "text-anchor": "end" }, svg).textContent = hi + unit;
    el("text", { x: L - 4, y: y1, "text-anchor": "end" }, svg).textContent = lo + unit;
    el("text", { class: "ttl", x: L + 4, y: y0 + 8 }, svg).textContent = title;
  };
  const [tl, th] = range([T.temp, T.dew], 4);
  axis(panels[0][0], panels[0][1], tl, th, "°", `${T.station}: temperature (solid) and dewpoint (dashed), °C`);
  series(T.temp, panels[0][0], panels[0][1], tl, th, "temp");
  series(T.dew, panels[0][0], panels[0][1], tl, th, "dew");
  const [, sh] = range([T.spd, T.gst], 4);
  axis(panels[1][0], panels[1][1], 0, sh, "", "wind speed m/s (line), gusts (dots)");
  series(T.spd, panels[1][0], panels[1][1], 0, sh, "spd");
  const [d0, d1] = panels[2];
  if (st) {
    // shade the onshore sector on the direction panel
    const lo = st.cfg.onshore_from_deg - st.cfg.onshore_halfwidth_deg, hi = st.cfg.onshore_from_deg + st.cfg.onshore_halfwidth_deg;
    for (const [a, b] of [[lo, hi], [lo + 360, hi + 360], [lo - 360, hi - 360]]) {
      const ya = Math.max(0, Math.min(360, a)), yb = Math.max(0, Math.min(360, b));
      if (yb > ya) el("rect", { class: "onsec", x: L, width: R - L, y: d1 - (yb / 360) * (d1 - d0), height: ((yb - ya) / 360) * (d1 - d0) }, svg);
    }
  }
  axis(d0, d1, 0, 360, "°", "wind direction (from), shaded = onshore");
  for (let i = 0; i < T.t.length; i++) {
    if (fin(T.gst[i])) el("circle", { class: "gst", cx: X(T.t[i]), cy: panels[1][1] - (T.gst[i] / sh) * (panels[1][1] - panels[1][0]), r: 1.4 }, svg);
    if (fin(T.dir[i])) el("circle", { class: "dir", cx: X(T.t[i]), cy: d1 - (T.dir[i] / 360) * (d1 - d0), r: 1.6 }, svg);
  }
  const step = Math.max(1800, Math.ceil((t1 - t0) / 6 / 1800) * 1800);
  for (let t = Math.ceil(t0 / step) * step; t <= t1; t += step)
    el("text", { x: X(t), y: H - 4, "text-anchor": "middle" }, svg).textContent = localHM(t);
  const ps = st ? st.passages : T.passages || [];
  for (const p of ps) {
    const t = tparse(p.onset);
    if (t < t0 || t > t1) continue;
    el("line", { class: "pass", x1: X(t), x2: X(t), y1: panels[0][0], y2: d1, "data-passage": p.id || "" }, svg);
    const left = X(t) > R - 110; // label on the left of a line near the right edge
    el("text", { class: "plbl", x: left ? X(t) - 3 : X(t) + 3, y: panels[1][0] - 2, "text-anchor": left ? "end" : "start" },
      svg).textContent = kindName(p.kind) + " " + localHM(t);
  }
}

// ---------------------------------------------------------------- rendering loop
function renderAll() {
  const now = performance.now();
  for (const id of S.stations.keys()) drawStation(id, now);
  buildCards();
  for (const id of S.sites.keys()) drawCard(id);
  drawRings(); drawFront(); drawLogs(); drawHealth(now); drawClock();
}
function schedule(all) {
  if (all) S.dirtyAll = true;
  if (S.frameQueued) return;
  S.frameQueued = true;
  requestAnimationFrame(flush);
}
function flush() {
  S.frameQueued = false;
  S.frames++;
  const now = performance.now();
  if (S.dirtyAll) {
    S.dirtyAll = false;
    S.dirty.clear();
    for (const id of S.stations.keys()) drawStation(id, now);
    for (const id of S.sites.keys()) drawCard(id);
    drawRings(); drawFront(); drawLogs(); drawHealth(now);
  } else {
    for (const id of S.dirty) drawStation(id, now);
    S.dirty.clear();
    if (S.dirtySites) for (const id of S.sites.keys()) drawCard(id);
  }
  S.dirtySites = false;
  if (S.traceDirty && now - S.lastTraceDraw > 1000) drawTrace();
  else if (S.traceDirty) setTimeout(() => schedule(), 1000);
  drawClock();
}
// How fast data time moves against this screen's clock (a replay runs many times real time).
const pace = { samples: [], ratio: null };
function samplePace() {
  const now = performance.now();
  if (S.dataTime === null) return;
  pace.samples.push([now, S.dataTime]);
  while (pace.samples.length > 2 && now - pace.samples[1][0] > 20000) pace.samples.shift();
  const [w0, d0] = pace.samples[0];
  pace.ratio = now - w0 > 8000 ? (S.dataTime - d0) / ((now - w0) / 1000) : null;
}
function drawClock() {
  let txt = S.dataTime === null ? "no data yet" : localHM(S.dataTime) + (S.tzOffsetMin === null ? " UTC" : " local");
  if (pace.ratio !== null && pace.ratio > 1.5) txt += ` · replay, about ${Math.round(pace.ratio)}× real time`;
  document.getElementById("data-time").textContent = txt;
}
setInterval(() => { samplePace(); drawClock(); }, 2000);

// ---------------------------------------------------------------- the stream
function onObs(o) {
  const s = S.stations.get(o.station);
  if (!s) return;
  s.latest = o;
  s.recvMs = performance.now();
  if (o.qc && o.qc.length) { s.qc += o.qc.length; for (const r of o.qc) s.qcRecent.push({ time: o.time, reason: r }); }
  if (s.qcRecent.length > 10) s.qcRecent.splice(0, s.qcRecent.length - 10);
  const t = tparse(o.time);
  if (t !== null && (S.dataTime === null || t > S.dataTime)) S.dataTime = t;
  S.dirty.add(o.station);
  traceAppend(o);
  S.updates++;
  schedule();
}
function onEvent(e) {
  S.events.push(e);
  if (S.events.length > 200) S.events.splice(0, S.events.length - 200);
  const s = S.stations.get(e.station);
  if (s) { s.passages.push(e); if (s.passages.length > 20) s.passages.shift(); }
  if (S.trace && S.trace.station === e.station) S.traceDirty = true;
  schedule(true);
}
function onForecast(f) { const s = S.sites.get(f.site); if (s) s.forecast = f; takeFront(f); schedule(true); }
function onAlert(a) {
  const s = S.sites.get(a.site);
  if (s) s.alert = a;
  S.alerts.push(a);
  if (S.alerts.length > 200) S.alerts.splice(0, S.alerts.length - 200);
  takeFront(a);
  schedule(true);
}
function onCourse(c) { const s = S.sites.get(c.site); if (s) { s.course = c; S.dirtySites = true; schedule(); } }
function takeFront(o) { if (o && o.front && typeof o.front === "object") S.front = o.front; }

function openStream(since) {
  if (S.es) S.es.close();
  const es = new EventSource(api("api/stream?since=" + since));
  S.es = es;
  const wrap = (fn) => (m) => {
    S.lastId = Number(m.lastEventId);
    try { fn(JSON.parse(m.data)); } catch (err) { console.error(err); }
  };
  es.addEventListener("obs", wrap(onObs));
  es.addEventListener("event", wrap(onEvent));
  es.addEventListener("forecast", wrap(onForecast));
  es.addEventListener("alert", wrap(onAlert));
  es.addEventListener("course", wrap(onCourse));
  es.addEventListener("front", wrap((f) => { S.front = f; schedule(true); }));
  es.addEventListener("resync", () => { es.close(); resync(); });
  es.onopen = () => { S.lostSince = null; setLink("ok", "live"); };
  es.onerror = () => {
    if (S.lostSince === null) S.lostSince = new Date();
    setLink("lost", "connection lost since " + S.lostSince.toTimeString().slice(0, 8) + ", retrying");
    if (es.readyState === EventSource.CLOSED) setTimeout(resync, 3000);
  };
}
function setLink(kind, text) {
  const e = document.getElementById("link");
  e.className = "link link-" + kind;
  e.textContent = text;
}
async function resync() {
  try {
    const seq = await loadState();
    openStream(seq);
  } catch (err) {
    setLink("lost", "service unreachable, retrying");
    setTimeout(resync, 3000);
  }
}

// Ages and countdowns move even when nothing arrives: that is how a silent station turns STALE.
setInterval(() => schedule(true), 5000);
window.frontwatch = S; // for tests and benchmarks to read (read-only use)
resync();
