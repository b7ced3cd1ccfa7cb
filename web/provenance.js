// provenance.js - the exam page's table of where each capture's indices
// come from (GET /api/v1/studies/{uid}: `indices` and `screen_reading` of
// each instance; docs/reading.md "Values with provenance"): per capture
// and index, the value used and its source (header, screen, or both), or
// "not read" with the reason where the screen could not be read. A value
// nobody reported is "—", never 0.
import { el, orNone } from './common.js';

const INDICES = [['mi', 'MI'], ['tis', 'TIS'], ['tib', 'TIB'], ['tic', 'TIC']];

function valueText(index) {
  if (index.used === 'screen' && index.screen && index.screen.text) return index.screen.text;
  return String(index.value);
}

// One cell: value and source, or why the screen gave none. The reason a
// whole object was not read is said once, in the row's last column.
function provenanceCell(index, reading) {
  const screen = index ? index.screen : null;
  const unread = !screen || !screen.status;
  let notRead = null;
  if (screen && screen.status === 'not_read') notRead = screen.reason ? `screen not read: ${screen.reason}` : 'screen not read';
  else if (unread && reading && reading.state === 'not_read') notRead = 'screen not read';
  const lines = [];
  let kind = 'none';
  if (index && index.value !== null && index.value !== undefined) {
    const source = index.source === 'pixels' ? 'screen' : index.source;
    kind = source;
    let text = `${valueText(index)} · ${source}`;
    if (index.source === 'both' && index.agree === false) {
      text += ` (header ${index.header.value} ≠ screen ${screen.text})`;
      kind = 'disagree';
    }
    lines.push(el('span', {}, text));
  } else if (!notRead) {
    lines.push(el('span', {}, screen && screen.status === 'not_shown' ? '— (not on this screen)' : '— (not reported)'));
  }
  if (notRead) {
    if (kind === 'none') kind = 'not-read';
    lines.push(el('span', { class: 'not-read-reason' }, notRead));
  }
  const cell = el('td', { class: `provenance source-${kind}` });
  lines.forEach((line, i) => { if (i) cell.appendChild(el('br', {})); cell.appendChild(line); });
  return cell;
}

// The row's screen reading: with which profile, or why not at all.
function readingCell(reading) {
  if (!reading) return el('td', { class: 'reading' }, '— (no screen profile for this device)');
  const profile = reading.profile_key ? `${reading.profile_key} v${reading.profile_version}` : 'no profile';
  if (reading.state === 'queued') return el('td', { class: 'reading' }, 'waiting to be read');
  if (reading.state === 'not_read') return el('td', { class: 'reading not-read' }, `not read: ${reading.reason || 'no reason recorded'}`);
  return el('td', { class: 'reading' }, `read with ${profile}`);
}

export function provenanceTable(instances) {
  const captures = instances.filter((i) => i.object_kind === 'image' || i.object_kind === 'multiframe');
  if (captures.length === 0) return el('p', { class: 'note', id: 'provenance' }, 'No image captures in this exam.');
  return el('table', { id: 'provenance' },
    el('thead', {}, el('tr', {}, ['#', 'Acquired', 'Kind', ...INDICES.map(([, label]) => label), 'Screen reading'].map((t) => el('th', {}, t)))),
    el('tbody', {}, captures.map((i, n) => {
      const reading = i.screen_reading;
      const indices = i.indices || {};
      return el('tr', {},
        el('td', { class: 'n' }, n + 1), el('td', {}, orNone(i.acquired_at)), el('td', {}, i.object_kind),
        ...INDICES.map(([key]) => provenanceCell(indices[key], reading)),
        readingCell(reading));
    })));
}
