// exam.js - one exam (exam.html?study=UID): the timeline picture of each
// index over the exam with the applicable limits and dwell thresholds,
// the findings and the instances. Minimal patient data: a short study key.
import { el, svg, clear, header, getJSON, showError, param, fmt, minutes, orNone, studyKey, scale, niceMax, marker } from './common.js';
import { provenanceTable } from './provenance.js';

header('');
const content = document.getElementById('content');

const SERIES = [
  { key: 'mi', label: 'MI', shape: 'circle', dash: '', stroke: '#1f2d33' },
  { key: 'tis', label: 'TIS', shape: 'square', dash: '6 3', stroke: '#2f6470' },
  { key: 'tib', label: 'TIB', shape: 'triangle', dash: '2 3', stroke: '#7a4b12' },
  { key: 'tic', label: 'TIC', shape: 'diamond', dash: '10 3 2 3', stroke: '#5b4a7a' },
];

// The limits drawn come from the active policy (/api/v1/policy `limits`:
// per exam group and age group, as the policy engine applies them) and
// the exam's own group (`group` of the study); nothing is assumed here.
// Without either, no limit is drawn and the legend says why.
function limitsFor(policy, study) {
  const none = (why) => ({ source: why, ti: null, mi: null, miCeiling: null, dwell: [] });
  if (!policy || !Array.isArray(policy.limits)) return none('the active policy could not be read: no limits drawn');
  if (!study.group) return none('the exam group is not recorded yet (the exam is rebuilt with its next object): no limits drawn');
  const age = (study.context && study.context.age_group) || 'adult';
  const entry = policy.limits.find((l) => l.group === study.group && l.age_group === age) ||
    policy.limits.find((l) => l.group === study.group && l.age_group === 'adult');
  if (!entry) return none(`the active policy sets no limits for group ${study.group}: no limits drawn`);
  return {
    source: `active policy ${policy.version ? policy.version.slice(0, 12) + '…' : ''}, group ${entry.group}, age group ${entry.age_group}` +
      (entry.dwell_rule ? `, dwell table of ${entry.dwell_rule}` : ''),
    ti: entry.ti_ceiling, mi: entry.mi_equipment, miCeiling: entry.mi_ceiling,
    dwell: (entry.dwell || []).map((d) => ({ threshold: d.threshold, text: d.not_recommended ? 'not recommended' : `${d.minutes} min` })),
  };
}

function timelineChart(study, limits) {
  const byUid = new Map((study.instances || []).map((i) => [i.sop_instance_uid, i]));
  const points = (study.timeline || []).map((t) => ({ t: t.start_seconds / 60, instance: byUid.get(t.sop_instance_uid) || {} }));
  const width = 900, height = 360, left = 52, right = 150, top = 24, bottom = 44;
  const chart = svg('svg', { class: 'chart', id: 'timeline-chart', viewBox: `0 0 ${width} ${height}`, width, height,
    role: 'img', 'aria-label': 'Indices over the exam' });
  if (points.length === 0) {
    chart.appendChild(svg('text', { x: 20, y: 40 }, 'No timed captures: the exam has no timeline.'));
    return chart;
  }
  const present = SERIES.filter((s) => points.some((p) => typeof p.instance[s.key] === 'number'));
  const dwell = limits.dwell;
  const limitValues = [limits.ti, limits.mi].filter((v) => typeof v === 'number' && !Number.isNaN(v));
  const values = points.flatMap((p) => present.map((s) => p.instance[s.key]).filter((v) => typeof v === 'number'));
  const yMax = niceMax(Math.max(...values, ...limitValues, 0.5) * 1.05);
  const tMax = Math.max(...points.map((p) => p.t), 0.5);
  const x = scale(0, tMax, left, width - right);
  const y = scale(0, yMax, height - bottom, top);
  // grid and axes
  for (let i = 0; i <= 5; i++) {
    const v = (yMax * i) / 5;
    chart.appendChild(svg('line', { class: 'grid', x1: left, x2: width - right, y1: y(v), y2: y(v) }));
    chart.appendChild(svg('text', { x: left - 6, y: y(v) + 4, 'text-anchor': 'end' }, v.toFixed(1)));
  }
  for (let i = 0; i <= 6; i++) {
    const t = (tMax * i) / 6;
    chart.appendChild(svg('text', { x: x(t), y: height - bottom + 16, 'text-anchor': 'middle' }, t.toFixed(1)));
  }
  chart.appendChild(svg('line', { class: 'axis', x1: left, x2: left, y1: top, y2: height - bottom }));
  chart.appendChild(svg('line', { class: 'axis', x1: left, x2: width - right, y1: height - bottom, y2: height - bottom }));
  chart.appendChild(svg('text', { x: (left + width - right) / 2, y: height - 8, 'text-anchor': 'middle' }, 'minutes since the first capture (estimate)'));
  chart.appendChild(svg('text', { x: 6, y: 14 }, 'displayed index'));
  // dwell thresholds (thin, dotted, labelled) and limits (thick, dashed,
  // labelled); labels are spread apart so that they never overlap.
  const labels = [];
  for (const step of dwell) {
    const v = step.threshold;
    if (!(v <= yMax)) continue;
    chart.appendChild(svg('line', { x1: left, x2: width - right, y1: y(v), y2: y(v), stroke: '#8a989b', 'stroke-dasharray': '1 3', 'stroke-width': 1.2, class: 'dwell' }));
    labels.push({ y: y(v) + 4, text: `TI ≥ ${Number.isInteger(v) ? v.toFixed(1) : v}: ${step.text}`, bold: false });
  }
  const limitLines = [
    [limits.ti, 'TI ceiling'], [limits.mi, 'MI equipment max'], [limits.miCeiling, 'MI ceiling'],
  ];
  for (const [value, label] of limitLines) {
    if (typeof value !== 'number' || Number.isNaN(value) || value > yMax) continue;
    chart.appendChild(svg('line', { x1: left, x2: width - right, y1: y(value), y2: y(value), stroke: '#1f2d33', 'stroke-width': 2, 'stroke-dasharray': '8 4', class: 'limit' }));
    labels.push({ y: y(value) + 4, text: `${label} ${value}`, bold: true });
  }
  labels.sort((a, b) => a.y - b.y);
  for (let i = 1; i < labels.length; i++) labels[i].y = Math.max(labels[i].y, labels[i - 1].y + 13);
  for (const label of labels) {
    chart.appendChild(svg('text', { x: width - right + 6, y: label.y, 'font-weight': label.bold ? 'bold' : null }, label.text));
  }
  // series: line + distinct markers + end label
  for (const series of present) {
    const seriesPoints = points.filter((p) => typeof p.instance[series.key] === 'number');
    const path = seriesPoints.map((p, i) => `${i ? 'L' : 'M'}${x(p.t).toFixed(1)},${y(p.instance[series.key]).toFixed(1)}`).join('');
    chart.appendChild(svg('path', { d: path, fill: 'none', stroke: series.stroke, 'stroke-width': 1.6, 'stroke-dasharray': series.dash || null, class: 'series series-' + series.key }));
    for (const p of seriesPoints) {
      const m = marker(series.shape, x(p.t), y(p.instance[series.key]), 3.2, { fill: '#ffffff', stroke: series.stroke, 'stroke-width': 1.4, class: 'point' });
      m.appendChild(svg('title', {}, `${series.label} ${p.instance[series.key]} at ${p.t.toFixed(1)} min`));
      chart.appendChild(m);
    }
    const last = seriesPoints[seriesPoints.length - 1];
    chart.appendChild(svg('text', { x: x(last.t) + 6, y: y(last.instance[series.key]) - 6, 'font-weight': 'bold' }, series.label));
  }
  return chart;
}

function legend(study, limits) {
  const present = SERIES.filter((s) => (study.instances || []).some((i) => typeof i[s.key] === 'number'));
  const items = present.map((s) => {
    const sample = svg('svg', { width: 46, height: 14, 'aria-hidden': 'true' },
      svg('line', { x1: 2, x2: 44, y1: 7, y2: 7, stroke: s.stroke, 'stroke-width': 1.6, 'stroke-dasharray': s.dash || null }),
      marker(s.shape, 23, 7, 3.2, { fill: '#fff', stroke: s.stroke, 'stroke-width': 1.4 }));
    return el('span', {}, sample, ` ${s.label}   `);
  });
  return el('p', { class: 'legend' }, items,
    ` Thick dashed lines: limits; dotted lines: dwell thresholds with their time limits (${limits.source}).`);
}

function findingsTable(findings) {
  if (!findings || findings.length === 0) return el('p', { id: 'no-findings' }, 'No findings recorded for this exam (or the policy engine has not evaluated it yet).');
  return el('table', { id: 'findings' },
    el('thead', {}, el('tr', {}, ['Rule', 'Severity', 'Quantity', 'Measured', 'Limit', 'Threshold', 'Estimated time', 'Provisional', 'Assumptions', 'Source'].map((t) => el('th', {}, t)))),
    el('tbody', {}, findings.map((f) => el('tr', {},
      el('td', {}, f.rule_id), el('td', {}, f.severity), el('td', {}, orNone(f.quantity)),
      el('td', { class: 'n' }, f.measured_value === null ? '—' : `${fmt(f.measured_value, 2)} ${f.unit || ''}`),
      el('td', { class: 'n' }, fmt(f.limit_value, 2)), el('td', { class: 'n' }, fmt(f.threshold, 1)),
      el('td', { class: 'n' }, minutes(f.estimated_seconds)), el('td', {}, f.provisional ? 'yes' : 'no'),
      el('td', {}, orNone(f.assumptions)), el('td', {}, orNone(f.source))))));
}

function instancesTable(instances) {
  return el('table', { id: 'instances' },
    el('thead', {}, el('tr', {}, ['#', 'Acquired', 'Kind', 'Modes', 'MI', 'TIS', 'TIB', 'TIC', 'Preset', 'Transducer', 'Station', 'Series'].map((t) => el('th', {}, t)))),
    el('tbody', {}, instances.map((i, n) => el('tr', {},
      el('td', { class: 'n' }, n + 1), el('td', {}, orNone(i.acquired_at)), el('td', {}, i.object_kind),
      el('td', {}, (i.modes || []).join(' + ') || '—'),
      el('td', { class: 'n' }, fmt(i.mi, 1)), el('td', { class: 'n' }, fmt(i.tis, 1)),
      el('td', { class: 'n' }, fmt(i.tib, 1)), el('td', { class: 'n' }, fmt(i.tic, 1)),
      el('td', {}, orNone(i.preset)), el('td', {}, orNone(i.transducer)),
      el('td', {}, orNone(i.station_name)), el('td', {}, orNone(i.series_description))))));
}

async function main() {
  const uid = param('study');
  clear(content);
  if (!uid) {
    content.appendChild(el('p', {}, 'No study chosen: open an exam from the weekly outlier list.'));
    return;
  }
  let study;
  try {
    study = await getJSON('/api/v1/studies/' + encodeURIComponent(uid));
  } catch (error) {
    showError(content, error);
    return;
  }
  let policy = null;
  try {
    policy = await getJSON('/api/v1/policy');
  } catch (error) { /* no limits drawn, and the legend says why */ }
  const limits = limitsFor(policy, study);
  const key = await studyKey(uid);
  const first = (study.instances || [])[0] || {};
  const context = study.context || {};
  document.getElementById('title').textContent = `Exam ${key}`;
  const summary = study.timeline_summary || {};
  content.appendChild(el('dl', { class: 'facts' },
    el('dt', {}, 'Study key'), el('dd', { id: 'study-key' }, key),
    el('dt', {}, 'Study description'), el('dd', { id: 'study-description' }, orNone(first.study_description)),
    el('dt', {}, 'Exam type'), el('dd', {}, orNone(study.exam_type_label || study.exam_type)),
    el('dt', {}, 'Governing index'), el('dd', {}, study.governing_index ? study.governing_index.toUpperCase() : '—'),
    el('dt', {}, 'Room, preset, shift'), el('dd', { id: 'context' }, [orNone(context.room || first.room), orNone(context.preset || first.preset), orNone(context.shift || first.shift)].join(' · ')),
    el('dt', {}, 'Transducer'), el('dd', {}, orNone(context.transducer || first.transducer)),
    el('dt', {}, 'First / last capture'), el('dd', {}, `${orNone(study.first_acquired_at)} / ${orNone(study.last_acquired_at)}`),
    el('dt', {}, 'Estimated scan time'), el('dd', {}, `${minutes(summary.estimated_seconds)} (estimate: gaps capped at ${fmt(summary.gap_cap_seconds, 0)} s, ${summary.capped_count ?? '—'} capped, ${summary.untimed_count ?? '—'} untimed)`),
    el('dt', {}, 'Maxima'), el('dd', {}, Object.entries(study.maxima || {}).filter(([, v]) => v !== null).map(([k, v]) => `${k.toUpperCase()} ${v}`).join(', ') || '—'),
    study.measurements ? [el('dt', {}, 'Thermal dose (CEM43)'), el('dd', {}, `${fmt(study.measurements.cem43_minutes, 3)} min (estimate)`)] : null));
  content.appendChild(el('h2', {}, 'Indices over the exam'));
  content.appendChild(timelineChart(study, limits));
  content.appendChild(legend(study, limits));
  content.appendChild(el('h2', {}, 'Findings'));
  content.appendChild(findingsTable(study.findings));
  content.appendChild(el('h2', {}, `Instances (${(study.instances || []).length})`));
  content.appendChild(instancesTable(study.instances || []));
  content.appendChild(el('h2', {}, 'Where each index comes from'));
  content.appendChild(provenanceTable(study.instances || []));
}

main();
