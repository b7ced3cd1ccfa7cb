// week.js - the weekly outlier list (index.html): ISO week picker, group
// by room / preset / shift / transducer / exam type, each group's counts
// and medians, a bar picture, then each group's listed exams.
import { el, svg, clear, header, getJSON, showError, param, fmt, percent, orNone, hatchDefs, scale, niceMax, siteField } from './common.js';

header('index.html');
const content = document.getElementById('content');
const GROUPS = [['preset', 'Preset'], ['room', 'Room'], ['shift', 'Shift'], ['transducer', 'Transducer'], ['exam_type', 'Exam type'], ['site', 'Site (compare sites)']];

function controls(week, group) {
  const weekInput = el('input', { type: 'week', id: 'week', name: 'week', value: week || '', required: true });
  const select = el('select', { id: 'group', name: 'group' });
  for (const [value, label] of GROUPS) {
    select.appendChild(el('option', { value, selected: value === group ? 'selected' : null }, label));
  }
  const form = el('form', { class: 'controls', method: 'get', action: 'index.html' },
    el('label', {}, 'ISO week', weekInput),
    el('label', {}, 'Group by', select),
    siteField(),
    el('button', { type: 'submit' }, 'Show'),
    el('button', { type: 'button', id: 'print' }, 'Print'));
  form.querySelector('#print').addEventListener('click', () => window.print());
  return form;
}

function groupChart(groups) {
  const shown = groups.slice(0, 15);
  const rowHeight = 26, left = 190, right = 230, width = 860, top = 28;
  const height = top + shown.length * rowHeight + 10;
  const maxExams = niceMax(Math.max(1, ...shown.map((g) => g.exam_count)));
  const x = scale(0, maxExams, left, width - right);
  const chart = svg('svg', { class: 'chart', id: 'group-chart', viewBox: `0 0 ${width} ${height}`, width, height,
    role: 'img', 'aria-label': 'Exams and outliers per group' }, hatchDefs('hatch-week'));
  chart.appendChild(svg('text', { x: left, y: 16 }, 'Exams per group (outline); outliers (hatched) — ranked by most severe finding, then outliers'));
  shown.forEach((group, index) => {
    const y = top + index * rowHeight;
    chart.appendChild(svg('text', { x: left - 8, y: y + 15, 'text-anchor': 'end' }, `${index + 1}. ${orNone(group.key)}`.slice(0, 28)));
    chart.appendChild(svg('rect', { x: left, y: y + 3, width: Math.max(1, x(group.exam_count) - left), height: rowHeight - 9,
      fill: '#ffffff', stroke: '#2f6470', 'stroke-width': 1.2 }));
    if (group.outlier_count > 0) {
      chart.appendChild(svg('rect', { x: left, y: y + 3, width: Math.max(2, x(group.outlier_count) - left), height: rowHeight - 9,
        fill: 'url(#hatch-week)', stroke: '#7a4b12', 'stroke-width': 1 }));
    }
    chart.appendChild(svg('text', { x: x(group.exam_count) + 6, y: y + 15 },
      `${group.worst_severity ? group.worst_severity + '; ' : ''}${group.outlier_count} of ${group.exam_count} outliers (${percent(group.outlier_rate)}); median ${fmt(group.median_governing, 2)}`));
  });
  return chart;
}

function groupTable(document_, groups) {
  const body = el('tbody', {});
  for (const group of groups) {
    const rules = (group.findings_by_rule || []).map((r) => `${r.rule_id}: ${r.count}`).join(', ') || '—';
    body.appendChild(el('tr', { class: group.outlier_count > 0 || group.worst_severity ? 'flagged' : null, 'data-key': group.key === null ? '' : group.key },
      el('td', { class: 'n' }, group.rank),
      el('td', { class: 'key' }, orNone(group.key)),
      el('td', { class: 'severity' }, group.worst_severity || '—'),
      el('td', { class: 'n' }, group.exam_count),
      el('td', { class: 'n' }, group.outlier_count),
      el('td', { class: 'n' }, percent(group.outlier_rate)),
      el('td', { class: 'n' }, fmt(group.median_governing)),
      el('td', { class: 'n' }, fmt(group.department_median)),
      el('td', { class: 'n' }, fmt(group.median_mi)),
      el('td', {}, rules),
      el('td', { class: 'n' }, percent(group.data_completeness))));
  }
  const label = GROUPS.find(([value]) => value === document_.group_by);
  return el('table', { id: 'groups' },
    el('thead', {}, el('tr', {},
      el('th', { class: 'n' }, 'Rank'), el('th', {}, label ? label[1] : document_.group_by), el('th', {}, 'Most severe finding'),
      el('th', { class: 'n' }, 'Exams'), el('th', { class: 'n' }, 'Outliers'), el('th', { class: 'n' }, 'Rate'),
      el('th', { class: 'n' }, 'Median governing TI'), el('th', { class: 'n' }, 'Department median, same exam types'),
      el('th', { class: 'n' }, 'Median MI'), el('th', {}, 'Findings by rule'),
      el('th', { class: 'n' }, 'Captures with indices'))),
    body);
}

function why(exam) {
  const tags = [];
  if (exam.above_robust_z) tags.push(el('span', { class: 'tag' }, 'robust z > limit'));
  if (exam.above_p95) tags.push(el('span', { class: 'tag' }, '> baseline P95'));
  if (exam.finding_count > 0) tags.push(el('span', { class: 'tag' }, `${exam.finding_count} findings`));
  if (exam.baseline_thin) tags.push(el('span', { class: 'note' }, ' (thin baseline)'));
  return tags;
}

function examTable(exams) {
  const body = el('tbody', {});
  for (const exam of exams) {
    body.appendChild(el('tr', { class: exam.outlier ? 'flagged' : null },
      el('td', {}, el('a', { href: 'exam.html?study=' + encodeURIComponent(exam.study_instance_uid) }, exam.study_key)),
      el('td', {}, exam.day),
      el('td', {}, orNone(exam.exam_type_label || exam.exam_type)),
      el('td', {}, orNone(exam.study_description)),
      el('td', {}, orNone(exam.room)), el('td', {}, orNone(exam.preset)),
      el('td', {}, orNone(exam.shift)), el('td', {}, orNone(exam.transducer)),
      el('td', {}, exam.governing_index ? exam.governing_index.toUpperCase() : '—'),
      el('td', { class: 'n' }, fmt(exam.max_governing, 1)),
      el('td', { class: 'n' }, fmt(exam.max_mi, 1)),
      el('td', { class: 'n' }, fmt(exam.robust_z, 1)),
      el('td', {}, why(exam))));
  }
  return el('table', { class: 'exams' },
    el('thead', {}, el('tr', {},
      ['Study key', 'Day', 'Exam type', 'Study description', 'Room', 'Preset', 'Shift', 'Transducer', 'Index', 'Max', 'Max MI', 'Robust z', 'Why listed']
        .map((title) => el('th', {}, title)))),
    body);
}

async function main() {
  const group = param('group') || 'preset';
  const week = param('week');
  const url = '/api/v1/outliers?group=' + encodeURIComponent(group) + (week ? '&week=' + encodeURIComponent(week) : '');
  clear(content);
  let data;
  try {
    data = await getJSON(url);
  } catch (error) {
    content.appendChild(controls(week, group));
    showError(content, error);
    return;
  }
  document.getElementById('title').textContent = `Weekly outlier list, ${data.week}`;
  content.appendChild(controls(data.week, data.group_by));
  content.appendChild(el('dl', { class: 'facts' },
    el('dt', {}, 'Period'), el('dd', {}, `${data.from} to ${data.to} (ISO week ${data.week}, local dates)`),
    el('dt', {}, 'Sites'), el('dd', { id: 'sites' }, data.sites ? data.sites.join(', ') : 'all'),
    el('dt', {}, 'Exams'), el('dd', {}, `${data.exam_count}, of which ${data.outlier_count} outliers`),
    el('dt', {}, 'Baseline'), el('dd', { id: 'baseline-span' }, data.baseline_data_from
      ? `each exam type's exams of the weeks before: data held from ${data.baseline_data_from} to ${data.baseline_data_to} (${data.baseline_weeks_with_data} week(s) with data; ${data.baseline_exam_count} exams; up to ${data.baseline_weeks} weeks are looked at)`
      : `no exam before this week: each exam type is compared with the week's own exams`),
    el('dt', {}, 'Outlier rule'), el('dd', {}, `a rise: highest governing TI with robust z above ${data.z_limit} or above the baseline's 95th percentile (a low value is shown, never flagged)`),
    el('dt', {}, 'Policy version'), el('dd', { id: 'policy-version' }, data.policy_version || 'none recorded (exams not yet evaluated by the policy engine)'),
    el('dt', {}, 'Data completeness'), el('dd', {}, `${percent(data.data_completeness)} of captures carry indices (${data.captures_with_indices} of ${data.captures})`)));
  const thin = (data.baselines || []).filter((b) => b.thin);
  if (thin.length > 0) {
    content.appendChild(el('p', { class: 'thin', id: 'baseline-thin' },
      `Baseline thin (fewer than ${data.minimum_baseline} exams in the trailing weeks; the week's own exams were added) for: ` +
      thin.map((b) => `${orNone(b.exam_type)} (${b.trailing_count})`).join(', ') + '.'));
  }
  if (!data.groups || data.groups.length === 0) {
    content.appendChild(el('p', {}, 'No exams in this week.'));
    return;
  }
  content.appendChild(el('h2', {}, 'Groups'));
  content.appendChild(groupChart(data.groups));
  content.appendChild(groupTable(data, data.groups));
  content.appendChild(el('h2', {}, 'Listed exams by group'));
  content.appendChild(el('p', { class: 'note' }, 'Outliers and exams with findings, highest robust z first. Study key: first 8 hex digits of SHA-256 of the Study Instance UID; no patient names are shown.'));
  for (const g of data.groups) {
    if (!g.exams || g.exams.length === 0) continue;
    content.appendChild(el('section', { class: 'group' },
      el('h3', {}, `${g.rank}. ${orNone(g.key)}: ${g.exams.length} listed of ${g.exam_count}`),
      examTable(g.exams)));
  }
}

main();
