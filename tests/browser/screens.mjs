// screens.mjs - drives Debian's headless Chromium (playwright-core) over a
// running daemon fed with the simulated department's screens (the pytest
// side, tests/integration/test_demo_path.py, started and fed it):
// the Devices page shows each profile's refused frames, the exam page
// shows each capture's index values with their source.
//
//   node screens.mjs CONFIG.json
//
// CONFIG: {"url": "http://127.0.0.1:PORT", "out": DIR,
//          "pixels_study": UID, "pixels_text": "0.7 · screen",
//          "updated_study": UID, "mismatch_study": UID,
//          "refused_profile": KEY, "refused_text": "software changed: 251 of 463 frames"}
// Prints one JSON line of results; exit status 0 when every check passed.
import { readFileSync, writeFileSync, mkdirSync } from 'node:fs';
import { join } from 'node:path';
import { chromium } from 'playwright-core';

const config = JSON.parse(readFileSync(process.argv[2], 'utf8'));
mkdirSync(config.out, { recursive: true });
const results = { checks: [], screenshots: [], errors: [] };
let failed = false;
function check(name, ok, detail) {
  results.checks.push({ name, ok: Boolean(ok), detail: detail === undefined ? null : detail });
  if (!ok) failed = true;
}

const browser = await chromium.launch({
  executablePath: process.env.CHROMIUM || '/usr/bin/chromium',
  args: ['--no-sandbox', '--disable-gpu', '--disable-quic', '--no-first-run',
    '--disable-background-networking', '--disable-component-update', '--disable-sync'],
});
const page = await (await browser.newContext({ viewport: { width: 1280, height: 900 } })).newPage();
page.on('pageerror', (error) => results.errors.push('pageerror: ' + error.message));
page.on('console', (message) => { if (message.type() === 'error') results.errors.push('console: ' + message.text()); });

async function shot(name) {
  const path = join(config.out, name + '.png');
  await page.screenshot({ path, fullPage: true });
  results.screenshots.push(path);
}
async function open(path, selector) {
  await page.goto(config.url + path, { waitUntil: 'networkidle' });
  await page.waitForSelector(selector, { timeout: 15000 });
}
const cellTexts = (selector) => page.$$eval(selector, (cells) => cells.map((c) => c.innerText));

try {
  // 1. Devices: the profile that stopped matching says how many frames it
  // refused and why; one that reads says 0.
  await open('/devices.html', 'table tbody tr');
  const rows = await page.$$eval('table tbody tr', (trs) => trs.map((tr) => tr.innerText));
  const refused = rows.find((r) => r.startsWith(config.refused_profile + '\t'));
  check('devices page: refused frames of the outdated profile', refused && refused.includes(config.refused_text), refused);
  check('devices page: a profile that reads refuses none', rows.some((r) => r.includes('0 of ') && r.includes(' refused')), rows);
  await shot('devices');

  // 2. Exam of the pixels-only room: values from the screen.
  await open(`/exam.html?study=${encodeURIComponent(config.pixels_study)}`, '#provenance tbody tr');
  const pixels = await cellTexts('#provenance td.provenance');
  check('exam page: pixels-only values from the screen', pixels.includes(config.pixels_text), pixels.slice(0, 8));
  const pixelReadings = await cellTexts('#provenance td.reading');
  check('exam page: read with the room\'s profile', pixelReadings.length > 0 && pixelReadings.every((t) => t.startsWith('read with northmere-nm3')), pixelReadings.slice(0, 4));
  check('exam page: no header source in the pixels-only room', !pixels.some((t) => t.includes('· header') || t.includes('· both')), pixels.slice(0, 8));
  // The chart and the instances table draw the values the rules use, so a
  // pixels-only exam has points and numbers, not blanks (docs/api.md,
  // "Index provenance": indices[k].value).
  const chartPoints = await page.locator('#timeline-chart .point').count();
  check('exam page: the chart draws the pixels-only captures', chartPoints > 0, chartPoints);
  const instanceCells = await cellTexts('#instances tbody td.n');
  check('exam page: instances table shows values read from the screen', instanceCells.some((t) => /^\d+\.\d$/.test(t)), instanceCells.slice(0, 12));
  await shot('exam-provenance-pixels');

  // 3. Exam after the software update: header values, screen "not read" with the reason.
  await open(`/exam.html?study=${encodeURIComponent(config.updated_study)}`, '#provenance tbody tr');
  const updated = await cellTexts('#provenance td.provenance');
  const readings = await cellTexts('#provenance td.reading');
  check('exam page: not read with the reason', readings.length > 0 && readings.every((t) => t.startsWith('not read: software changed')), readings.slice(0, 4));
  check('exam page: each index says the screen was not read', updated.some((t) => t.includes('screen not read')), updated.slice(0, 8));
  check('exam page: header values still shown', updated.some((t) => t.includes('· header')), updated.slice(0, 8));
  await shot('exam-provenance-not-read');

  // 4. Exam with a stale header: both sources, the disagreement said.
  await open(`/exam.html?study=${encodeURIComponent(config.mismatch_study)}`, '#provenance tbody tr');
  const mismatch = await cellTexts('#provenance td.source-disagree');
  const both = await cellTexts('#provenance td.source-both');
  check('exam page: header and screen that disagree are shown', mismatch.length > 0 && mismatch[0].includes('≠ screen'), mismatch.slice(0, 4));
  check('exam page: header and screen that agree are "both"', both.length > 0, both.length);
  await shot('exam-provenance-mismatch');
} catch (error) {
  failed = true;
  results.errors.push('exception: ' + (error && error.stack ? error.stack : String(error)));
} finally {
  await browser.close();
}
if (results.errors.some((e) => !e.startsWith('exception'))) failed = true;
writeFileSync(join(config.out, 'results.json'), JSON.stringify(results, null, 2));
console.log(JSON.stringify({ ok: !failed, ...results }));
process.exit(failed ? 1 : 0);
