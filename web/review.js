// review.js - the review worklist (review.html, the landing page): the
// week's patterns (outlier groups by preset, room and shift from
// /api/v1/outliers; a rule's findings concentrated in one group from
// /api/v1/worklist), then the findings to review ranked by severity then
// size, each with where and when it happened and whether it is still
// open; informational advisories counted and listed apart at the end.
import { el, clear, header, getJSON, showError, param, fmt, percent, orNone } from './common.js';

header('review.html');
const content = document.getElementById('content');
const SEVERITY_RANK = { violation: 3, warning: 2, advisory: 1 };
const OUTCOMES = {
  acceptable: 'Acceptable',
  discussed_with_operator: 'Discussed with operator',
  referred_to_physics: 'Equipment referred to physics',
  preset_to_change: 'Preset to be changed',
  reopened: 'Reopened',
};
const DIMENSIONS = { preset: 'preset', room: 'room', shift: 'shift' };

function weekPicker(worklist) {
  const select = el('select', { id: 'week', name: 'week' });
  for (const monday of worklist.weeks_with_data.slice().reverse()) {
    const label = isoWeekOf(monday);
    select.appendChild(el('option', { value: label, selected: label === worklist.week ? 'selected' : null }, `${label} (from ${monday})`));
  }
  const form = el('form', { class: 'controls', method: 'get', action: 'review.html' },
    el('label', {}, 'Week (only weeks that hold exams)', select),
    el('button', { type: 'submit' }, 'Show'),
    el('a', { href: `api/v1/reviews?format=csv` }, 'Review history (CSV)'),
    el('a', { href: `api/v1/reviews` }, '(JSON)'));
  return form;
}

/* "YYYY-Www" of a Monday "YYYY-MM-DD" (ISO 8601: the week of its Thursday). */
function isoWeekOf(monday) {
  const d = new Date(monday + 'T00:00:00Z');
  d.setUTCDate(d.getUTCDate() + 3);
  const yearStart = new Date(Date.UTC(d.getUTCFullYear(), 0, 1));
  const week = Math.floor((d - yearStart) / 86400000 / 7) + 1;
  return d.getUTCFullYear() + '-W' + String(week).padStart(2, '0');
}

/* Outlier groups that stand out: at least 3 outliers and an outlier share
 * at least twice the week's. Severity "warning": a pattern to look at,
 * not a limit exceeded. */
function outlierPatterns(outliers, dimension) {
  if (!outliers || !outliers.groups || !outliers.exam_count) return [];
  const rate = outliers.outlier_count / outliers.exam_count;
  return outliers.groups
    .filter((g) => g.outlier_count >= 3 && g.key !== null && rate > 0 && g.outlier_rate >= 2 * rate)
    .map((g) => ({
      severity: 'warning',
      size: g.outlier_rate / rate,
      what: `Outliers — ${dimension}: ${g.key}`,
      text: `${g.outlier_count} of ${g.exam_count} exams above the baseline (${percent(g.outlier_rate)}; whole week ${percent(rate)}); governing-index median ${fmt(g.median_governing, 1)}, department ${fmt(g.department_median, 1)}`,
      link: `index.html?week=${encodeURIComponent(outliers.week)}&group=${dimension}`,
      kind: 'outliers',
    }));
}

function findingPatterns(worklist) {
  return worklist.patterns.map((p) => ({
    severity: p.severity,
    size: (p.finding_count / p.rule_total) / Math.max(p.group_exams / Math.max(p.week_exams, 1), 1e-9),
    what: `${p.rule_label} — ${DIMENSIONS[p.dimension]}: ${p.key}`,
    text: `${p.finding_count} of the week's ${p.rule_total} such findings, in ${p.group_exams} of its ${p.week_exams} exams`,
    link: null,
    kind: 'findings',
  }));
}

function patternsTable(patterns) {
  if (patterns.length === 0) return el('p', { class: 'note', id: 'no-patterns' }, 'No pattern stands out this week.');
  return el('table', { id: 'patterns' },
    el('thead', {}, el('tr', {}, ['Severity', 'Pattern', 'What the week shows'].map((h) => el('th', { scope: 'col' }, h)))),
    el('tbody', {}, patterns.map((p) => el('tr', { class: 'severity-' + p.severity },
      el('td', {}, el('span', { class: 'tag' }, p.severity)),
      el('td', { class: 'key' }, p.link ? el('a', { href: p.link }, p.what) : p.what),
      el('td', {}, p.text)))));
}

function when(finding) {
  if (finding.first_acquired_at) return finding.first_acquired_at.slice(0, 16).replace('T', ' ');
  return finding.day || '—';
}

function state(finding) {
  if (finding.open) return el('span', { class: 'open' }, finding.review ? 'open (reopened)' : 'open');
  const r = finding.review;
  return el('span', { class: 'done', title: r.comment || '' }, `${OUTCOMES[r.outcome] || r.outcome} — ${r.reviewer}, ${r.reviewed_at.slice(0, 10)}`);
}

function findingsTable(findings, id) {
  return el('table', { id },
    el('thead', {}, el('tr', {}, ['Severity', 'Why listed', 'Room', 'Preset', 'Shift', 'Operator', 'Accession', 'Study date and time', 'State', '']
      .map((h) => el('th', { scope: 'col' }, h)))),
    el('tbody', {}, findings.map((f) => el('tr', { class: 'severity-' + f.severity, 'data-finding': f.id },
      el('td', {}, el('span', { class: 'tag' }, f.severity)),
      el('td', { class: 'reason' }, el('strong', {}, f.rule_label + ': '), f.reason),
      el('td', {}, orNone(f.room)),
      el('td', {}, orNone(f.preset)),
      el('td', {}, orNone(f.shift)),
      el('td', {}, f.operator_name ? f.operator_name : 'not recorded'),
      el('td', {}, f.accession_number ? f.accession_number : 'not recorded'),
      el('td', {}, when(f)),
      el('td', { class: 'state' }, state(f)),
      el('td', {}, f.study_instance_uid
        ? el('a', { href: `exam.html?study=${encodeURIComponent(f.study_instance_uid)}#reviews` }, 'Open exam')
        : '')))));
}

async function main() {
  const week = param('week');
  let worklist;
  try {
    worklist = await getJSON('api/v1/worklist' + (week ? `?week=${encodeURIComponent(week)}` : ''));
  } catch (error) {
    clear(content);
    showError(content, error);
    return;
  }
  const outliers = {};
  for (const dimension of Object.keys(DIMENSIONS)) {
    try {
      outliers[dimension] = await getJSON(`api/v1/outliers?week=${encodeURIComponent(worklist.week)}&group=${dimension}`);
    } catch (error) {
      outliers[dimension] = null;
    }
  }
  clear(content);
  document.getElementById('title').textContent = `Review worklist — ${worklist.week} (${worklist.from} to ${worklist.to})`;
  content.appendChild(weekPicker(worklist));
  const c = worklist.counts;
  content.appendChild(el('p', { id: 'summary' },
    `${worklist.exam_count} exams; ${c.violation} violation(s), ${c.warning} warning(s), ${c.advisory} advisory finding(s); `,
    el('strong', {}, `${c.open} still open`),
    `; ${c.informational} informational advisory(ies) listed apart below.`,
    worklist.default_week ? ` The last complete week with data (data from ${worklist.data_first_day} to ${worklist.data_last_day}).` : ''));
  const patterns = [
    ...findingPatterns(worklist),
    ...Object.keys(DIMENSIONS).flatMap((d) => outlierPatterns(outliers[d], d)),
  ].sort((a, b) => (SEVERITY_RANK[b.severity] - SEVERITY_RANK[a.severity]) || (b.size - a.size));
  content.appendChild(el('h2', {}, 'Patterns'));
  content.appendChild(patternsTable(patterns));
  content.appendChild(el('h2', {}, 'Findings to review (most severe first, then largest)'));
  if (worklist.findings.length === 0) content.appendChild(el('p', { class: 'note' }, 'No finding this week.'));
  else content.appendChild(findingsTable(worklist.findings, 'worklist'));
  const informational = el('details', { id: 'informational' },
    el('summary', {}, `Informational advisories: ${c.informational} (`,
      worklist.informational_by_rule.map((r) => `${r.rule_label} ${r.count}`).join(', ') || 'none',
      ') — used within the limit, listed for completeness'));
  if (worklist.informational.length > 0) informational.appendChild(findingsTable(worklist.informational, 'informational-list'));
  content.appendChild(informational);
  await operatorSection(worklist);
}

/* Per-operator figures for the lead's coaching, only when the site
 * records operators ([extraction] record_operator, docs/configuration.md). */
async function operatorSection(worklist) {
  const box = el('section', { id: 'operators-box' }, el('h2', {}, 'Operators'));
  content.appendChild(box);
  let operators;
  try {
    operators = await getJSON(`api/v1/operators?from=${worklist.from}&to=${worklist.to}`);
  } catch (error) {
    showError(box, error);
    return;
  }
  if (!operators.recorded) {
    box.appendChild(el('p', { class: 'note', id: 'operators-off' },
      'Operators are not recorded at this site ([extraction] record_operator = no; see docs/configuration.md on privacy).'));
    return;
  }
  box.appendChild(el('p', { class: 'note' },
    `${operators.exams_with_operator} of ${operators.exam_count} exams name an operator. For coaching, not ranking: a higher median can come from harder exams.`));
  box.appendChild(el('table', { id: 'operators' },
    el('thead', {}, el('tr', {}, ['Operator', 'Exams', 'With an index value', 'Median governing index (max per exam)', 'Exams with findings', 'Findings']
      .map((h) => el('th', { scope: 'col' }, h)))),
    el('tbody', {}, operators.operators.map((o) => el('tr', {},
      el('td', { class: 'key' }, o.operator),
      el('td', { class: 'n' }, o.exam_count),
      el('td', { class: 'n' }, o.valued_count),
      el('td', { class: 'n' }, o.median_governing === null ? 'unknown (no value)' : fmt(o.median_governing, 2)),
      el('td', { class: 'n' }, o.exams_with_findings),
      el('td', { class: 'n' }, o.finding_count))))));
}

main();
