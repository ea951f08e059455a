// Plinth portfolio explorer. Plain DOM + canvas, no library, no network.
// Every text from the data is set with textContent (never innerHTML), so names from user files
// cannot inject markup or script.
"use strict";
(function () {
  performance.mark("script-start");
  const DATA = JSON.parse(document.getElementById("plinth-data").textContent);
  performance.mark("json-parsed");
  // Structures arrive as columns (field names once); rebuild one object per structure.
  // The map and the table need a few fields of every structure; the detail panel rebuilds the
  // whole record of the one selected (`full`).
  const FIELDS = DATA.structures.fields;
  const ROWS = DATA.structures.rows;
  const LIGHT = ["id", "name", "status", "damage_category", "damage_category_probability", "evidence_grade",
    "vertical_velocity_mm_per_yr", "trigger_status", "change", "footprint"];
  const at = LIGHT.map(f => FIELDS.indexOf(f));
  const S = ROWS.map((row, r) => {
    const o = { _row: r };
    for (let k = 0; k < LIGHT.length; k++) o[LIGHT[k]] = at[k] < 0 ? null : row[at[k]];
    return o;
  });
  // Repeated texts arrive as indices into DATA.strings.
  const INTERNED = new Set(["status_reasons", "evidence_grade_reasons", "damage_route", "look_directions", "datasets"]);
  function unintern(v) {
    if (typeof v === "number") return DATA.strings[v];
    if (Array.isArray(v)) return v.map(unintern);
    return v;
  }
  function full(s) {
    const o = Object.assign({}, s);
    const row = ROWS[s._row];
    for (let k = 0; k < FIELDS.length; k++) o[FIELDS[k]] = INTERNED.has(FIELDS[k]) ? unintern(row[k]) : row[k];
    if (o.series) o.series = Object.assign({}, o.series, { mm: o.series.mm_tenths.map(v => (v === null ? null : v / 10)) });
    return o;
  }
  const P = DATA.portfolio;
  const CAT_COLOURS = ["#3a9a4a", "#a6cf4f", "#f2c232", "#ef8a2c", "#d7301f"];
  const NA_FILL = "#ffffff";
  const CAT_NAMES = ["0 negligible", "1 very slight", "2 slight", "3 moderate", "4–5 severe to very severe"];
  const ROW_H = 23;

  // ---------- small helpers ----------
  function el(tag, attrs, text) {
    const e = document.createElement(tag);
    if (attrs) for (const k in attrs) e.setAttribute(k, attrs[k]);
    if (text !== undefined && text !== null) e.textContent = String(text);
    return e;
  }
  function isNum(v) { return typeof v === "number" && isFinite(v); }
  // Fixed decimals for mm-type values, 3 significant digits (exponent when tiny) for ratios.
  function fmt(v, kind) {
    if (!isNum(v)) return "n/a";
    if (kind === "mm" || kind === "mmyr") return v.toFixed(1);
    if (kind === "pct") return (100 * v).toFixed(0);
    if (kind === "deg") return v.toFixed(0);
    if (kind === "ratio") return v === 0 ? "0" : v.toExponential(2);
    return String(v);
  }
  function notAssessable(s) { return s.damage_category === null || s.damage_category === undefined; }
  function catKey(s) {
    if (s.status === "insufficient_data") return "insufficient";
    if (notAssessable(s)) return "nocat";
    return String(s.damage_category);
  }
  function catLabel(s) {
    if (s.status === "insufficient_data") return "insufficient data";
    if (notAssessable(s)) return "no category";
    return s.damage_category === 4 ? "4–5" : String(s.damage_category);
  }
  function changeKey(s) {
    const c = s.change;
    if (!c) return "none";
    if (c.kind === "new") return "new";
    if (c.category_changed) return "category";
    if (c.velocity_change_significant) return "velocity";
    if (c.new_exceedances && c.new_exceedances.length) return "trigger";
    return "unchanged";
  }
  const CHANGE_TEXT = { none: "no previous period", new: "new", category: "category changed", velocity: "velocity changed (|z| > 2)", trigger: "new trigger exceeded", unchanged: "no significant change" };

  performance.mark("objects");
  // ---------- header, cautions, provenance ----------
  document.getElementById("title").textContent = P.name + " — portfolio explorer";
  document.getElementById("window").textContent =
    "Assessment window " + (P.window_start || "n/a") + " to " + (P.window_end || "n/a") +
    " · analysis date " + (P.analysis_date || "n/a") + " (last acquisition used) · " + S.length +
    " structures · CRS " + P.analysis_crs + (P.previous ? " · compared with the previous period in " + P.previous : "");
  const cautions = document.getElementById("cautions");
  for (const c of DATA.cautions) cautions.appendChild(el("p", null, c));
  const prov = document.getElementById("provenance");
  prov.appendChild(el("p", null, "Written by " + DATA.provenance.tool + " " + DATA.provenance.tool_version + ". Inputs and their SHA-256:"));
  const pt = el("table");
  for (const i of DATA.provenance.inputs || []) {
    const tr = el("tr");
    tr.appendChild(el("td", null, i.role + (i.name ? " " + i.name : "")));
    const td = el("td");
    td.appendChild(el("div", null, i.path));
    td.appendChild(el("code", null, i.sha256));
    tr.appendChild(td);
    pt.appendChild(tr);
  }
  prov.appendChild(pt);

  // ---------- geometry ----------
  const bbox = [Infinity, Infinity, -Infinity, -Infinity];
  for (const s of S) {
    const b = [Infinity, Infinity, -Infinity, -Infinity];
    for (const r of s.footprint) for (let k = 0; k + 1 < r.length; k += 2) {
      b[0] = Math.min(b[0], r[k]); b[1] = Math.min(b[1], r[k + 1]);
      b[2] = Math.max(b[2], r[k]); b[3] = Math.max(b[3], r[k + 1]);
    }
    s._bbox = b;
    s._cx = (b[0] + b[2]) / 2; s._cy = (b[1] + b[3]) / 2;
    if (isFinite(b[0])) { bbox[0] = Math.min(bbox[0], b[0]); bbox[1] = Math.min(bbox[1], b[1]); bbox[2] = Math.max(bbox[2], b[2]); bbox[3] = Math.max(bbox[3], b[3]); }
  }
  if (!isFinite(bbox[0])) { bbox[0] = 0; bbox[1] = 0; bbox[2] = 100; bbox[3] = 100; }
  function ringPath(path, r) {
    if (r.length < 4) return;
    path.moveTo(r[0], r[1]);
    for (let k = 2; k + 1 < r.length; k += 2) path.lineTo(r[k], r[k + 1]);
    path.closePath();
  }
  // One path per map class, built once from SVG path data (far faster than 100 000 lineTo
  // calls): one fill and one stroke per class and frame, whatever the portfolio size.
  function ringData(parts, r) {
    if (r.length < 6) return false;
    parts.push("M" + r[0] + " " + r[1]);
    for (let k = 2; k + 1 < r.length; k += 2) parts.push("L" + r[k] + " " + r[k + 1]);
    parts.push("Z");
    return true;
  }
  function footprintPath(s) {
    const parts = [];
    for (const r of s.footprint) ringData(parts, r);
    return new Path2D(parts.join(""));
  }
  const groups = {};
  {
    const parts = {}, counts = {};
    for (const s of S) {
      const k = catKey(s);
      if (!parts[k]) { parts[k] = []; counts[k] = 0; }
      let traced = false;
      for (const r of s.footprint) traced = ringData(parts[k], r) || traced;
      if (traced) counts[k]++;
    }
    for (const k in parts) groups[k] = { path: new Path2D(parts[k].join("")), count: counts[k] };
  }
  let shapesDrawn = 0;
  performance.mark("paths-built");

  // ---------- map ----------
  const canvas = document.getElementById("map");
  const ctx = canvas.getContext("2d");
  const view = { scale: 1, tx: 0, ty: 0 }; // screen = (x * scale + tx, -y * scale + ty), CSS px
  let selected = null;
  let hatch = null;
  function hatchPattern() {
    const c = document.createElement("canvas");
    c.width = 8; c.height = 8;
    const g = c.getContext("2d");
    g.fillStyle = NA_FILL; g.fillRect(0, 0, 8, 8);
    g.strokeStyle = "#777"; g.lineWidth = 1.2;
    g.beginPath(); g.moveTo(0, 8); g.lineTo(8, 0); g.moveTo(-2, 2); g.lineTo(2, -2); g.moveTo(6, 10); g.lineTo(10, 6); g.stroke();
    return ctx.createPattern(c, "repeat");
  }
  function size() {
    const r = canvas.getBoundingClientRect();
    const dpr = window.devicePixelRatio || 1;
    canvas.width = Math.max(1, Math.round(r.width * dpr));
    canvas.height = Math.max(1, Math.round(r.height * dpr));
    return r;
  }
  function fit(b) {
    const r = canvas.getBoundingClientRect();
    const w = Math.max(b[2] - b[0], 10), h = Math.max(b[3] - b[1], 10);
    view.scale = 0.9 * Math.min(r.width / w, r.height / h);
    view.tx = r.width / 2 - view.scale * (b[0] + b[2]) / 2;
    view.ty = r.height / 2 + view.scale * (b[1] + b[3]) / 2;
  }
  function toWorld(px, py) { return [(px - view.tx) / view.scale, -(py - view.ty) / view.scale]; }
  function toScreen(x, y) { return [x * view.scale + view.tx, -y * view.scale + view.ty]; }
  function polyline(pts, close) {
    ctx.beginPath();
    pts.forEach((p, k) => (k ? ctx.lineTo(p[0], p[1]) : ctx.moveTo(p[0], p[1])));
    if (close) ctx.closePath();
  }
  function drawWorks(px) {
    const W = DATA.works;
    if (!W) return;
    for (const t of W.tunnels) {
      for (const sg of t.segments) {
        polyline(sg.zone, true);
        ctx.fillStyle = "rgba(120, 80, 200, 0.10)"; ctx.fill();
        ctx.setLineDash([6 * px, 4 * px]); ctx.strokeStyle = "rgba(120, 80, 200, 0.8)"; ctx.lineWidth = px;
        for (const l of sg.inflection) { polyline(l, false); ctx.stroke(); }
        ctx.setLineDash([]);
      }
      polyline(t.centreline, false);
      ctx.strokeStyle = "#5a2ca0"; ctx.lineWidth = 3 * px; ctx.stroke();
    }
    for (const e of W.excavations) {
      for (const z of e.zone) {
        const p = new Path2D(); ringPath(p, z);
        ctx.fillStyle = "rgba(160, 90, 40, 0.10)"; ctx.fill(p);
      }
      polyline(e.outline, true);
      ctx.strokeStyle = "#8a4b14"; ctx.lineWidth = 2 * px; ctx.stroke();
    }
  }
  function draw() {
    const r = size();
    const dpr = canvas.width / Math.max(r.width, 1);
    ctx.setTransform(1, 0, 0, 1, 0, 0);
    ctx.clearRect(0, 0, canvas.width, canvas.height);
    ctx.setTransform(dpr * view.scale, 0, 0, -dpr * view.scale, dpr * view.tx, dpr * view.ty);
    const px = 1 / view.scale; // one CSS pixel in metres
    drawWorks(px);
    if (!hatch) hatch = hatchPattern();
    // The hatch keeps 8 device pixels per tile whatever the zoom.
    hatch.setTransform(new DOMMatrix([1 / (dpr * view.scale), 0, 0, 1 / (dpr * view.scale), 0, 0]));
    shapesDrawn = 0;
    for (const k in groups) {
      shapesDrawn += groups[k].count;
      if (k === "insufficient" || k === "nocat") {
        ctx.fillStyle = hatch;
        ctx.setLineDash(k === "insufficient" ? [4 * px, 3 * px] : [1.5 * px, 2 * px]);
        ctx.strokeStyle = "#444";
      } else {
        ctx.fillStyle = CAT_COLOURS[Number(k)];
        ctx.setLineDash([]);
        ctx.strokeStyle = "#333";
      }
      ctx.fill(groups[k].path, "evenodd");
      if (view.scale >= 0.6) {
        ctx.lineWidth = px;
      } else {
        // City scale: a dark outline would hide the colours, and a building may be smaller than
        // a pixel; a 2-pixel outline in the class colour keeps every one visible.
        ctx.setLineDash([]);
        ctx.strokeStyle = k === "insufficient" || k === "nocat" ? "#9a9a9a" : CAT_COLOURS[Number(k)];
        ctx.lineWidth = 2 * px;
      }
      ctx.stroke(groups[k].path);
    }
    ctx.setLineDash([]);
    if (selected) {
      const p = footprintPath(selected);
      ctx.lineWidth = 2 * px; ctx.strokeStyle = "#0057d9"; ctx.stroke(p);
      // A marker so a small footprint stays findable at any zoom.
      const b = selected._bbox;
      const rad = Math.max((b[2] - b[0]) / 2, (b[3] - b[1]) / 2) + 8 * px;
      ctx.beginPath(); ctx.arc(selected._cx, selected._cy, rad, 0, 2 * Math.PI);
      ctx.lineWidth = 2 * px; ctx.stroke();
    }
    ctx.setTransform(dpr, 0, 0, dpr, 0, 0);
    drawScaleBar(r);
    drawNorth(r);
    canvas.dataset.shapes = String(shapesDrawn);
  }
  function niceLength(m) {
    const p = Math.pow(10, Math.floor(Math.log10(m)));
    for (const f of [5, 2, 1]) if (f * p <= m) return f * p;
    return p;
  }
  function drawScaleBar(r) {
    const len = niceLength(120 / view.scale);
    const w = len * view.scale;
    const x = 12, y = r.height - 14;
    ctx.fillStyle = "rgba(255,255,255,0.8)"; ctx.fillRect(x - 4, y - 16, w + 60, 24);
    ctx.strokeStyle = "#111"; ctx.lineWidth = 2;
    ctx.beginPath(); ctx.moveTo(x, y - 5); ctx.lineTo(x, y); ctx.lineTo(x + w, y); ctx.lineTo(x + w, y - 5); ctx.stroke();
    ctx.fillStyle = "#111"; ctx.font = "12px sans-serif";
    ctx.fillText(len >= 1000 ? len / 1000 + " km" : len + " m", x + w + 6, y);
  }
  function drawNorth(r) {
    const x = r.width - 26, y = 16;
    ctx.fillStyle = "rgba(255,255,255,0.8)"; ctx.fillRect(x - 14, y - 8, 28, 48);
    ctx.fillStyle = "#111";
    ctx.beginPath(); ctx.moveTo(x, y); ctx.lineTo(x + 8, y + 22); ctx.lineTo(x, y + 17); ctx.lineTo(x - 8, y + 22); ctx.closePath(); ctx.fill();
    ctx.font = "bold 12px sans-serif"; ctx.textAlign = "center"; ctx.fillText("N", x, y + 36); ctx.textAlign = "left";
  }
  function pointInRing(x, y, r) {
    let inside = false;
    const n = r.length / 2;
    for (let i = 0, j = n - 1; i < n; j = i++) {
      const xi = r[2 * i], yi = r[2 * i + 1], xj = r[2 * j], yj = r[2 * j + 1];
      if ((yi > y) !== (yj > y) && x < ((xj - xi) * (y - yi)) / (yj - yi) + xi) inside = !inside;
    }
    return inside;
  }
  function insideAll(s, x, y) {
    let inside = false;
    for (const r of s.footprint) if (pointInRing(x, y, r)) inside = !inside;
    return inside;
  }
  function edgeDistance(s, x, y) {
    let best = Infinity;
    for (const r of s.footprint) for (let k = 0; k + 3 < r.length; k += 2) {
      const ax = r[k], ay = r[k + 1], bx = r[k + 2], by = r[k + 3];
      const dx = bx - ax, dy = by - ay, l2 = dx * dx + dy * dy;
      const t = l2 > 0 ? Math.max(0, Math.min(1, ((x - ax) * dx + (y - ay) * dy) / l2)) : 0;
      best = Math.min(best, Math.hypot(x - ax - t * dx, y - ay - t * dy));
    }
    return best;
  }
  // The point of a 20 × 20 grid over the footprint that is inside and farthest from its edges.
  function interiorPoint(s) {
    const b = s._bbox;
    let best = [s._cx, s._cy], bestD = -1;
    for (let i = 0; i <= 20; i++) for (let j = 0; j <= 20; j++) {
      const x = b[0] + (b[2] - b[0]) * i / 20, y = b[1] + (b[3] - b[1]) * j / 20;
      if (!insideAll(s, x, y)) continue;
      const d = edgeDistance(s, x, y);
      if (d > bestD) { bestD = d; best = [x, y]; }
    }
    return best;
  }
  function hit(x, y) {
    const tol = 3 / view.scale;
    let best = null, bestD = Infinity;
    for (const s of S) {
      const b = s._bbox;
      if (x < b[0] - tol || x > b[2] + tol || y < b[1] - tol || y > b[3] + tol) continue;
      let inside = false;
      for (const r of s.footprint) if (pointInRing(x, y, r)) inside = !inside;
      const d = inside ? -1 : Math.hypot(x - s._cx, y - s._cy);
      if (d < bestD) { best = s; bestD = d; }
    }
    return best;
  }
  let drag = null;
  canvas.addEventListener("mousedown", e => { drag = { x: e.clientX, y: e.clientY, moved: false }; });
  window.addEventListener("mousemove", e => {
    if (!drag) return;
    const dx = e.clientX - drag.x, dy = e.clientY - drag.y;
    if (Math.abs(dx) + Math.abs(dy) > 2) drag.moved = true;
    if (drag.moved) { view.tx += dx; view.ty += dy; drag.x = e.clientX; drag.y = e.clientY; schedule(); }
  });
  window.addEventListener("mouseup", e => {
    if (drag && !drag.moved && e.target === canvas) {
      const rc = canvas.getBoundingClientRect();
      const [x, y] = toWorld(e.clientX - rc.left, e.clientY - rc.top);
      const s = hit(x, y);
      if (s) select(s, "map");
    }
    drag = null;
  });
  function zoomAt(f, px, py) {
    const [x, y] = toWorld(px, py);
    view.scale *= f;
    view.tx = px - x * view.scale;
    view.ty = py + y * view.scale;
    schedule();
  }
  canvas.addEventListener("wheel", e => {
    e.preventDefault();
    const rc = canvas.getBoundingClientRect();
    zoomAt(e.deltaY < 0 ? 1.25 : 0.8, e.clientX - rc.left, e.clientY - rc.top);
  }, { passive: false });
  function centreZoom(f) { const rc = canvas.getBoundingClientRect(); zoomAt(f, rc.width / 2, rc.height / 2); }
  document.getElementById("zoom-in").onclick = () => centreZoom(1.5);
  document.getElementById("zoom-out").onclick = () => centreZoom(1 / 1.5);
  document.getElementById("zoom-fit").onclick = () => { fit(bbox); schedule(); };
  let pending = false;
  function schedule() { if (!pending) { pending = true; requestAnimationFrame(() => { pending = false; draw(); }); } }
  window.addEventListener("resize", schedule);

  // Legend.
  const legend = document.getElementById("legend");
  function legendItem(cls, colour, text) {
    const span = el("span");
    const sw = el("span", { class: "swatch " + cls });
    if (colour) sw.style.background = colour;
    span.appendChild(sw); span.appendChild(document.createTextNode(text));
    legend.appendChild(span);
  }
  CAT_NAMES.forEach((n, k) => legendItem("", CAT_COLOURS[k], "category " + n));
  legendItem("na", null, "not assessable (insufficient data or no category)");
  if (DATA.works) {
    legendItem("", "#5a2ca0", "tunnel centreline");
    legendItem("", "rgba(120, 80, 200, 0.25)", "tunnel zone ±2.5 i (dashed: inflection ±i)");
    if (DATA.works.excavations.length) legendItem("", "rgba(160, 90, 40, 0.3)", "excavation and its influence zone");
  }
  legend.appendChild(el("span", { class: "muted" }, "north arrow: grid north of " + P.analysis_crs));

  // ---------- table ----------
  const COLUMNS = [
    { key: "id", label: "id", get: s => s.id },
    { key: "name", label: "name", get: s => s.name },
    { key: "cat", label: "category", get: s => (notAssessable(s) ? -1 : s.damage_category), text: catLabel },
    { key: "prob", label: "P(cat.) %", num: true, get: s => s.damage_category_probability, text: s => fmt(s.damage_category_probability, "pct") },
    { key: "grade", label: "evidence", get: s => s.evidence_grade || "", text: s => s.evidence_grade || "not graded" },
    { key: "vel", label: "v. velocity mm/yr", num: true, get: s => s.vertical_velocity_mm_per_yr, text: s => fmt(s.vertical_velocity_mm_per_yr, "mmyr") },
    { key: "trig", label: "trigger", get: s => s.trigger_status || "", text: s => s.trigger_status || "none" },
    { key: "change", label: "change", get: changeKey, text: s => CHANGE_TEXT[changeKey(s)] },
  ];
  const head = document.getElementById("table-head");
  let sortKey = null, sortDir = 1;
  COLUMNS.forEach(c => {
    const th = el("th", { "data-key": c.key, scope: "col" }, c.label);
    th.onclick = () => { sortDir = sortKey === c.key ? -sortDir : 1; sortKey = c.key; applyFilters(); };
    head.appendChild(th);
  });
  function options(id, pairs) {
    const sel = document.getElementById(id);
    for (const [v, t] of pairs) sel.appendChild(el("option", { value: v }, t));
    sel.onchange = applyFilters;
    return sel;
  }
  const uniq = f => Array.from(new Set(S.map(f))).sort();
  options("f-cat", [["", "all"]].concat(CAT_NAMES.map((n, k) => [String(k), n]), [["insufficient", "insufficient data"], ["nocat", "no category (withheld)"]]));
  options("f-grade", [["", "all"]].concat(uniq(s => s.evidence_grade || "not graded").map(g => [g, g])));
  options("f-trig", [["", "all"]].concat(uniq(s => s.trigger_status || "none").map(g => [g, g])));
  options("f-change", [["", "all"]].concat(Object.keys(CHANGE_TEXT).map(k => [k, CHANGE_TEXT[k]])));
  for (const id of ["f-text", "f-prob", "f-vmin", "f-vmax"]) document.getElementById(id).oninput = applyFilters;
  document.getElementById("filters").addEventListener("submit", e => e.preventDefault());

  let visible = S.slice();
  function numOrNull(id) { const v = document.getElementById(id).value; return v === "" ? null : Number(v); }
  function applyFilters() {
    const text = document.getElementById("f-text").value.trim().toLowerCase();
    const cat = document.getElementById("f-cat").value;
    const prob = numOrNull("f-prob");
    const grade = document.getElementById("f-grade").value;
    const vmin = numOrNull("f-vmin"), vmax = numOrNull("f-vmax");
    const trig = document.getElementById("f-trig").value;
    const change = document.getElementById("f-change").value;
    visible = S.filter(s => {
      if (text && !(s.id.toLowerCase().includes(text) || s.name.toLowerCase().includes(text))) return false;
      if (cat && catKey(s) !== cat) return false;
      if (prob && !(isNum(s.damage_category_probability) && 100 * s.damage_category_probability >= prob)) return false;
      if (grade && (s.evidence_grade || "not graded") !== grade) return false;
      const v = s.vertical_velocity_mm_per_yr;
      if (vmin !== null && !(isNum(v) && v >= vmin)) return false;
      if (vmax !== null && !(isNum(v) && v <= vmax)) return false;
      if (trig && (s.trigger_status || "none") !== trig) return false;
      if (change && changeKey(s) !== change) return false;
      return true;
    });
    if (sortKey) {
      const c = COLUMNS.find(c => c.key === sortKey);
      visible.sort((a, b) => {
        const x = c.get(a), y = c.get(b);
        if (x === y) return 0;
        if (x === null || x === undefined) return 1; // n/a last whatever the direction
        if (y === null || y === undefined) return -1;
        return (x < y ? -1 : 1) * sortDir;
      });
    }
    for (const th of head.children) th.textContent = COLUMNS.find(c => c.key === th.dataset.key).label + (th.dataset.key === sortKey ? (sortDir > 0 ? " ▲" : " ▼") : "");
    document.getElementById("row-count").textContent = visible.length + " of " + S.length + " structures";
    renderRows();
  }
  const scroller = document.getElementById("table-scroll");
  const tbody = document.getElementById("rows");
  function spacer(h) { const tr = el("tr", { class: "spacer" }); const td = el("td", { colspan: String(COLUMNS.length) }); td.style.height = h + "px"; td.style.padding = "0"; td.style.border = "0"; tr.appendChild(td); return tr; }
  // Only the rows in view are in the document (20 000 rows stay fast).
  function renderRows() {
    const first = Math.max(0, Math.floor(scroller.scrollTop / ROW_H) - 10);
    const count = Math.ceil(scroller.clientHeight / ROW_H) + 20;
    const last = Math.min(visible.length, first + count);
    tbody.replaceChildren();
    tbody.appendChild(spacer(first * ROW_H));
    for (let k = first; k < last; k++) {
      const s = visible[k];
      const tr = el("tr", { class: "row" + (s === selected ? " selected" : ""), "data-id": s.id });
      for (const c of COLUMNS) {
        const td = el("td", c.num ? { class: "num" } : null);
        if (c.key === "cat") {
          const b = el("span", { class: "cat" }, catLabel(s));
          b.style.background = notAssessable(s) ? NA_FILL : CAT_COLOURS[s.damage_category];
          if (notAssessable(s)) b.style.borderStyle = "dashed";
          td.appendChild(b);
        } else td.textContent = c.text ? c.text(s) : c.get(s);
        tr.appendChild(td);
      }
      tr.tabIndex = 0;
      tr.onclick = () => select(s, "table");
      tr.onkeydown = e => { if (e.key === "Enter" || e.key === " ") { e.preventDefault(); select(s, "table"); } };
      tbody.appendChild(tr);
    }
    tbody.appendChild(spacer((visible.length - last) * ROW_H));
  }
  scroller.addEventListener("scroll", renderRows);
  function scrollRowIntoView(s) {
    const k = visible.indexOf(s);
    if (k < 0) return;
    const top = k * ROW_H;
    if (top < scroller.scrollTop || top > scroller.scrollTop + scroller.clientHeight - 2 * ROW_H) scroller.scrollTop = Math.max(0, top - scroller.clientHeight / 3);
    renderRows();
  }

  // ---------- selection ----------
  function select(s, from) {
    selected = s;
    if (from !== "map") {
      // Bring the footprint into view at a readable zoom.
      const rc = canvas.getBoundingClientRect();
      const b = s._bbox;
      const [sx, sy] = toScreen(s._cx, s._cy);
      if (view.scale * Math.max(b[2] - b[0], b[3] - b[1]) < 80) {
        const w = Math.max(b[2] - b[0], b[3] - b[1], 10) * 4;
        fit([s._cx - w / 2, s._cy - w / 2, s._cx + w / 2, s._cy + w / 2]);
      } else if (sx < 0 || sy < 0 || sx > rc.width || sy > rc.height) {
        view.tx += rc.width / 2 - sx; view.ty += rc.height / 2 - sy;
      }
    }
    scrollRowIntoView(s);
    renderDetail(full(s));
    schedule();
  }

  // ---------- detail ----------
  function section(parent, title) { parent.appendChild(el("h3", null, title)); }
  function numRow(t, label, v, se, unit, kind, field) {
    const tr = el("tr", { "data-field": field });
    tr.appendChild(el("th", null, label));
    const td = el("td", { class: "num", "data-value": isNum(v) ? String(v) : "" }, isNum(v) ? fmt(v, kind) + (isNum(se) ? " ± " + fmt(se, kind) : "") : "not available");
    tr.appendChild(td);
    tr.appendChild(el("td", null, isNum(v) ? unit : ""));
    t.appendChild(tr);
  }
  const HS_TEXT = {
    measured: "Horizontal strain measured along the structure's axis (east–west component from ascending + descending).",
    not_observable_axis: "Horizontal strain NOT observable along this structure's axis: the radar sees only the east–west component and this axis is too far from east–west. The category may be understated (lower bound).",
    not_observable_geometry: "Horizontal strain NOT observable: no east–west component (the points come from one look direction only). The category may be understated (lower bound).",
    not_measured: "Horizontal strain not measured.",
  };
  function renderDetail(s) {
    document.getElementById("detail-empty").hidden = true;
    const d = document.getElementById("detail-body");
    d.hidden = false;
    d.replaceChildren();
    d.dataset.id = s.id;
    d.appendChild(el("h2", null, s.name));
    d.appendChild(el("div", { class: "muted" }, s.id + " · " + s.structure_type + " · height " + s.height_m + " m · criteria " + (s.criteria_set || "n/a")));

    verdictSection(d, s);
    observabilitySection(d, s);
    keyNumbersSection(d, s);
    section(d, "Vertical time series");
    d.appendChild(chart(s));
    worksSection(d, s);
    changeSection(d, s);
    reportSection(d, s);
  }
  function verdictSection(d, s) {
    section(d, "Verdict");
    const v = el("p", { class: "verdict", id: "verdict" });
    if (s.status === "insufficient_data") v.textContent = "Insufficient data — not assessable (this is not “no movement”).";
    else if (notAssessable(s)) v.textContent = "No damage category — the evidence does not support one.";
    else v.textContent = "Damage category " + catLabel(s) + " (" + (s.damage_category_name || "") + ")" + (s.category_lower_bound ? " — lower bound" : "");
    d.appendChild(v);
    if (!notAssessable(s)) {
      const pr = el("p", { id: "verdict-probability" });
      pr.textContent = "Probability of this category " + fmt(s.damage_category_probability, "pct") + " %; of a higher one " + fmt(s.damage_category_exceedance_probability, "pct") + " %" + (s.damage_route ? " · route: " + s.damage_route : "");
      d.appendChild(pr);
      const probs = s.damage_category_probabilities;
      if (probs) {
        const t = el("table");
        const tr1 = el("tr"), tr2 = el("tr");
        for (let k = 0; k < 5; k++) {
          tr1.appendChild(el("th", { class: "num" }, k === 4 ? "4–5" : String(k)));
          tr2.appendChild(el("td", { class: "num" }, fmt(probs[String(k)], "pct") + " %"));
        }
        t.appendChild(tr1); t.appendChild(tr2); d.appendChild(t);
      }
    }
    for (const r of s.status_reasons || []) if (s.status !== "assessed" || r !== "minimums met") d.appendChild(el("p", { class: "note" }, r));
    d.appendChild(el("p", null, "Evidence grade: " + (s.evidence_grade || "not graded")));
    const ul = el("ul");
    for (const r of s.evidence_grade_reasons || []) ul.appendChild(el("li", null, r));
    if (ul.children.length) d.appendChild(ul);
  }
  function observabilitySection(d, s) {
    section(d, "Observability");
    const obs = el("div", { id: "observability" });
    if (s.horizontal_strain_status) obs.appendChild(el("p", { class: s.horizontal_strain_status === "measured" ? "" : "note" }, HS_TEXT[s.horizontal_strain_status] || s.horizontal_strain_status));
    obs.appendChild(el("p", null, "Look directions of the kept points: " + ((s.look_directions || []).join(", ") || "none") + (s.look_directions && s.look_directions.length === 1 ? " — no east–west component" : "") + ". The radar is practically blind to north–south movement."));
    d.appendChild(obs);
  }
  function keyNumbersSection(d, s) {
    section(d, "Key numbers (± one standard error)");
    const t = el("table", { id: "key-numbers" });
    numRow(t, "largest settlement (+ down)", s.settlement_mm, null, "mm", "mm", "settlement_mm");
    numRow(t, "differential settlement", s.differential_settlement_mm, null, "mm", "mm", "differential_settlement_mm");
    numRow(t, "vertical velocity (+ up)", s.vertical_velocity_mm_per_yr, s.vertical_velocity_se_mm_per_yr, "mm/yr", "mmyr", "vertical_velocity_mm_per_yr");
    numRow(t, "east velocity (+ east)", s.east_velocity_mm_per_yr, s.east_velocity_se_mm_per_yr, "mm/yr", "mmyr", "east_velocity_mm_per_yr");
    numRow(t, "tilt", s.tilt, s.tilt_se, "m/m", "ratio", "tilt");
    numRow(t, "tilt direction (down towards)", s.tilt_azimuth_deg, null, "° from north", "deg", "tilt_azimuth_deg");
    numRow(t, "angular distortion", s.angular_distortion, s.angular_distortion_se, "rad", "ratio", "angular_distortion");
    numRow(t, "deflection ratio Δ/L (+ sagging)", s.deflection_ratio, s.deflection_ratio_se, "m/m", "ratio", "deflection_ratio");
    numRow(t, "horizontal strain (+ extension)", s.horizontal_strain, null, "m/m", "ratio", "horizontal_strain");
    numRow(t, "governing tensile strain", s.governing_strain, null, "m/m", "ratio", "governing_strain");
    const pts = el("tr"); pts.appendChild(el("th", null, "points kept / surroundings")); pts.appendChild(el("td", { class: "num" }, s.n_points + " / " + s.n_surroundings)); t.appendChild(pts);
    d.appendChild(t);
  }
  function worksSection(d, s) {
    if (!(s.works || isNum(s.predicted_settlement_mm))) return;
    section(d, "Works: predicted against observed");
    const w = s.works || {};
    for (const n of w.nearby || []) d.appendChild(el("p", null, n.name + " (" + n.kind + "): " + fmt(n.distance_m, "mm") + " m away; predicted settlement at the centroid " + fmt(n.settlement_at_centroid_mm, "mm") + " mm (all works complete)"));
    const ct = el("table", { id: "works-comparison" });
    const h = el("tr"); for (const x of ["quantity", "predicted", "observed", "observed / predicted"]) h.appendChild(el("th", null, x)); ct.appendChild(h);
    const cmp = w.comparison;
    for (const r of (cmp && cmp.rows) || []) {
      const tr = el("tr", { "data-quantity": r.quantity });
      const kind = r.quantity === "settlement_mm" ? "mm" : r.quantity === "damage_category" ? "" : "ratio";
      tr.appendChild(el("td", null, r.quantity.replace(/_/g, " ")));
      tr.appendChild(el("td", { class: "num" }, fmt(r.predicted, kind)));
      tr.appendChild(el("td", { class: "num" }, fmt(r.observed, kind)));
      tr.appendChild(el("td", { class: "num" }, isNum(r.ratio) ? r.ratio.toFixed(2) : (r.note || "n/a")));
      ct.appendChild(tr);
    }
    if (cmp) d.appendChild(ct);
    else d.appendChild(el("p", { class: "muted" }, "Predicted settlement on the footprint " + fmt(s.predicted_settlement_mm, "mm") + " mm: below 0.1 mm, nothing to compare."));
    if (cmp && cmp.period) d.appendChild(el("p", { class: "muted" }, "Predicted side: " + cmp.period));
    d.appendChild(el("p", null, "Predicted category (upper bound, stage 2): " + (isNum(s.predicted_category) ? s.predicted_category : "n/a")));
  }
  function changeSection(d, s) {
    if (!((s.triggers || []).length || s.change)) return;
    section(d, "Triggers and change since the previous period");
    for (const h of s.triggers || []) d.appendChild(el("p", { class: "note" }, h.level + ": " + h.field + " " + h.value.toFixed(2) + " (rule " + h.rule + ")" + (h.action ? " — " + h.action : "")));
    if (s.change) {
      const c = s.change;
      d.appendChild(el("p", { id: "change" }, CHANGE_TEXT[changeKey(s)] + (c.kind === "new" ? "" : ": previous category " + (c.previous_damage_category ?? "none") + ", velocity change " + fmt(c.velocity_change_mm_per_yr, "mmyr") + " mm/yr (z = " + (isNum(c.velocity_change_z) ? c.velocity_change_z.toFixed(1) : "n/a") + ")")));
    }
  }
  function reportSection(d, s) {
    section(d, "Report");
    if (s.report_pdf) {
      const a = el("a", { href: s.report_pdf, id: "report-link", target: "_blank", rel: "noopener" }, "Open the PDF report (" + s.report_pdf + ")");
      d.appendChild(a);
    } else d.appendChild(el("p", { class: "muted" }, "No PDF report in this output folder (written with --no-reports)."));
  }

  // The series chart as SVG (text through textContent; axes labelled with units).
  const SVGNS = "http://www.w3.org/2000/svg";
  function svg(tag, attrs, text) {
    const e = document.createElementNS(SVGNS, tag);
    for (const k in attrs) e.setAttribute(k, attrs[k]);
    if (text !== undefined) e.textContent = text;
    return e;
  }
  function chart(s) {
    const box = el("div", { id: "series-chart" });
    const ser = s.series;
    const idx = ser ? DATA.date_sets[ser.dates] : [];
    if (!ser || !idx.length) { box.appendChild(el("p", { class: "muted" }, "No vertical series: " + (s.status === "insufficient_data" ? "insufficient data." : "not computed."))); return box; }
    const t = idx.map(i => Date.parse(DATA.dates[i]));
    const vals = ser.mm.filter(isNum);
    let lo = Math.min(...vals), hi = Math.max(...vals);
    if (ser.trend) { lo = Math.min(lo, ser.trend.from[1], ser.trend.to[1]); hi = Math.max(hi, ser.trend.from[1], ser.trend.to[1]); }
    if (hi - lo < 2) { const m = (hi + lo) / 2; lo = m - 1; hi = m + 1; }
    const W = 420, H = 210, L = 52, R = 10, T = 10, B = 40;
    const t0 = Math.min(...t), t1 = Math.max(...t) + 1;
    const X = v => L + (W - L - R) * (v - t0) / (t1 - t0);
    const Y = v => T + (H - T - B) * (hi - v) / (hi - lo);
    const g = svg("svg", { viewBox: "0 0 " + W + " " + H, width: "100%", role: "img" });
    g.appendChild(svg("title", {}, "Vertical displacement of " + s.id + " over time"));
    g.appendChild(svg("rect", { x: L, y: T, width: W - L - R, height: H - T - B, fill: "#fff", stroke: "#999" }));
    const step = niceLength((hi - lo) / 4);
    for (let v = Math.ceil(lo / step) * step; v <= hi; v += step) {
      g.appendChild(svg("line", { x1: L, x2: W - R, y1: Y(v), y2: Y(v), stroke: "#e3e3e3" }));
      g.appendChild(svg("text", { x: L - 4, y: Y(v) + 4, "text-anchor": "end", "font-size": 10 }, (Math.round(v * 100) / 100).toString()));
    }
    const y0 = new Date(t0).getUTCFullYear(), y1 = new Date(t1).getUTCFullYear();
    for (let y = y0; y <= y1 + 1; y++) for (const m of [0, 6]) {
      const tt = Date.UTC(y, m, 1);
      if (tt < t0 || tt > t1) continue;
      g.appendChild(svg("line", { x1: X(tt), x2: X(tt), y1: T, y2: H - B, stroke: "#eee" }));
      g.appendChild(svg("text", { x: X(tt), y: H - B + 13, "text-anchor": "middle", "font-size": 10 }, y + "-" + (m ? "07" : "01")));
    }
    g.appendChild(svg("text", { x: (L + W - R) / 2, y: H - 6, "text-anchor": "middle", "font-size": 11 }, "acquisition date"));
    g.appendChild(svg("text", { x: 12, y: (T + H - B) / 2, "text-anchor": "middle", "font-size": 11, transform: "rotate(-90 12 " + (T + H - B) / 2 + ")" }, "vertical (mm, + up)"));
    let dpath = "";
    ser.mm.forEach((v, k) => { if (isNum(v)) dpath += (dpath && isNum(ser.mm[k - 1]) ? "L" : "M") + X(t[k]).toFixed(1) + "," + Y(v).toFixed(1); });
    g.appendChild(svg("path", { d: dpath, fill: "none", stroke: "#2a6db0", "stroke-width": 1 }));
    ser.mm.forEach((v, k) => { if (isNum(v)) g.appendChild(svg("circle", { cx: X(t[k]).toFixed(1), cy: Y(v).toFixed(1), r: 1.8, fill: "#2a6db0" })); });
    if (ser.trend) {
      const a = ser.trend.from, b = ser.trend.to;
      g.appendChild(svg("line", { x1: X(Date.parse(DATA.dates[a[0]])), y1: Y(a[1]), x2: X(Date.parse(DATA.dates[b[0]])), y2: Y(b[1]), stroke: "#c0392b", "stroke-width": 1.6, "stroke-dasharray": "5 3" }));
    }
    box.appendChild(g);
    box.appendChild(el("p", { class: "muted" }, ser.label + (ser.trend ? "; dashed: linear trend " + fmt(ser.trend.velocity_mm_per_yr, "mmyr") + " mm/yr" : "; no trend fitted") + ". Values relative to the first acquisition."));
    return box;
  }

  // ---------- start ----------
  fit(bbox);
  applyFilters();
  performance.mark("table");
  draw();
  performance.mark("drawn");
  // For the browser tests and scripting: read-only views of the page state.
  window.plinthExplorer = {
    shapeCount: () => shapesDrawn,
    screenPointOf: id => { const s = S.find(x => x.id === id); if (!s) return null; const rc = canvas.getBoundingClientRect(); const [x, y] = toScreen(s._cx, s._cy); return [rc.left + x, rc.top + y]; },
    interiorScreenPointOf: id => { const s = S.find(x => x.id === id); if (!s) return null; const rc = canvas.getBoundingClientRect(); const [x, y] = toScreen(...interiorPoint(s)); return [rc.left + x, rc.top + y]; },
    selectedId: () => (selected ? selected.id : null),
    readyAtMs: performance.now(),
  };
  document.body.dataset.ready = "true";
})();
