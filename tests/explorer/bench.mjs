// Load-time and memory benchmark of explorer.html for a large portfolio (a benchmark, not a
// test: the figures go to docs/performance.md).
//   node bench.mjs DEMO_OUT N RUNS
// Builds a page of N structures by tiling the demo output's structures (footprints shifted on
// a grid, ids suffixed, each with its own series and works comparison), writes it to
// DEMO_OUT/../explorer-bench-N/explorer.html, then opens it RUNS times in headless Chromium and
// reports the time from navigation to an interactive map (page script done: map drawn, table
// filled) and the JS heap, median over the runs.
import { chromium } from "playwright-core";
import fs from "node:fs";
import path from "node:path";
import { pathToFileURL } from "node:url";

const [demoOut, nArg, runsArg] = process.argv.slice(2);
const N = Number(nArg || 20000), RUNS = Number(runsArg || 5);
const html = fs.readFileSync(path.join(demoOut, "explorer.html"), "utf8");
const open = '<script type="application/json" id="plinth-data">';
const a = html.indexOf(open) + open.length, b = html.indexOf("</script>", a);
const data = JSON.parse(html.slice(a, b));
const cols = data.structures;
const base = cols.rows.map(r => Object.fromEntries(cols.fields.map((f, k) => [f, r[k]])));
let ext = [Infinity, Infinity, -Infinity, -Infinity];
for (const s of base) for (const r of s.footprint) for (let k = 0; k < r.length; k += 2) {
  ext = [Math.min(ext[0], r[k]), Math.min(ext[1], r[k + 1]), Math.max(ext[2], r[k]), Math.max(ext[3], r[k + 1])];
}
const tile = [ext[2] - ext[0] + 60, ext[3] - ext[1] + 60];
const perRow = Math.ceil(Math.sqrt(N / base.length));
const out = [];
for (let k = 0; out.length < N; k++) {
  const [dx, dy] = [(k % perRow) * tile[0], Math.floor(k / perRow) * tile[1]];
  for (const s of base) {
    if (out.length >= N) break;
    const c = structuredClone(s);
    c.id = s.id + "-" + k;
    c.footprint = s.footprint.map(r => r.map((v, i) => Math.round(100 * (v + (i % 2 ? dy : dx))) / 100));
    if (c.report_pdf) c.report_pdf = "reports/" + c.id + ".pdf";
    out.push(c);
  }
}
data.structures = { fields: cols.fields, rows: out.map(o => cols.fields.map(f => o[f])) };
const json = JSON.stringify(data).replace(/</g, "\\u003c").replace(/>/g, "\\u003e").replace(/&/g, "\\u0026");
const page = html.slice(0, a) + json + html.slice(b);
const dir = path.join(path.dirname(path.resolve(demoOut)), "explorer-bench-" + N);
fs.mkdirSync(dir, { recursive: true });
const file = path.join(dir, "explorer.html");
fs.writeFileSync(file, page);
console.log(`page: ${N} structures, ${(page.length / 1048576).toFixed(1)} MB (${file})`);

const exe = [process.env.CHROMIUM, "/usr/bin/chromium"].find(p => p && fs.existsSync(p));
const browser = await chromium.launch({ executablePath: exe, args: ["--no-sandbox", "--enable-precise-memory-info"] });
const times = [], heaps = [];
for (let i = 0; i < RUNS; i++) {
  const ctx = await browser.newContext({ viewport: { width: 1400, height: 1000 } });
  const p = await ctx.newPage();
  const errors = [];
  p.on("pageerror", e => errors.push(String(e)));
  await p.goto(pathToFileURL(file).href, { waitUntil: "load", timeout: 120000 });
  await p.waitForSelector("body[data-ready=true]", { timeout: 120000 });
  const ready = await p.evaluate(() => window.plinthExplorer.readyAtMs);
  const cdp = await ctx.newCDPSession(p);
  await cdp.send("Performance.enable");
  const m = Object.fromEntries((await cdp.send("Performance.getMetrics")).metrics.map(x => [x.name, x.value]));
  const shapes = await p.evaluate(() => window.plinthExplorer.shapeCount());
  if (errors.length || shapes !== N) throw new Error(`run ${i}: ${shapes} shapes, errors ${errors}`);
  times.push(ready); heaps.push(m.JSHeapUsedSize / 1048576);
  console.log(`run ${i + 1}: interactive map at ${ready.toFixed(0)} ms, JS heap ${(m.JSHeapUsedSize / 1048576).toFixed(0)} MB`);
  await ctx.close();
}
await browser.close();
const med = v => [...v].sort((x, y) => x - y)[Math.floor(v.length / 2)];
console.log(`median of ${RUNS}: interactive map at ${med(times).toFixed(0)} ms, JS heap ${med(heaps).toFixed(0)} MB`);
