// stats.js - exposure statistics by exam type (or room, preset, shift,
// transducer) for a chosen period: distribution pictures and the table,
// with the files (CSV, JSON) the accreditation lead takes away.
import { el, svg, clear, header, getJSON, showError, param, fmt, percent, minutes, orNone, scale, niceMax, siteField, chosenSite } from './common.js';

header('stats.html');
const content = document.getElementById('content');
const BY = [['exam_type', 'Exam type'], ['room', 'Room'], ['preset', 'Preset'], ['shift', 'Shift'], ['transducer', 'Transducer'], ['site', 'Site (compare sites)']];

function controls(from, to, by) {
  const select = el('select', { name: 'by', id: 'by' });
  for (const [value, label] of BY) select.appendChild(el('option', { value, selected: value === by ? 'selected' : null }, label));
  const form = el('form', { class: 'controls', method: 'get', action: 'stats.html' },
    el('label', {}, 'From', el('input', { type: 'date', name: 'from', id: 'from', value: from || '' })),
    el('label', {}, 'To', el('input', { type: 'date', name: 'to', id: 'to', value: to || '' })),
    el('label', {}, 'By', select),
    siteField(),
    el('button', { type: 'submit' }, 'Show'),
    el('button', { type: 'button', id: 'print' }, 'Print'));
  form.querySelector('#print').addEventListener('click', () => window.print());
  return form;
}

/* Box picture: whisker P5-P95, box P25-P75, median bar, text values. */
function boxChart(rows, field, title, id) {
  const shown = rows.filter((r) => r[field] && r[field].count > 0);
  const rowHeight = 26, left = 200, right = 190, width = 900, top = 34;
  const height = top + shown.length * rowHeight + 28;
  const max = niceMax(Math.max(0.5, ...shown.map((r) => r[field].p95)));
  const x = scale(0, max, left, width - right);
  const chart = svg('svg', { class: 'chart', id, viewBox: `0 0 ${width} ${height}`, width, height, role: 'img', 'aria-label': title });
  chart.appendChild(svg('text', { x: 8, y: 16, 'font-weight': 'bold' }, title));
  chart.appendChild(svg('text', { x: 8, y: 30 }, 'line: P5 to P95 · box: P25 to P75 · thick bar: median'));
  for (let i = 0; i <= 5; i++) {
    const v = (max * i) / 5;
    chart.appendChild(svg('line', { class: 'grid', x1: x(v), x2: x(v), y1: top, y2: height - 24 }));
    chart.appendChild(svg('text', { x: x(v), y: height - 8, 'text-anchor': 'middle' }, v.toFixed(2)));
  }
  shown.forEach((row, index) => {
    const d = row[field], y = top + index * rowHeight + rowHeight / 2;
    chart.appendChild(svg('text', { x: left - 8, y: y + 4, 'text-anchor': 'end' }, `${orNone(row.key)} (${d.count})`.slice(0, 30)));
    chart.appendChild(svg('line', { x1: x(d.p05), x2: x(d.p95), y1: y, y2: y, stroke: '#1f2d33', 'stroke-width': 1.2 }));
    chart.appendChild(svg('line', { x1: x(d.p05), x2: x(d.p05), y1: y - 5, y2: y + 5, stroke: '#1f2d33' }));
    chart.appendChild(svg('line', { x1: x(d.p95), x2: x(d.p95), y1: y - 5, y2: y + 5, stroke: '#1f2d33' }));
    chart.appendChild(svg('rect', { x: x(d.p25), y: y - 8, width: Math.max(1, x(d.p75) - x(d.p25)), height: 16, fill: '#dde9ea', stroke: '#2f6470' }));
    chart.appendChild(svg('line', { x1: x(d.median), x2: x(d.median), y1: y - 9, y2: y + 9, stroke: '#1f2d33', 'stroke-width': 3.5 }));
    chart.appendChild(svg('text', { x: width - right + 8, y: y + 4 }, `median ${fmt(d.median)} · P95 ${fmt(d.p95)}`));
  });
  return chart;
}

function table(data) {
  const label = BY.find(([v]) => v === data.by);
  // The TI thresholds are the ones the document reports (the policy's ladder).
  const thresholds = ((data.total || data.rows[0] || {}).time_at_or_above || []).map((x) => x.threshold);
  const thresholdText = (v) => (Number.isInteger(v) ? v.toFixed(1) : String(v));
  const head = ['Exams', 'With a TI / MI value (percentiles over these)', 'TI median', 'TI P75', 'TI P95', 'MI median', 'MI P75', 'MI P95', 'With findings (violations, warnings, advisories above their limit)', 'Informational only (advisories below their limit)', 'Scan time median',
    ...thresholds.map((v) => `TI ≥ ${thresholdText(v)}: exams / P95`), 'Captures with indices'];
  const row = (r, total) => {
    const t = (threshold) => (r.time_at_or_above || []).find((x) => Math.abs(x.threshold - threshold) < 1e-9) || {};
    const timeCell = (threshold) => { const x = t(threshold); return el('td', { class: 'n' }, `${x.exam_count ?? '—'} / ${minutes(x.p95_seconds)}`); };
    return el('tr', { class: total ? 'flagged' : null },
      el('td', {}, total ? 'All exams' : orNone(r.key)), el('td', { class: 'n' }, r.exam_count),
      el('td', { class: 'n', 'data-counts': 'values' }, `${r.governing.count ?? 0} / ${r.mi.count ?? 0}`),
      el('td', { class: 'n' }, fmt(r.governing.median)), el('td', { class: 'n' }, fmt(r.governing.p75)), el('td', { class: 'n' }, fmt(r.governing.p95)),
      el('td', { class: 'n' }, fmt(r.mi.median)), el('td', { class: 'n' }, fmt(r.mi.p75)), el('td', { class: 'n' }, fmt(r.mi.p95)),
      el('td', { class: 'n' }, percent(r.share_with_findings)), el('td', { class: 'n' }, percent(r.share_informational_only)), el('td', { class: 'n' }, minutes(r.estimated_seconds.median)),
      thresholds.map(timeCell), el('td', { class: 'n' }, percent(r.data_completeness)));
  };
  return el('table', { id: 'stats-table' },
    el('thead', {}, el('tr', {}, el('th', {}, label ? label[1] : data.by), head.map((h) => el('th', { class: 'n' }, h)))),
    el('tbody', {}, data.rows.map((r) => row(r, false)), data.total ? row(data.total, true) : null));
}

async function main() {
  const query = new URLSearchParams();
  for (const name of ['from', 'to', 'by']) if (param(name)) query.set(name, param(name));
  clear(content);
  let data;
  try {
    data = await getJSON('/api/v1/stats?' + query.toString());
  } catch (error) {
    content.appendChild(controls(param('from'), param('to'), param('by') || 'exam_type'));
    showError(content, error);
    return;
  }
  document.getElementById('title').textContent = `Exposure statistics${data.institution ? ', ' + data.institution : ''}, ${data.from} to ${data.to}`;
  content.appendChild(controls(data.from, data.to, data.by));
  const files = new URLSearchParams({ from: data.from, to: data.to, by: data.by });
  if (chosenSite()) files.set('site', chosenSite());
  content.appendChild(el('dl', { class: 'facts' },
    el('dt', {}, 'Institution'), el('dd', { id: 'institution' }, data.institution || 'not configured (set [site] institution in the configuration)'),
    el('dt', {}, 'Period'), el('dd', {}, `${data.from} to ${data.to} (local day of each exam's first capture)`),
    el('dt', {}, 'Sites'), el('dd', { id: 'sites' }, data.sites ? data.sites.join(', ') : 'all'),
    el('dt', {}, 'Exams'), el('dd', {}, String(data.exam_count)),
    el('dt', {}, 'Per exam'), el('dd', {}, 'highest governing thermal index (TIS, TIB or TIC as the exam type requires) and highest MI'),
    el('dt', {}, 'Percentiles'), el('dd', {}, data.quantile_method),
    el('dt', {}, 'Policy version'), el('dd', {}, data.policy_version || 'none recorded (exams not yet evaluated by the policy engine)'),
    el('dt', {}, 'Data completeness'), el('dd', {}, `${percent(data.data_completeness)} of captures carry indices (${data.captures_with_indices} of ${data.captures})`),
    el('dt', {}, 'Files'), el('dd', {},
      el('a', { href: '/api/v1/stats?' + files.toString() + '&format=csv', download: `mitilog-stats-${data.from}-${data.to}.csv` }, 'CSV'), ' · ',
      el('a', { href: '/api/v1/stats?' + files.toString() }, 'JSON'),
      ' · printable HTML: mitilog report stats --format html')));
  content.appendChild(el('h2', {}, 'Distributions'));
  content.appendChild(boxChart(data.rows, 'governing', 'Highest governing TI per exam', 'chart-governing'));
  content.appendChild(boxChart(data.rows, 'mi', 'Highest MI per exam', 'chart-mi'));
  content.appendChild(el('h2', {}, 'Table'));
  content.appendChild(table(data));
  content.appendChild(el('p', { class: 'note' }, 'Times at or above a threshold are estimates from the exam timeline (gaps capped; docs/extraction.md).'));
}

main();
