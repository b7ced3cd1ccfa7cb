// common.js - shared by every page: the header with navigation and the
// advisory caution, safe element builders (text always through
// createTextNode, never innerHTML), fetching JSON, number formatting and
// small SVG helpers. No data is ever parsed as HTML.

export const CAUTION =
  'Advisory: these figures are estimates from the indices the equipment displayed. ' +
  "The department's safety policy, its medical physicist and local regulation decide.";

const PAGES = [
  ['review.html', 'Review worklist'],
  ['index.html', 'Weekly outliers'],
  ['stats.html', 'Statistics by exam type'],
  ['presets.html', 'Presets over time'],
  ['policy.html', 'Policy'],
  ['status.html', 'Ingest status'],
  ['devices.html', 'Devices'],
];

/* el('td', {class: 'n'}, 'text', child...) */
export function el(tag, attributes, ...children) {
  const node = document.createElement(tag);
  setAttributes(node, attributes);
  append(node, children);
  return node;
}

export function svg(tag, attributes, ...children) {
  const node = document.createElementNS('http://www.w3.org/2000/svg', tag);
  setAttributes(node, attributes);
  append(node, children);
  return node;
}

function setAttributes(node, attributes) {
  for (const [name, value] of Object.entries(attributes || {})) {
    if (value !== undefined && value !== null && value !== false) node.setAttribute(name, String(value));
  }
}

function append(node, children) {
  for (const child of children.flat()) {
    if (child === null || child === undefined || child === false) continue;
    node.appendChild(child instanceof Node ? child : document.createTextNode(String(child)));
  }
}

export function clear(node) {
  while (node.firstChild) node.removeChild(node.firstChild);
  return node;
}

/* The sites the page is limited to (?site=, docs/sites.md), or null. */
export function chosenSite() {
  const value = new URLSearchParams(window.location.search).get('site');
  return value ? value : null;
}

/* A hidden field that keeps the chosen site when a page's form is sent. */
export function siteField() {
  const site = chosenSite();
  return site ? el('input', { type: 'hidden', name: 'site', value: site }) : null;
}

/* The site selector: shown once more than one site holds data; choosing
 * one reloads the page with ?site=NAME (every API call of the page then
 * carries it, getJSON below). */
async function siteSelector(holder) {
  let sites = [];
  try {
    sites = (await getJSON('/api/v1/sites')).map((s) => s.site);
  } catch (error) {
    return; /* the page says what failed to load */
  }
  const chosen = chosenSite();
  if (chosen && !sites.includes(chosen)) sites.push(chosen);
  if (sites.length < 2) return;
  const select = el('select', { id: 'site-select', name: 'site' },
    el('option', { value: '', selected: chosen ? null : 'selected' }, 'All sites'),
    sites.map((s) => el('option', { value: s, selected: s === chosen ? 'selected' : null }, s)));
  select.addEventListener('change', () => {
    const query = new URLSearchParams(window.location.search);
    if (select.value) query.set('site', select.value);
    else query.delete('site');
    window.location.search = query.toString();
  });
  holder.appendChild(el('label', { class: 'site-selector' }, 'Site ', select));
  holder.hidden = false;
}

export function header(current) {
  const list = el('ul', {});
  const site = chosenSite();
  for (const [href, label] of PAGES) {
    const target = site ? href + '?site=' + encodeURIComponent(site) : href;
    list.appendChild(el('li', {}, el('a', { href: target, 'aria-current': href === current ? 'page' : null }, label)));
  }
  const selector = el('div', { id: 'site-choice', hidden: 'hidden' });
  const top = el('header', { class: 'site-header' },
    el('span', { class: 'site-name' }, 'mitilog ', el('small', {}, 'acoustic output audit')),
    el('nav', { 'aria-label': 'Pages' }, list),
    selector,
    el('p', { class: 'caution', role: 'note' }, CAUTION));
  document.body.insertBefore(top, document.body.firstChild);
  siteSelector(selector);
}

export async function getJSON(url) {
  const site = chosenSite();
  if (site && url.startsWith('/api/v1/') && !/[?&]site=/.test(url)) {
    url += (url.includes('?') ? '&' : '?') + 'site=' + encodeURIComponent(site);
  }
  const response = await fetch(url, { headers: { Accept: 'application/json' } });
  let body = null;
  try { body = await response.json(); } catch (e) { body = null; }
  if (!response.ok) {
    const message = body && body.error ? body.error : response.status + ' ' + response.statusText;
    const error = new Error(message);
    error.status = response.status;
    throw error;
  }
  return body;
}

export function showError(container, error) {
  container.appendChild(el('p', { class: 'error', role: 'alert' }, 'Could not load: ' + error.message));
}

export function param(name) {
  return new URLSearchParams(window.location.search).get(name);
}

export function fmt(value, digits = 2) {
  if (value === null || value === undefined || Number.isNaN(value)) return '—';
  return Number(value).toFixed(digits);
}

export function percent(value) {
  if (value === null || value === undefined || Number.isNaN(value)) return '—';
  return (100 * value).toFixed(0) + ' %';
}

export function minutes(seconds) {
  if (seconds === null || seconds === undefined) return '—';
  return (seconds / 60).toFixed(1) + ' min';
}

export function orNone(text) {
  return text === null || text === undefined || text === '' ? '(not recorded)' : String(text);
}

/* Short study key: first 8 hex digits of SHA-256 of the Study Instance UID
 * (the same as the API's study_key). */
export async function studyKey(uid) {
  if (!uid) return '—';
  if (window.crypto && crypto.subtle) {
    const digest = await crypto.subtle.digest('SHA-256', new TextEncoder().encode(uid));
    return Array.from(new Uint8Array(digest)).slice(0, 4).map((b) => b.toString(16).padStart(2, '0')).join('');
  }
  return '…' + uid.slice(-8);
}

/* ISO 8601 week of a local date, "YYYY-Www". */
export function isoWeek(date) {
  const d = new Date(Date.UTC(date.getFullYear(), date.getMonth(), date.getDate()));
  const day = d.getUTCDay() || 7;
  d.setUTCDate(d.getUTCDate() + 4 - day);
  const yearStart = new Date(Date.UTC(d.getUTCFullYear(), 0, 1));
  const week = Math.ceil(((d - yearStart) / 86400000 + 1) / 7);
  return d.getUTCFullYear() + '-W' + String(week).padStart(2, '0');
}

/* Hatching pattern (diagonal lines) for marked areas: meaning by texture. */
export function hatchDefs(id) {
  return svg('defs', {},
    svg('pattern', { id, width: 6, height: 6, patternUnits: 'userSpaceOnUse', patternTransform: 'rotate(45)' },
      svg('rect', { width: 6, height: 6, fill: '#f3e6d2' }),
      svg('line', { x1: 0, y1: 0, x2: 0, y2: 6, stroke: '#7a4b12', 'stroke-width': 2.2 })));
}

/* A linear scale. */
export function scale(domainLow, domainHigh, rangeLow, rangeHigh) {
  const span = domainHigh - domainLow || 1;
  return (value) => rangeLow + ((value - domainLow) / span) * (rangeHigh - rangeLow);
}

export function niceMax(value) {
  if (!(value > 0)) return 1;
  const power = Math.pow(10, Math.floor(Math.log10(value)));
  for (const step of [1, 1.5, 2, 2.5, 3, 4, 5, 6, 8, 10]) {
    if (value <= step * power) return step * power;
  }
  return 10 * power;
}

/* Marker shapes so that series differ by more than colour. */
export function marker(shape, x, y, size, attributes) {
  const s = size;
  switch (shape) {
    case 'square': return svg('rect', { x: x - s, y: y - s, width: 2 * s, height: 2 * s, ...attributes });
    case 'triangle': return svg('path', { d: `M${x},${y - s * 1.2}L${x + s * 1.1},${y + s}L${x - s * 1.1},${y + s}Z`, ...attributes });
    case 'diamond': return svg('path', { d: `M${x},${y - s * 1.3}L${x + s * 1.3},${y}L${x},${y + s * 1.3}L${x - s * 1.3},${y}Z`, ...attributes });
    default: return svg('circle', { cx: x, cy: y, r: s, ...attributes });
  }
}
