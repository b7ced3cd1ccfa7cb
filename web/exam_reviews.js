// exam_reviews.js - the exam page's review history and, for a signed-in
// reviewer, the form that records a review of one finding or of the
// whole exam (POST /api/v1/reviews, form-urlencoded, with the token from
// /api/v1/session). The history is append-only: a later review of the
// same finding is a new row, the earlier ones stay.
import { el, clear, getJSON, param } from './common.js';

const OUTCOMES = [
  ['acceptable', 'Acceptable'],
  ['discussed_with_operator', 'Discussed with operator'],
  ['referred_to_physics', 'Equipment referred to physics'],
  ['preset_to_change', 'Preset to be changed'],
  ['reopened', 'Reopened (still to review)'],
];
const OUTCOME_LABEL = Object.fromEntries(OUTCOMES);
const section = document.getElementById('reviews');
const study = param('study');

function historyTable(reviews) {
  if (reviews.length === 0) return el('p', { class: 'note', id: 'no-reviews' }, 'No review recorded for this exam yet.');
  return el('table', { id: 'review-history' },
    el('thead', {}, el('tr', {}, ['When (UTC)', 'Who', 'What', 'Outcome', 'Comment'].map((h) => el('th', { scope: 'col' }, h)))),
    el('tbody', {}, reviews.map((r) => el('tr', {},
      el('td', {}, r.reviewed_at.slice(0, 19).replace('T', ' ')),
      el('td', {}, `${r.reviewer} (${r.role})`),
      el('td', {}, r.finding_id ? `finding ${r.finding_id} (${r.rule_id}, ${r.severity})` : 'the whole exam'),
      el('td', { class: 'outcome' }, OUTCOME_LABEL[r.outcome] || r.outcome),
      el('td', { class: 'comment' }, r.comment)))));
}

function reviewForm(session, findings, onDone) {
  const target = el('select', { id: 'review-target', name: 'finding' },
    findings.map((f) => el('option', { value: f.id }, `Finding ${f.id}: ${f.rule_id} (${f.severity})`)),
    el('option', { value: '' }, 'The whole exam'));
  const outcome = el('select', { id: 'review-outcome', name: 'outcome' },
    OUTCOMES.map(([value, label]) => el('option', { value }, label)));
  const comment = el('textarea', { id: 'review-comment', name: 'comment', rows: 2, cols: 60, maxlength: 2000 });
  const message = el('p', { id: 'review-message', role: 'status' });
  const form = el('form', { id: 'review-form', class: 'controls' },
    el('label', {}, 'Reviewed', target),
    el('label', {}, 'Outcome', outcome),
    el('label', {}, 'Comment', comment),
    el('button', { type: 'submit', id: 'review-submit' }, 'Record review'),
    message);
  form.addEventListener('submit', async (event) => {
    event.preventDefault();
    const body = new URLSearchParams();
    body.set('study', study);
    if (target.value) body.set('finding', target.value);
    body.set('outcome', outcome.value);
    body.set('comment', comment.value);
    body.set('csrf_token', session.csrf_token);
    const response = await fetch('api/v1/reviews', {
      method: 'POST', body, credentials: 'same-origin',
      headers: { 'Content-Type': 'application/x-www-form-urlencoded', Accept: 'application/json' },
    });
    let answer = null;
    try { answer = await response.json(); } catch (e) { answer = null; }
    if (!response.ok) {
      message.textContent = 'Not recorded: ' + (answer && answer.error ? answer.error : response.status);
      return;
    }
    comment.value = '';
    message.textContent = 'Recorded.';
    onDone();
  });
  return form;
}

async function main() {
  if (!study) return;
  clear(section);
  section.appendChild(el('h2', { id: 'reviews-title' }, 'Reviews'));
  const history = el('div', { id: 'review-history-box' });
  section.appendChild(history);
  const exportLinks = el('p', { class: 'note' }, 'Export: ',
    el('a', { href: `api/v1/reviews?study=${encodeURIComponent(study)}&format=csv` }, 'CSV'), ' · ',
    el('a', { href: `api/v1/reviews?study=${encodeURIComponent(study)}` }, 'JSON'));
  section.appendChild(exportLinks);
  async function load() {
    try {
      const reviews = await getJSON(`api/v1/reviews?study=${encodeURIComponent(study)}`);
      clear(history).appendChild(historyTable(reviews));
    } catch (error) {
      clear(history).appendChild(el('p', { class: 'error', role: 'alert' }, 'Could not load the reviews: ' + error.message));
    }
  }
  await load();
  let session = null, detail = null;
  try {
    session = await getJSON('api/v1/session');
    detail = await getJSON(`api/v1/studies/${encodeURIComponent(study)}`);
  } catch (error) {
    section.appendChild(el('p', { class: 'error', role: 'alert' }, 'Could not load: ' + error.message));
    return;
  }
  if (!session.login_required) {
    section.appendChild(el('p', { class: 'note', id: 'review-login' },
      'Recording a review needs a login: the server has no password file ([http] password_file, docs/security.md).'));
  } else if (!session.can_review) {
    section.appendChild(el('p', { class: 'note', id: 'review-login' },
      `Signed in as ${session.user} (viewer): only a reviewer can record reviews.`));
  } else {
    section.appendChild(reviewForm(session, detail.findings || [], load));
  }
}

main();
