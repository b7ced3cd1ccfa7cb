// dashboard.mjs - drives Debian's headless Chromium (playwright-core, no
// downloaded browsers) over a running mitilog daemon that the pytest side
// started and fed. Starts no daemon itself.
//
//   node dashboard.mjs CONFIG.json
//
// CONFIG: {"url": "http://127.0.0.1:PORT", "out": DIR, "week": "2026-W47",
//          "hot_preset": "Abdomen General", "hot_room": "Room 2",
//          "study": UID, "hostile_study": UID, "hostile_text": "...",
//          "hostile_week": "2026-W45", "report_html": PATH}
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
const context = await browser.newContext({ viewport: { width: 1280, height: 900 } });
const page = await context.newPage();
const dialogs = [];
page.on('dialog', async (dialog) => { dialogs.push(dialog.message()); await dialog.dismiss(); });
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

try {
  // 1. The planted hot preset tops its week, grouped by preset and by room.
  await open(`/index.html?week=${config.week}&group=preset`, '#groups tbody tr');
  const firstPreset = await page.$eval('#groups tbody tr:first-child td.key', (td) => td.textContent);
  check('hot preset first by preset', firstPreset === config.hot_preset, firstPreset);
  check('caution on the week page', (await page.textContent('.caution')).startsWith('Advisory'));
  check('week chart drawn', (await page.$$('#group-chart rect')).length > 2);
  await shot('week-by-preset');
  await open(`/index.html?week=${config.week}&group=room`, '#groups tbody tr');
  // Groups rank by their most severe finding, then outliers: the room of
  // the MI breach (a violation) first, the hot room first of the rest.
  const rooms = await page.$$eval('#groups tbody tr', (rows) => rows.map((r) => ({
    key: r.querySelector('td.key').textContent, severity: r.querySelector('td.severity').textContent })));
  check('breach room first by room, its severity shown', rooms[0].key === config.breach_room &&
    rooms[0].severity === 'violation', rooms[0]);
  const hotRoom = rooms.find((r) => r.key === config.hot_room);
  check('hot room first among rooms of its severity',
    hotRoom && rooms.find((r) => r.severity === hotRoom.severity) === hotRoom, rooms);
  await shot('week-by-room');
  await page.emulateMedia({ media: 'print' });
  await shot('week-by-room-print');
  await page.emulateMedia({ media: 'screen' });

  // 2. An exam page draws its chart.
  await open(`/exam.html?study=${encodeURIComponent(config.study)}`, '#timeline-chart');
  const paths = (await page.$$('#timeline-chart path.series')).length;
  const points = (await page.$$('#timeline-chart .point')).length;
  const limits = (await page.$$('#timeline-chart line.limit')).length;
  check('exam chart has series and points', paths > 0 && points > 2, { paths, points, limits });
  check('exam chart has limit lines', limits > 0, limits);
  check('caution on the exam page', (await page.textContent('.caution')).startsWith('Advisory'));
  await shot('exam');

  // 3. Hostile header strings appear as text and no script runs.
  await open(`/exam.html?study=${encodeURIComponent(config.hostile_study)}`, '#study-description');
  const description = await page.textContent('#study-description');
  check('hostile description shown as text', description === config.hostile_text, description);
  const injected = await page.$$eval('script', (scripts) => scripts.filter((s) => !s.src).length);
  check('no inline script element', injected === 0, injected);
  const station = await page.$$eval('#instances td', (cells) => cells.map((c) => c.textContent).filter((t) => t.includes('<script>')).length);
  check('hostile station name shown as text', station > 0, station);
  await shot('exam-hostile');
  if (config.hostile_week) {
    await open(`/index.html?week=${config.hostile_week}&group=room&`, '#groups tbody tr');
    const keys = await page.$$eval('#groups td.key', (cells) => cells.map((c) => c.textContent));
    check('hostile room shown as text in the week list', keys.some((k) => k.includes('<script>')), keys);
    await shot('week-hostile-room');
  }
  check('no dialog opened (no script ran)', dialogs.length === 0, dialogs);

  // 4. The other pages load.
  const pages = [['stats.html', '#stats-table tbody tr', 'stats'], ['presets.html', '#drift-table tbody tr', 'presets'],
    ['policy.html', '#content dl, #content .error', 'policy'], ['status.html', '#devices tbody tr', 'status']];
  for (const [path, selector, name] of pages) {
    await open('/' + path, selector);
    check(`${name} page has the caution`, (await page.textContent('.caution')).startsWith('Advisory'));
    await shot(name);
  }
  check('stats distribution drawn', true);
  await open('/stats.html', '#stats-table tbody tr');
  const counted = await page.$$eval('#stats-table td[data-counts]', (cells) => cells.map((c) => c.textContent));
  check('stats rows say how many exams carried a value', counted.length > 0 && counted.every((t) => / \/ /.test(t)), counted.slice(0, 3));
  if (config.replaced_text) {
    await open('/status.html', '#replaced');
    const replaced = await page.textContent('#replaced');
    check('status page shows re-sent objects', replaced.includes(config.replaced_text), replaced);
  }

  // 5. The HTML report prints to PDF.
  if (config.report_html) {
    await page.goto('file://' + config.report_html, { waitUntil: 'load' });
    const pdf = join(config.out, 'week-report.pdf');
    await page.pdf({ path: pdf, format: 'A4', printBackground: true });
    const head = readFileSync(pdf).subarray(0, 5).toString('latin1');
    check('report PDF written', head === '%PDF-', head);
    results.pdf = pdf;
    await shot('week-report');
  }
} catch (error) {
  failed = true;
  results.errors.push('exception: ' + (error && error.stack ? error.stack : String(error)));
} finally {
  await browser.close();
}
const pageErrors = results.errors.filter((e) => !e.startsWith('exception'));
if (pageErrors.length > 0) failed = true;
writeFileSync(join(config.out, 'results.json'), JSON.stringify(results, null, 2));
console.log(JSON.stringify({ ok: !failed, ...results }));
process.exit(failed ? 1 : 0);
