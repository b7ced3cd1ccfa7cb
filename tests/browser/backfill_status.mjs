// backfill_status.mjs - reads the ingest status page in Debian's headless
// Chromium (playwright-core) over a running mitilog daemon that the pytest
// side started, after a backfill ran on its database. Starts no daemon.
//
//   node backfill_status.mjs CONFIG.json
//
// CONFIG: {"url": "http://127.0.0.1:PORT", "out": DIR}
// Prints one JSON line: the text of the page's backfill line, the errors.
import { readFileSync, mkdirSync } from 'node:fs';
import { join } from 'node:path';
import { chromium } from 'playwright-core';

const config = JSON.parse(readFileSync(process.argv[2], 'utf8'));
mkdirSync(config.out, { recursive: true });
const results = { backfill: null, errors: [] };
const browser = await chromium.launch({
  executablePath: process.env.CHROMIUM || '/usr/bin/chromium',
  args: ['--no-sandbox', '--disable-gpu', '--disable-quic', '--no-first-run',
    '--disable-background-networking', '--disable-component-update', '--disable-sync'],
});
try {
  const page = await (await browser.newContext({ viewport: { width: 1280, height: 900 } })).newPage();
  page.on('pageerror', (error) => results.errors.push('pageerror: ' + error.message));
  page.on('console', (message) => { if (message.type() === 'error') results.errors.push('console: ' + message.text()); });
  await page.goto(config.url + '/status.html', { waitUntil: 'networkidle' });
  await page.waitForSelector('#backfill', { timeout: 15000 });
  results.backfill = await page.textContent('#backfill');
  await page.screenshot({ path: join(config.out, 'status-backfill.png'), fullPage: true });
} catch (error) {
  results.errors.push(String(error));
} finally {
  await browser.close();
}
console.log(JSON.stringify(results));
process.exit(results.errors.length === 0 ? 0 : 1);
