// exam_chart.mjs - the exam page's chart in Debian's headless Chromium
// (playwright-core, no downloaded browsers) at 1000 px wide, over a running
// mitilog daemon that the pytest side started and fed.
//
//   node exam_chart.mjs CONFIG.json
//
// CONFIG: {"url": "http://127.0.0.1:PORT", "out": DIR, "studies": [UID, ...]}
// Prints one JSON line of results; exit status 0 when every check passed.
import { readFileSync, mkdirSync } from 'node:fs';
import { join } from 'node:path';
import { chromium } from 'playwright-core';

const config = JSON.parse(readFileSync(process.argv[2], 'utf8'));
mkdirSync(config.out, { recursive: true });
const results = { checks: [], screenshots: [], errors: [], pdf: null };
let failed = false;
function check(name, ok, detail) {
  results.checks.push({ name, ok: Boolean(ok), detail: detail === undefined ? null : detail });
  if (!ok) failed = true;
}

// A round step is 1, 2 or 5 x 10^n (common practice, no source).
function isRoundStep(step) {
  if (!(step > 0)) return false;
  const power = Math.pow(10, Math.floor(Math.log10(step) + 1e-9));
  const mantissa = step / power;
  return [1, 2, 5, 10].some((m) => Math.abs(mantissa - m) < 1e-6);
}

// Tick labels of one axis: numbers, evenly spaced by a round step, from 0.
function roundTicks(texts) {
  const values = texts.map(Number);
  if (values.some((v) => Number.isNaN(v)) || values.length < 2) return false;
  const step = values[1] - values[0];
  return values[0] === 0 && isRoundStep(step) &&
    values.every((v, i) => Math.abs(v - i * step) < step * 1e-6);
}

const browser = await chromium.launch({
  executablePath: process.env.CHROMIUM || '/usr/bin/chromium',
  args: ['--no-sandbox', '--disable-gpu', '--disable-quic', '--no-first-run',
    '--disable-background-networking', '--disable-component-update', '--disable-sync'],
});
const context = await browser.newContext({ viewport: { width: 1000, height: 800 } });
const page = await context.newPage();
page.on('pageerror', (error) => results.errors.push('pageerror: ' + error.message));
page.on('console', (message) => { if (message.type() === 'error') results.errors.push('console: ' + message.text()); });

try {
  for (const [n, study] of config.studies.entries()) {
    await page.goto(`${config.url}/exam.html?study=${encodeURIComponent(study)}`, { waitUntil: 'networkidle' });
    await page.waitForSelector('#timeline-chart .series', { timeout: 15000 });
    const scroll = await page.evaluate(() => ({
      scroll: document.documentElement.scrollWidth, client: document.documentElement.clientWidth }));
    check(`exam ${n}: no sideways scroll at 1000 px`, scroll.scroll <= scroll.client, scroll);
    const chart = await page.evaluate(() => {
      const svg = document.getElementById('timeline-chart');
      const box = (e) => { const r = e.getBoundingClientRect(); return { x: r.left, y: r.top, w: r.width, h: r.height, text: e.textContent }; };
      return {
        texts: [...svg.querySelectorAll('text')].map(box),
        xTicks: [...svg.querySelectorAll('text.tick-x')].map((e) => e.textContent),
        yTicks: [...svg.querySelectorAll('text.tick-y')].map((e) => ({ text: e.textContent, y: e.getBoundingClientRect().top })),
        panels: [...svg.querySelectorAll('text.panel-title')].map((e) => e.textContent),
        labels: [...svg.querySelectorAll('text.line-label')].map((e) => e.textContent),
        miPoints: svg.querySelectorAll('.series-mi').length,
        width: svg.getBoundingClientRect().width,
      };
    });
    check(`exam ${n}: MI and TI on separate panels`, chart.panels.length === 2 &&
      chart.panels[0].startsWith('MI') && chart.panels[1].startsWith('TI'), chart.panels);
    // The x axis is drawn under each panel: both carry the same ticks.
    const half = chart.xTicks.slice(0, chart.xTicks.length / 2);
    check(`exam ${n}: time ticks are round numbers`, roundTicks(half), chart.xTicks);
    // y ticks per panel: split where the next tick is lower on the page.
    const axes = [[]];
    for (const [i, t] of chart.yTicks.entries()) {
      if (i > 0 && t.y > chart.yTicks[i - 1].y) axes.push([]);
      axes[axes.length - 1].push(t.text);
    }
    check(`exam ${n}: index ticks are round numbers`, axes.length === 2 && axes.every(roundTicks), axes);
    // No two labels' boxes overlap (1 px of antialiasing tolerated).
    const overlaps = [];
    const texts = chart.texts.filter((t) => t.w > 0);
    for (let i = 0; i < texts.length; i++) {
      for (let j = i + 1; j < texts.length; j++) {
        const a = texts[i], b = texts[j];
        if (a.x + a.w - 1 > b.x && b.x + b.w - 1 > a.x && a.y + a.h - 1 > b.y && b.y + b.h - 1 > a.y) overlaps.push([a.text, b.text]);
      }
    }
    check(`exam ${n}: no two labels overlap`, overlaps.length === 0, overlaps.slice(0, 5));
    // Labels that do not lie: an MI line is named MI, a TI line TI.
    check(`exam ${n}: every line label names its index`,
      chart.labels.every((l) => l.startsWith('MI ') || l.startsWith('TI ')), chart.labels);
    check(`exam ${n}: the MI limit is labelled as MI`,
      !chart.labels.some((l) => /^TI .*MI/.test(l)) && chart.labels.some((l) => l.startsWith('MI ')), chart.labels);
    const shot = join(config.out, `exam-${n}.png`);
    await page.screenshot({ path: shot, fullPage: true });
    results.screenshots.push(shot);
    if (n === 0) {
      await page.emulateMedia({ media: 'print' });
      results.pdf = join(config.out, 'exam.pdf');
      await page.pdf({ path: results.pdf, format: 'A4', printBackground: true });
      const printed = await page.evaluate(() => {
        const r = document.getElementById('timeline-chart').getBoundingClientRect();
        return { width: r.width, page: document.documentElement.scrollWidth, client: document.documentElement.clientWidth };
      });
      check('printed: the chart fits the page width', printed.width <= printed.client + 1, printed);
      await page.emulateMedia({ media: 'screen' });
    }
  }
} catch (error) {
  results.errors.push(String(error && error.stack ? error.stack : error));
  failed = true;
}
await browser.close();
console.log(JSON.stringify(results));
process.exit(failed || results.errors.length ? 1 : 0);
