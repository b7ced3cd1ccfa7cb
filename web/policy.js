// policy.js - the active ALARA policy: version, rules, limits and sources.
import { el, clear, header, getJSON, showError, orNone } from './common.js';

header('policy.html');
const content = document.getElementById('content');

async function main() {
  clear(content);
  let policy;
  try {
    policy = await getJSON('/api/v1/policy');
  } catch (error) {
    showError(content, error);
    content.appendChild(el('p', { class: 'note' }, 'The limits mitilog ships are listed in docs/policy.md.'));
    return;
  }
  content.appendChild(el('dl', { class: 'facts' },
    el('dt', {}, 'Name'), el('dd', {}, orNone(policy.name)),
    el('dt', {}, 'Version'), el('dd', { id: 'policy-version' }, orNone(policy.version)),
    el('dt', {}, 'First loaded'), el('dd', {}, orNone(policy.first_loaded_at)),
    el('dt', {}, 'Loaded'), el('dd', {}, orNone(policy.loaded_at)),
    el('dt', {}, 'Exam closed after'), el('dd', {}, policy.closed_after_idle_minutes === undefined ? '—' : `${policy.closed_after_idle_minutes} min idle`),
    el('dt', {}, 'Timeline gap cap'), el('dd', {}, policy.gap_cap_seconds === undefined ? '—' : `${policy.gap_cap_seconds} s`)));
  if (policy.caution) content.appendChild(el('p', { class: 'thin' }, policy.caution));
  const rules = policy.rules || [];
  content.appendChild(el('h2', {}, `Rules (${rules.length})`));
  content.appendChild(el('table', { id: 'rules' },
    el('thead', {}, el('tr', {}, ['Rule', 'Severity', 'Enabled', 'Checks', 'Settings', 'Source'].map((t) => el('th', {}, t)))),
    el('tbody', {}, rules.map((rule) => el('tr', { class: rule.enabled === false ? null : 'flagged' },
      el('td', {}, rule.id), el('td', {}, orNone(rule.severity)), el('td', {}, rule.enabled === false ? 'no' : 'yes'),
      el('td', {}, orNone(rule.description)),
      el('td', {}, Object.entries(rule.settings || {}).map(([k, v]) => el('div', {}, `${k} = ${v}`))),
      el('td', {}, orNone(rule.source)))))));
}

main();
