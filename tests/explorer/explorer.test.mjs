// Browser tests of explorer.html in headless Chromium (the system's chromium, driven by
// playwright-core; no browser download). Run by tests/integration/explorer.rs:
//   node explorer.test.mjs DEMO_OUT HOSTILE_OUT HOSTILE_ID
// DEMO_OUT: `plinth assess` of the demo with reports; HOSTILE_OUT: the demo with one structure
// (HOSTILE_ID) renamed to markup, assessed with --no-reports. Exit code 0 when every check passes.
import { chromium } from "playwright-core";
import fs from "node:fs";
import path from "node:path";
import { pathToFileURL } from "node:url";

const [demoOut, hostileOut, hostileId] = process.argv.slice(2);
if (!demoOut || !hostileOut || !hostileId) {
  console.error("usage: node explorer.test.mjs DEMO_OUT HOSTILE_OUT HOSTILE_ID");
  process.exit(2);
}
const HOSTILE_NAME = "<img src=x onerror=alert(1)>";
const CAT_COLOURS = ["#3a9a4a", "#a6cf4f", "#f2c232", "#ef8a2c", "#d7301f"];

let failures = 0;
function check(ok, what) {
  console.log((ok ? "ok   " : "FAIL ") + what);
  if (!ok) failures++;
}

// results.json: the portfolio block, then one compact record per line.
function readResults(dir) {
  return JSON.parse(fs.readFileSync(path.join(dir, "results.json"), "utf8")).structures;
}

function executablePath() {
  for (const p of [process.env.CHROMIUM, "/usr/bin/chromium", "/usr/bin/chromium-browser"]) {
    if (p && fs.existsSync(p)) return p;
  }
  throw new Error("no chromium found (set CHROMIUM or `apt-get install chromium`)");
}

// Open a page, recording console errors, page errors, dialogs and every network request.
async function open(browser, dir) {
  const page = await browser.newPage({ viewport: { width: 1400, height: 1000 }, deviceScaleFactor: 1 });
  const log = { errors: [], requests: [], dialogs: [] };
  page.on("console", m => { if (m.type() === "error") log.errors.push(m.text()); });
  page.on("pageerror", e => log.errors.push(String(e)));
  page.on("dialog", d => { log.dialogs.push(d.message()); d.dismiss(); });
  const url = pathToFileURL(path.resolve(dir, "explorer.html")).href;
  page.on("request", r => { if (r.url() !== url) log.requests.push(r.url()); });
  await page.goto(url, { waitUntil: "load" });
  await page.waitForSelector("body[data-ready=true]", { timeout: 20000 });
  return { page, log };
}

function hex(rgb) {
  return "#" + rgb.slice(0, 3).map(v => v.toString(16).padStart(2, "0")).join("");
}

async function demoChecks(browser) {
  const results = readResults(demoOut);
  const { page, log } = await open(browser, demoOut);

  check(log.errors.length === 0, "demo: no console error on load " + JSON.stringify(log.errors));
  check(log.requests.length === 0, "demo: no network request on load " + JSON.stringify(log.requests));

  // The map: one shape per structure, each filled with its category's colour (not assessable:
  // the white-and-grey hatch, never category 0's colour). Selecting the row zooms to it.
  const shapes = await page.evaluate(() => window.plinthExplorer.shapeCount());
  check(shapes === results.length, `demo: map draws ${shapes} shapes for ${results.length} structures`);
  let wrongColour = [];
  for (const r of results) {
    await page.fill("#f-text", r.id);
    await page.click(`#rows tr.row[data-id="${r.id}"]`);
    await page.evaluate(() => new Promise(requestAnimationFrame));
    const pt = await page.evaluate(id => window.plinthExplorer.interiorScreenPointOf(id), r.id);
    const rgb = await page.evaluate(([x, y]) => {
      const c = document.getElementById("map");
      const rc = c.getBoundingClientRect();
      return Array.from(c.getContext("2d").getImageData(Math.round(x - rc.left), Math.round(y - rc.top), 1, 1).data);
    }, pt);
    const colour = hex(rgb);
    const na = r.damage_category === null;
    const ok = na ? colour === "#ffffff" || colour === "#777777" || !CAT_COLOURS.includes(colour) : colour === CAT_COLOURS[r.damage_category];
    if (!ok) wrongColour.push(`${r.id}: ${colour} for category ${r.damage_category}`);
  }
  check(wrongColour.length === 0, "demo: each footprint shows its category colour " + JSON.stringify(wrongColour));
  await page.fill("#f-text", "");
  await page.dispatchEvent("#f-text", "input");

  // Map → table: clicking a footprint selects it and highlights its row.
  const target = results.find(r => r.status === "assessed");
  const other = results.find(r => r.id !== target.id && r.status === "assessed");
  await page.click(`#rows tr.row[data-id="${target.id}"]`);
  await page.click("#zoom-fit");
  await page.evaluate(() => new Promise(requestAnimationFrame));
  const p2 = await page.evaluate(id => window.plinthExplorer.interiorScreenPointOf(id), other.id);
  await page.mouse.click(p2[0], p2[1]);
  const picked = await page.evaluate(() => window.plinthExplorer.selectedId());
  check(picked === other.id, `demo: clicking the footprint of ${other.id} selects it (got ${picked})`);
  const rowSel = await page.$$eval("#rows tr.selected", rows => rows.map(r => r.dataset.id));
  check(rowSel.length === 1 && rowSel[0] === other.id, "demo: the map selection highlights its table row " + JSON.stringify(rowSel));

  // Filtering by category leaves exactly the matching rows.
  for (const [value, match] of [
    ["2", r => r.damage_category === 2],
    ["0", r => r.damage_category === 0],
    ["insufficient", r => r.status === "insufficient_data"],
    ["nocat", r => r.status === "assessed" && r.damage_category === null],
  ]) {
    await page.selectOption("#f-cat", value);
    const ids = await page.$$eval("#rows tr.row", rows => rows.map(r => r.dataset.id));
    const count = await page.$eval("#row-count", e => e.textContent);
    const want = results.filter(match).map(r => r.id);
    // The table holds only the rows in view (about 35 here): all of them when fewer match.
    const exact = want.length <= 30 ? JSON.stringify([...ids].sort()) === JSON.stringify([...want].sort()) : ids.length >= 30;
    check(want.length > 0 && exact && ids.every(id => want.includes(id)) && count.startsWith(want.length + " of "),
      `demo: category filter ${value} leaves exactly the ${want.length} matching rows (${ids.length} in view, "${count}")`);
  }
  await page.selectOption("#f-cat", "");

  // Clicking a row shows that structure's detail with the numbers of results.json.
  const fields = ["settlement_mm", "differential_settlement_mm", "vertical_velocity_mm_per_yr", "east_velocity_mm_per_yr",
    "tilt", "tilt_azimuth_deg", "angular_distortion", "deflection_ratio", "horizontal_strain", "governing_strain"];
  const withheld = results.find(x => x.status === "assessed" && x.damage_category === null);
  check(withheld !== undefined, "demo: an assessed structure without a category exists");
  for (const r of [target, results.find(x => x.damage_category === 2), results.find(x => x.status === "insufficient_data"), withheld]) {
    await page.fill("#f-text", r.id);
    await page.click(`#rows tr.row[data-id="${r.id}"]`);
    const shown = await page.evaluate(() => {
      const d = document.getElementById("detail-body");
      const rows = {};
      for (const tr of d.querySelectorAll("#key-numbers tr[data-field]")) rows[tr.dataset.field] = { value: tr.children[1].dataset.value, text: tr.children[1].textContent };
      return { id: d.dataset.id, name: d.querySelector("h2").textContent, verdict: document.getElementById("verdict").textContent, rows };
    });
    check(shown.id === r.id && shown.name === r.name, `detail of ${r.id}: id and name`);
    const bad = fields.filter(f => {
      const v = r[f], s = shown.rows[f];
      if (v === null) return !(s.value === "" && s.text === "not available");
      const n = parseFloat(s.text);
      // The text is rounded for reading; the exact value is on the cell.
      return s.value !== String(v) || !(Math.abs(n - v) <= Math.max(0.051, Math.abs(v) * 0.006));
    });
    check(bad.length === 0, `detail of ${r.id}: key numbers equal results.json ` + JSON.stringify(bad.map(f => [f, r[f], shown.rows[f]])));
    if (r.status === "insufficient_data") check(/insufficient data/i.test(shown.verdict) && !/category 0/.test(shown.verdict), `detail of ${r.id}: insufficient data, never category 0`);
    else if (r.damage_category === null) check(/no damage category/i.test(shown.verdict) && !/category 0/.test(shown.verdict), `detail of ${r.id}: no category, never category 0`);
    else check(shown.verdict.includes("Damage category " + (r.damage_category === 4 ? "4–5" : r.damage_category)), `detail of ${r.id}: verdict states category ${r.damage_category}`);
    if (r.status === "assessed") {
      const chart = await page.$$eval("#series-chart svg path, #series-chart svg line[stroke-dasharray]", e => e.length);
      check(chart >= 2, `detail of ${r.id}: series and trend drawn`);
    }
    // The PDF link resolves to a file in the output folder.
    const href = await page.$eval("#report-link", a => a.getAttribute("href")).catch(() => null);
    check(href !== null && fs.existsSync(path.join(demoOut, href)), `detail of ${r.id}: PDF link ${href} resolves to a file`);
  }

  // Near the tunnel: predicted against observed, the same ratio as results.json.
  const nearTunnel = results.filter(r => r.observed_to_predicted_settlement !== null);
  check(nearTunnel.length > 0, `demo: ${nearTunnel.length} structures with predicted against observed`);
  for (const r of nearTunnel) {
    await page.fill("#f-text", r.id);
    await page.click(`#rows tr.row[data-id="${r.id}"]`);
    const ratio = await page.$eval('#works-comparison tr[data-quantity="settlement_mm"]', tr => tr.children[3].textContent).catch(() => null);
    check(ratio === r.observed_to_predicted_settlement.toFixed(2), `detail of ${r.id}: observed / predicted settlement ${ratio} = results.json ${r.observed_to_predicted_settlement}`);
  }
  await page.fill("#f-text", "");
  await page.dispatchEvent("#f-text", "input");
  const legend = await page.$eval("#legend", e => e.textContent);
  check(legend.includes("tunnel centreline") && legend.includes("tunnel zone"), "demo: the tunnel and its zone are in the map legend");

  // Cautions, window and provenance are on the page.
  const text = await page.evaluate(() => document.body.innerText);
  const manifest = JSON.parse(fs.readFileSync(path.join(demoOut, "manifest.json"), "utf8"));
  check(/not a substitute for inspection/.test(text), "demo: cautions shown");
  check(text.includes(manifest.window.start) && text.includes(manifest.window.end), "demo: assessment window shown");
  check(manifest.inputs.every(i => text.includes(i.sha256)) && text.includes(manifest.tool_version), "demo: tool version and every input's SHA-256 shown");
  check(log.errors.length === 0 && log.requests.length === 0, "demo: no console error or network request after interaction " + JSON.stringify(log));
  await page.close();
}

async function hostileChecks(browser) {
  const results = readResults(hostileOut);
  const r = results.find(x => x.id === hostileId);
  check(r && r.name === HOSTILE_NAME, "hostile: the renamed structure is in results.json");
  const { page, log } = await open(browser, hostileOut);
  await page.fill("#f-text", hostileId);
  await page.click(`#rows tr.row[data-id="${hostileId}"]`);
  const seen = await page.evaluate(id => ({
    cell: document.querySelector(`#rows tr.row[data-id="${id}"]`).children[1].textContent,
    heading: document.querySelector("#detail-body h2").textContent,
    imgs: document.querySelectorAll("img").length,
  }), hostileId);
  check(seen.cell === HOSTILE_NAME && seen.heading === HOSTILE_NAME, "hostile: the name shows as literal text " + JSON.stringify(seen));
  check(seen.imgs === 0, "hostile: no img element was created");
  check(log.dialogs.length === 0, "hostile: no script ran (no dialog) " + JSON.stringify(log.dialogs));
  check(log.requests.length === 0, "hostile: no network request " + JSON.stringify(log.requests));
  await page.close();
}

const browser = await chromium.launch({ executablePath: executablePath(), args: ["--no-sandbox"] });
try {
  await demoChecks(browser);
  await hostileChecks(browser);
} finally {
  await browser.close();
}
console.log(failures === 0 ? "all explorer checks passed" : `${failures} explorer check(s) failed`);
process.exit(failures === 0 ? 0 : 1);
