// stats_page.mjs - the dashboard's statistics page in Debian's headless
// Chromium (playwright-core, no downloaded browsers), over a running
// mitilog daemon that the pytest side started and fed.
//
//   node stats_page.mjs URL
//
// URL: the page, e.g. http://127.0.0.1:PORT/stats.html?from=...&to=...
// Prints one JSON line: the institution shown, the table headings, the
// page's errors; exit status 0 when the page rendered without errors.
import { chromium } from 'playwright-core';

const results = { institution: null, headings: [], errors: [] };
const browser = await chromium.launch({
  executablePath: process.env.CHROMIUM || '/usr/bin/chromium',
  args: ['--no-sandbox', '--disable-gpu', '--disable-quic', '--no-first-run',
    '--disable-background-networking', '--disable-component-update', '--disable-sync'],
});
const page = await (await browser.newContext({ viewport: { width: 1000, height: 800 } })).newPage();
page.on('pageerror', (error) => results.errors.push('pageerror: ' + error.message));
page.on('console', (message) => { if (message.type() === 'error') results.errors.push('console: ' + message.text()); });
try {
  await page.goto(process.argv[2], { waitUntil: 'networkidle' });
  await page.waitForSelector('#institution', { timeout: 15000 });
  results.institution = await page.textContent('#institution');
  results.headings = await page.evaluate(() => [...document.querySelectorAll('th')].map((th) => th.textContent));
} catch (error) {
  results.errors.push(String(error && error.stack ? error.stack : error));
}
await browser.close();
console.log(JSON.stringify(results));
process.exit(results.errors.length ? 1 : 0);
