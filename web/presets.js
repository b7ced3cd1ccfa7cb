// presets.js - presets over time: per preset and room, the weekly median
// of each exam's highest governing TI against the series' own trailing
// baseline; weeks beyond robust z 3 are marked with a ring and their z.
import { el, svg, clear, header, getJSON, showError, param, fmt, orNone, scale, niceMax } from './common.js';

header('presets.html');
const content = document.getElementById('content');

function seriesChart(series) {
  const width = 420, height = 190, left = 40, right = 16, top = 14, bottom = 34;
  const values = series.points.flatMap((p) => [p.median, p.baseline_median]).filter((v) => typeof v === 'number');
  const max = niceMax(Math.max(0.2, ...values) * 1.1);
  const x = scale(0, Math.max(1, series.points.length - 1), left, width - right);
  const y = scale(0, max, height - bottom, top);
  const chart = svg('svg', { class: 'chart drift', viewBox: `0 0 ${width} ${height}`, width, height, role: 'img',
    'aria-label': `${orNone(series.preset)} in ${orNone(series.room)}: weekly median over time` });
  for (let i = 0; i <= 4; i++) {
    const v = (max * i) / 4;
    chart.appendChild(svg('line', { class: 'grid', x1: left, x2: width - right, y1: y(v), y2: y(v) }));
    chart.appendChild(svg('text', { x: left - 4, y: y(v) + 4, 'text-anchor': 'end' }, v.toFixed(1)));
  }
  series.points.forEach((p, i) => {
    if (i % Math.ceil(series.points.length / 6) === 0 || i === series.points.length - 1) {
      chart.appendChild(svg('text', { x: x(i), y: height - bottom + 16, 'text-anchor': 'middle' }, p.week.slice(5)));
    }
  });
  const baseline = series.points.map((p, i) => [i, p.baseline_median]).filter(([, v]) => typeof v === 'number');
  if (baseline.length > 0) {
    chart.appendChild(svg('path', { d: baseline.map(([i, v], n) => `${n ? 'L' : 'M'}${x(i)},${y(v)}`).join(''), fill: 'none', stroke: '#56676d', 'stroke-dasharray': '5 4', 'stroke-width': 1.3 }));
  }
  const medians = series.points.map((p, i) => [i, p.median, p]).filter(([, v]) => typeof v === 'number');
  if (medians.length > 0) {
    chart.appendChild(svg('path', { d: medians.map(([i, v], n) => `${n ? 'L' : 'M'}${x(i)},${y(v)}`).join(''), fill: 'none', stroke: '#2f6470', 'stroke-width': 2 }));
  }
  for (const [i, v, p] of medians) {
    chart.appendChild(svg('rect', { x: x(i) - 3, y: y(v) - 3, width: 6, height: 6, fill: '#2f6470' },
      svg('title', {}, `${p.week}: median ${v} of ${p.count} exams${p.z !== null ? `, z ${fmt(p.z, 1)}` : ''}`)));
    if (p.flagged) {
      chart.appendChild(svg('circle', { cx: x(i), cy: y(v), r: 9, fill: 'none', stroke: '#7a4b12', 'stroke-width': 2.2, class: 'flag' }));
      chart.appendChild(svg('text', { x: x(i), y: y(v) - 13, 'text-anchor': 'middle', 'font-weight': 'bold' }, `z ${fmt(p.z, 1)}`));
    }
  }
  chart.appendChild(svg('text', { x: left, y: height - 4 }, 'solid: weekly median · dashed: baseline median · ring: drift'));
  return chart;
}

async function main() {
  const weeks = param('weeks') || '8';
  const week = param('week');
  clear(content);
  let data;
  try {
    data = await getJSON(`/api/v1/drift?weeks=${encodeURIComponent(weeks)}` + (week ? '&week=' + encodeURIComponent(week) : ''));
  } catch (error) {
    showError(content, error);
    return;
  }
  const form = el('form', { class: 'controls', method: 'get', action: 'presets.html' },
    el('label', {}, 'Last ISO week', el('input', { type: 'week', name: 'week', value: data.last_week })),
    el('label', {}, 'Weeks shown', el('input', { type: 'number', name: 'weeks', min: 2, max: 104, value: weeks })),
    el('button', { type: 'submit' }, 'Show'));
  content.appendChild(form);
  content.appendChild(el('dl', { class: 'facts' },
    el('dt', {}, 'Weeks'), el('dd', {}, `${data.from} to ${data.to} (${data.weeks} ISO weeks, last ${data.last_week})`),
    el('dt', {}, 'Method'), el('dd', {}, data.method + `; drift is a rise: z > ${data.z_limit} from at least ${data.minimum_week_exams} exams in the week (a drop is shown, never flagged); a week needs ${data.minimum_baseline} baseline exams`),
    el('dt', {}, 'Policy version'), el('dd', {}, data.policy_version || 'none recorded'),
    el('dt', {}, 'Data completeness'), el('dd', {}, `${(100 * (data.data_completeness || 0)).toFixed(0)} % of captures carry indices`)));
  const flagged = data.series.filter((s) => s.flagged_weeks > 0);
  content.appendChild(el('h2', {}, `Drifting presets (${flagged.length})`));
  if (flagged.length === 0) content.appendChild(el('p', {}, 'No preset moved beyond its own baseline in these weeks.'));
  const grid = el('div', { class: 'small-multiples', id: 'drift-charts' });
  for (const s of flagged.slice(0, 12)) {
    grid.appendChild(el('figure', {}, el('figcaption', {}, `${orNone(s.preset)} · ${orNone(s.room)} — ${s.flagged_weeks} week(s) risen, largest |z| ${fmt(s.max_abs_z, 1)}`), seriesChart(s)));
  }
  content.appendChild(grid);
  content.appendChild(el('h2', {}, 'All presets'));
  content.appendChild(el('table', { id: 'drift-table' },
    el('thead', {}, el('tr', {}, ['Preset', 'Room', 'Exam type', 'Flagged weeks', 'Largest |z|', ...data.series[0]?.points.map((p) => p.week.slice(5)) || []].map((t) => el('th', {}, t)))),
    el('tbody', {}, data.series.map((s) => el('tr', { class: s.flagged_weeks > 0 ? 'flagged' : null },
      el('td', {}, orNone(s.preset)), el('td', {}, orNone(s.room)), el('td', {}, orNone(s.exam_type)),
      el('td', { class: 'n' }, s.flagged_weeks), el('td', { class: 'n' }, fmt(s.max_abs_z, 1)),
      s.points.map((p) => el('td', { class: 'n' }, p.median === null ? '—' : fmt(p.median, 2) + (p.flagged ? ' ◆' : ''))))))));
  content.appendChild(el('p', { class: 'note' }, '◆ marks a week beyond the drift limit. A changed preset or a serviced transducer shows as a step.'));
}

main();
