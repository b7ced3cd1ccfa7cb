// review.mjs - the review worklist and recording a review, in Debian's
// headless Chromium (playwright-core) over a running mitilog daemon with
// HTTPS and a password file that the pytest side started and fed.
//
//   node review.mjs CONFIG.json
//
// CONFIG: {"url": "https://127.0.0.1:PORT", "out": DIR,
//          "reviewer": [user, password], "viewer": [user, password],
//          "hot_preset": "Abdomen General", "night_shift": "night",
//          "cross_site_page": PATH of an HTML page (file://) that posts a
//          review form to the daemon as soon as it loads}
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
const VIEWPORT = { width: 1280, height: 900 };

async function signedIn([username, password]) {
  const context = await browser.newContext({
    viewport: VIEWPORT, ignoreHTTPSErrors: true, httpCredentials: { username, password },
  });
  const page = await context.newPage();
  page.on('pageerror', (error) => results.errors.push('pageerror: ' + error.message));
  return { context, page };
}

async function shot(page, name) {
  const path = join(config.out, name + '.png');
  await page.screenshot({ path, fullPage: false });
  results.screenshots.push(path);
}

/* 1 when the element's box ends within the first screen (the fold). */
async function aboveFold(locator) {
  const box = await locator.boundingBox();
  return box !== null && box.y + box.height <= VIEWPORT.height;
}

try {
  // 1. The landing page is the worklist; the planted problems are above the fold.
  const reviewer = await signedIn(config.reviewer);
  let page = reviewer.page;
  await page.goto(config.url + '/', { waitUntil: 'networkidle' });
  await page.waitForSelector('#worklist tbody tr', { timeout: 20000 });
  const title = await page.textContent('#title');
  check('landing page is the review worklist', title.startsWith('Review worklist'), title);
  const first = page.locator('#worklist tbody tr').first();
  const firstText = await first.textContent();
  check('MI breach ranks first', firstText.includes('violation') && firstText.includes('MI 2.1'), firstText);
  check('MI breach above the fold', await aboveFold(first));
  if (config.accession) check('MI breach names its accession number', firstText.includes(config.accession), firstText);
  const hot = page.locator('#patterns tbody tr', { hasText: `preset: ${config.hot_preset}` });
  check('hot preset listed as a pattern', (await hot.count()) === 1, await hot.count());
  check('hot preset above the fold', (await hot.count()) === 1 && await aboveFold(hot.first()));
  const night = page.locator('#patterns tbody tr', { hasText: `shift: ${config.night_shift}` });
  check('night-shift pattern listed', (await night.count()) === 1, await night.count());
  check('night-shift pattern above the fold', (await night.count()) === 1 && await aboveFold(night.first()));
  const informational = await page.textContent('#informational summary');
  check('informational advisories counted apart', /Informational advisories: [1-9]/.test(informational), informational);
  const listedInformational = await page.locator('#worklist tbody tr', { hasText: 'below its limit' }).count();
  check('no informational advisory in the main list', listedInformational === 0, listedInformational);
  const operators = await page.locator('#operators tbody tr').count();
  check('operator view shown when operators are recorded', operators > 0, operators);
  await shot(page, 'review-worklist');

  // 2. A reviewer records a review of the MI breach on its exam page.
  await first.locator('a', { hasText: 'Open exam' }).click();
  await page.waitForSelector('#review-form', { timeout: 15000 });
  const examUrl = page.url();
  const comment = 'Probe sent to physics for output check; operator informed';
  await page.selectOption('#review-outcome', 'referred_to_physics');
  await page.fill('#review-comment', comment);
  await page.click('#review-submit');
  // (a locator, not waitForFunction: the page's CSP forbids eval, rightly)
  await page.locator('#review-message', { hasText: 'Recorded.' }).waitFor({ timeout: 10000 });
  await page.reload({ waitUntil: 'networkidle' });
  await page.waitForSelector('#review-history tbody tr', { timeout: 10000 });
  const history = await page.textContent('#review-history');
  check('review visible after reload', history.includes(comment) && history.includes('Equipment referred to physics')
    && history.includes(config.reviewer[0]), history);
  await shot(page, 'exam-reviewed');
  await page.goto(config.url + '/', { waitUntil: 'networkidle' });
  await page.waitForSelector('#worklist tbody tr');
  const state = await page.locator('#worklist tbody tr').first().locator('td.state').textContent();
  check('worklist shows the finding reviewed', state.includes('Equipment referred to physics'), state);

  // An exam without any index: exposure unknown, never 0.
  if (config.silent_study) {
    await page.goto(`${config.url}/exam.html?study=${encodeURIComponent(config.silent_study)}`, { waitUntil: 'networkidle' });
    await page.waitForSelector('#no-findings', { timeout: 15000 });
    const dose = await page.textContent('#thermal-dose');
    check('silent exam: thermal dose unknown, not 0', dose.startsWith('unknown') && !dose.includes('0.000'), dose);
    const maxima = await page.textContent('#maxima');
    check('silent exam: maxima unknown', maxima.startsWith('unknown'), maxima);
    const none = await page.textContent('#no-findings');
    check('silent exam: says why there is no finding', none.includes('exposure is unknown'), none);
  }

  // 3. A cross-site form post is refused, even with the reviewer's login.
  const before = JSON.parse(await (await reviewer.context.request.get(config.url + '/api/v1/reviews')).text()).length;
  const refused = page.waitForResponse((r) => r.url().endsWith('/api/v1/reviews') && r.request().method() === 'POST');
  await page.goto('file://' + config.cross_site_page);
  const response = await refused;
  check('cross-site form post refused', response.status() === 403, response.status());
  const after = JSON.parse(await (await reviewer.context.request.get(config.url + '/api/v1/reviews')).text()).length;
  check('cross-site post recorded nothing', after === before, { before, after });
  await reviewer.context.close();

  // 4. A viewer sees the history but cannot record.
  const viewer = await signedIn(config.viewer);
  page = viewer.page;
  await page.goto(examUrl, { waitUntil: 'networkidle' });
  await page.waitForSelector('#review-login', { timeout: 15000 });
  check('viewer sees the history', (await page.textContent('#review-history')).includes(comment));
  check('viewer has no review form', (await page.locator('#review-form').count()) === 0);
  const status = await page.evaluate(async () => {
    const session = await (await fetch('api/v1/session')).json();
    const body = new URLSearchParams({ outcome: 'acceptable', comment: 'x', csrf_token: session.csrf_token || '' });
    const study = new URLSearchParams(window.location.search).get('study');
    body.set('study', study);
    const answer = await fetch('api/v1/reviews', { method: 'POST', body });
    return answer.status;
  });
  check('viewer write refused', status === 403, status);
  await shot(page, 'exam-viewer');
  await viewer.context.close();
} catch (error) {
  failed = true;
  results.errors.push('exception: ' + (error && error.stack ? error.stack : String(error)));
} finally {
  await browser.close();
}
if (results.errors.some((e) => !e.startsWith('exception'))) failed = true;
writeFileSync(join(config.out, 'review-results.json'), JSON.stringify(results, null, 2));
console.log(JSON.stringify({ ok: !failed, ...results }));
process.exit(failed ? 1 : 0);
