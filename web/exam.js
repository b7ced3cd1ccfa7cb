// exam.js - one exam (exam.html?study=UID): the timeline picture of each
// index over the exam with the applicable limits and dwell thresholds,
// the findings and the instances. Minimal patient data: a short study key.
import { el, svg, clear, header, getJSON, showError, param, fmt, minutes, orNone, studyKey, scale, marker } from './common.js';
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

// Round ticks from 0 to at least `high`: steps of 1, 2 or 5 x 10^n, about
// `count` of them (common practice, no source). The decimals shown are
// those of the step, so that a label never reads 2.7 for 2.75.
function roundTicks(high, count) {
  const span = high > 0 ? high : 1;
  const raw = span / count;
  const power = Math.pow(10, Math.floor(Math.log10(raw)));
  const step = [1, 2, 5, 10].map((m) => m * power).find((s) => s >= raw - 1e-12);
  const top = Math.ceil(span / step - 1e-9) * step;
  const decimals = Math.max(0, -Math.floor(Math.log10(step) + 1e-9));
  const ticks = [];
  for (let i = 0; i * step <= top + step / 1e6; i++) ticks.push(Number((i * step).toFixed(decimals)));
  return { step, top, ticks, decimals };
}

// Labels in the right margin, each at its line's height when there is
// room; a label moved to make room is joined to its line by a leader, so
// that no label sits beside a line it does not name.
function placeLabels(chart, labels, xLine, xText, lowest, highest) {
  labels.sort((a, b) => a.y - b.y);
  const gap = 14;
  for (let i = 0; i < labels.length; i++) {
    labels[i].at = Math.max(labels[i].y, i ? labels[i - 1].at + gap : highest);
  }
  for (let i = labels.length - 1; i >= 0; i--) {
    const limit = i === labels.length - 1 ? lowest : labels[i + 1].at - gap;
    labels[i].at = Math.min(labels[i].at, limit);
  }
  for (const label of labels) {
    if (Math.abs(label.at - label.y) > 0.5) {
      chart.appendChild(svg('path', { class: 'leader', d: `M${xLine},${label.y}L${xText - 3},${label.at}`, stroke: '#8a989b', fill: 'none', 'stroke-width': 0.8 }));
    }
    chart.appendChild(svg('text', { class: 'line-label', x: xText, y: label.at + 4, 'font-weight': label.bold ? 'bold' : null }, label.text));
  }
}

// The value of an index that the rules, exam records and statistics use:
// the header's or the screen's, as the API's provenance says (docs/api.md,
// "Index provenance"); the header's top-level value when no provenance.
function usedValue(instance, key) {
  const provenance = instance && instance.indices && instance.indices[key];
  if (provenance && 'value' in provenance) return provenance.value;
  return instance ? instance[key] : undefined;
}

function timelineChart(study, limits) {
  const byUid = new Map((study.instances || []).map((i) => [i.sop_instance_uid, i]));
  const points = (study.timeline || []).map((t) => ({ t: t.start_seconds / 60, instance: byUid.get(t.sop_instance_uid) || {} }));
  const width = 900, left = 52, right = 210, top = 34, panelHeight = 150, between = 56, bottom = 44;
  const height = top + 2 * panelHeight + between + bottom;
  const chart = svg('svg', { class: 'chart', id: 'timeline-chart', viewBox: `0 0 ${width} ${height}`,
    preserveAspectRatio: 'xMinYMin meet', role: 'img', 'aria-label': 'MI and thermal indices over the exam, on separate panels' });
  if (points.length === 0) {
    chart.setAttribute('viewBox', `0 0 ${width} 60`);
    chart.appendChild(svg('text', { x: 20, y: 36 }, 'No timed captures: the exam has no timeline.'));
    return chart;
  }
  const tTicks = roundTicks(Math.max(...points.map((p) => p.t), 0.5), 6);
  const x = scale(0, tTicks.top, left, width - right);
  const dwell = Array.isArray(limits.dwell) ? limits.dwell : [];
  const finite = (v) => typeof v === 'number' && !Number.isNaN(v);
  // One panel per kind of index: MI (mechanical) above, TI (thermal) below;
  // each has its own axis, limits and labels.
  const panels = [
    { name: 'MI', series: SERIES.filter((s) => s.key === 'mi'), top, always: true,
      lines: [[limits.mi, 'MI equipment max', true], [limits.miCeiling, 'MI ceiling', true]] },
    { name: 'TI', series: SERIES.filter((s) => s.key !== 'mi'), top: top + panelHeight + between,
      lines: [[limits.ti, 'TI ceiling', true],
        ...dwell.map((d) => [Number(d.threshold), `dwell ${d.text}`, false])] },
  ];
  for (const panel of panels) {
    const present = panel.series.filter((s) => points.some((p) => finite(usedValue(p.instance, s.key))));
    const values = points.flatMap((p) => present.map((s) => usedValue(p.instance, s.key)).filter(finite));
    const high = Math.max(...values, 0.5);
    // MI limits are always drawn; TI lines above the data only when near it
    // (within half again), so that they do not squash the values.
    const lines = panel.lines.filter(([v]) => finite(v) && (panel.always || v <= Math.max(high * 1.5, 1)));
    const yTicks = roundTicks(Math.max(high, ...lines.map(([v]) => v)), 4);
    const base = panel.top + panelHeight;
    const y = scale(0, yTicks.top, base, panel.top);
    chart.appendChild(svg('text', { class: 'panel-title', x: 6, y: panel.top - 14, 'font-weight': 'bold' },
      panel.name === 'MI' ? 'MI (mechanical index)' : 'TI (thermal indices: ' + (present.map((s) => s.label).join(', ') || 'none recorded') + ')'));
    for (const v of yTicks.ticks) {
      chart.appendChild(svg('line', { class: 'grid', x1: left, x2: width - right, y1: y(v), y2: y(v) }));
      chart.appendChild(svg('text', { class: 'tick tick-y', x: left - 6, y: y(v) + 4, 'text-anchor': 'end' }, v.toFixed(yTicks.decimals)));
    }
    for (const t of tTicks.ticks) {
      chart.appendChild(svg('line', { class: 'axis', x1: x(t), x2: x(t), y1: base, y2: base + 4 }));
      chart.appendChild(svg('text', { class: 'tick tick-x', x: x(t), y: base + 16, 'text-anchor': 'middle' }, t.toFixed(tTicks.decimals)));
    }
    chart.appendChild(svg('line', { class: 'axis', x1: left, x2: left, y1: panel.top, y2: base }));
    chart.appendChild(svg('line', { class: 'axis', x1: left, x2: width - right, y1: base, y2: base }));
    // Lines at one value share one label ("2.0: TI ceiling; dwell 4 min").
    const byValue = new Map();
    for (const [value, text, bold] of lines) {
      const entry = byValue.get(value) || { value, texts: [], bold: false };
      entry.texts.push(text);
      entry.bold = entry.bold || bold;
      byValue.set(value, entry);
    }
    const labels = [];
    for (const entry of byValue.values()) {
      chart.appendChild(svg('line', entry.bold
        ? { x1: left, x2: width - right, y1: y(entry.value), y2: y(entry.value), stroke: '#1f2d33', 'stroke-width': 2, 'stroke-dasharray': '8 4', class: 'limit' }
        : { x1: left, x2: width - right, y1: y(entry.value), y2: y(entry.value), stroke: '#8a989b', 'stroke-dasharray': '1 3', 'stroke-width': 1.2, class: 'dwell' }));
      const prefix = panel.name === 'TI' ? 'TI ≥ ' : 'MI ';
      labels.push({ y: y(entry.value), text: `${prefix}${entry.value.toFixed(1)}: ${entry.texts.join('; ')}`, bold: entry.bold });
    }
    placeLabels(chart, labels, width - right, width - right + 8, base, panel.top);
    for (const series of present) {
      const seriesPoints = points.filter((p) => finite(usedValue(p.instance, series.key)));
      const path = seriesPoints.map((p, i) => `${i ? 'L' : 'M'}${x(p.t).toFixed(1)},${y(usedValue(p.instance, series.key)).toFixed(1)}`).join('');
      chart.appendChild(svg('path', { d: path, fill: 'none', stroke: series.stroke, 'stroke-width': 1.6, 'stroke-dasharray': series.dash || null, class: 'series series-' + series.key }));
      for (const p of seriesPoints) {
        const m = marker(series.shape, x(p.t), y(usedValue(p.instance, series.key)), 3.2, { fill: '#ffffff', stroke: series.stroke, 'stroke-width': 1.4, class: 'point' });
        m.appendChild(svg('title', {}, `${series.label} ${usedValue(p.instance, series.key)} at ${p.t.toFixed(1)} min`));
        chart.appendChild(m);
      }
    }
    if (present.length === 0) {
      chart.appendChild(svg('text', { x: left + 12, y: panel.top + panelHeight / 2 }, `No ${panel.name} value recorded: unknown, not 0.`));
    }
  }
  chart.appendChild(svg('text', { x: (left + width - right) / 2, y: height - 8, 'text-anchor': 'middle' }, 'minutes since the first capture (estimate)'));
  return chart;
}

function legend(study, limits) {
  const present = SERIES.filter((s) => (study.instances || []).some((i) => typeof usedValue(i, s.key) === 'number'));
  const items = present.map((s) => {
    const sample = svg('svg', { width: 46, height: 14, 'aria-hidden': 'true' },
      svg('line', { x1: 2, x2: 44, y1: 7, y2: 7, stroke: s.stroke, 'stroke-width': 1.6, 'stroke-dasharray': s.dash || null }),
      marker(s.shape, 23, 7, 3.2, { fill: '#fff', stroke: s.stroke, 'stroke-width': 1.4 }));
    return el('span', {}, sample, ` ${s.label}   `);
  });
  return el('p', { class: 'legend' }, items,
    ` — MI and TI on separate panels, each with its own scale. Thick dashed lines: limits; dotted lines: dwell thresholds of the governing TI with their time limits (${limits.source}).`);
}

/* CEM43 is computed from the governing TI: without any value it is
 * unknown, never 0. */
function thermalDose(measurements) {
  if (measurements.max_governing === null || measurements.max_governing === undefined) {
    return 'unknown: no image carries the governing thermal index, so no thermal dose can be estimated';
  }
  return `${fmt(measurements.cem43_minutes, 3)} min (estimate)`;
}

function findingsTable(findings, silent) {
  if ((!findings || findings.length === 0) && silent) {
    return el('p', { id: 'no-findings' }, 'No finding could be made: no image of this exam carries an index, so its exposure is unknown. '
      + 'The room and transducer appear under "No index displayed" on the review worklist and on the ingest status page.');
  }
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
      el('td', { class: 'n' }, fmt(usedValue(i, 'mi'), 1)), el('td', { class: 'n' }, fmt(usedValue(i, 'tis'), 1)),
      el('td', { class: 'n' }, fmt(usedValue(i, 'tib'), 1)), el('td', { class: 'n' }, fmt(usedValue(i, 'tic'), 1)),
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
    el('dt', {}, 'Maxima'), el('dd', { id: 'maxima' }, Object.entries(study.maxima || {}).filter(([, v]) => v !== null).map(([k, v]) => `${k.toUpperCase()} ${v}`).join(', ') ||
      'unknown: no image of this exam carries an index (not displayed or not sent), so its exposure is unknown, not low'),
    study.measurements ? [el('dt', {}, 'Thermal dose (CEM43)'), el('dd', { id: 'thermal-dose' }, thermalDose(study.measurements))] : null));
  content.appendChild(el('h2', {}, 'Indices over the exam'));
  content.appendChild(timelineChart(study, limits));
  content.appendChild(legend(study, limits));
  content.appendChild(el('h2', {}, 'Findings'));
  const silent = Object.values(study.maxima || {}).every((v) => v === null);
  content.appendChild(findingsTable(study.findings, silent));
  content.appendChild(el('h2', {}, `Instances (${(study.instances || []).length})`));
  content.appendChild(instancesTable(study.instances || []));
  content.appendChild(el('h2', {}, 'Where each index comes from'));
  content.appendChild(provenanceTable(study.instances || []));
}

main();
