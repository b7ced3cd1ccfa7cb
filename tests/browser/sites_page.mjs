// sites_page.mjs - the dashboard's site selector and per-site comparison
// in Debian's headless Chromium (playwright-core, no downloaded browsers),
// over a running mitilog daemon that the pytest side started and fed.
//
//   node sites_page.mjs URL [SITE]
//
// Loads URL (a dashboard page); reads the site selector (absent when one
// site holds data), the first column of the page's table and the "Sites"
// fact; with SITE, chooses it in the selector and reads them again after
// the page reloads. Prints one JSON line; exit status 0 when the pages
// rendered without errors.
import { chromium } from 'playwright-core';

const results = { before: null, after: null, errors: [] };
const browser = await chromium.launch({
  executablePath: process.env.CHROMIUM || '/usr/bin/chromium',
  args: ['--no-sandbox', '--disable-gpu', '--disable-quic', '--no-first-run',
    '--disable-background-networking', '--disable-component-update', '--disable-sync'],
});
const page = await (await browser.newContext({ viewport: { width: 1200, height: 900 } })).newPage();
page.on('pageerror', (error) => results.errors.push('pageerror: ' + error.message));
page.on('console', (message) => { if (message.type() === 'error') results.errors.push('console: ' + message.text()); });

async function read() {
  await page.waitForSelector('#sites', { timeout: 15000 });
  return page.evaluate(() => {
    const select = document.querySelector('#site-select');
    const holder = document.querySelector('#site-choice');
    const table = document.querySelector('#stats-table, #groups');
    return {
      url: window.location.search,
      selector_shown: Boolean(select) && !holder.hidden,
      options: select ? [...select.options].map((o) => o.textContent) : [],
      chosen: select ? select.value : null,
      sites_fact: document.querySelector('#sites').textContent,
      keys: table ? [...table.querySelectorAll('tbody tr')].map((tr) => tr.children[tr.children.length > 1 && table.id === 'groups' ? 1 : 0].textContent) : [],
      heading: table ? table.querySelector('thead th:nth-child(' + (table.id === 'groups' ? 2 : 1) + ')').textContent : null,
    };
  });
}

try {
  await page.goto(process.argv[2], { waitUntil: 'networkidle' });
  results.before = await read();
  if (process.argv[3]) {
    await Promise.all([
      page.waitForNavigation({ waitUntil: 'networkidle' }),
      page.selectOption('#site-select', process.argv[3]),
    ]);
    results.after = await read();
  }
} catch (error) {
  results.errors.push(String(error && error.stack ? error.stack : error));
}
await browser.close();
console.log(JSON.stringify(results));
process.exit(results.errors.length ? 1 : 0);
