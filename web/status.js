// status.js - ingest status: objects per hour, rejected and quarantined
// objects, re-sent objects that replaced their rows, devices that went
// silent, transducers not reporting output.
import { el, svg, clear, header, getJSON, showError, orNone, scale, niceMax, hatchDefs } from './common.js';

header('status.html');
const content = document.getElementById('content');

function hourChart(hours) {
  const width = 900, height = 220, left = 50, right = 20, top = 20, bottom = 40;
  const chart = svg('svg', { class: 'chart', id: 'hours-chart', viewBox: `0 0 ${width} ${height}`, width, height, role: 'img', 'aria-label': 'Objects received per hour' }, hatchDefs('hatch-status'));
  if (hours.length === 0) {
    chart.appendChild(svg('text', { x: 20, y: 40 }, 'Nothing received in this window.'));
    return chart;
  }
  const max = niceMax(Math.max(...hours.map((h) => h.objects)));
  const barWidth = (width - left - right) / hours.length;
  const y = scale(0, max, height - bottom, top);
  for (let i = 0; i <= 4; i++) {
    const v = (max * i) / 4;
    chart.appendChild(svg('line', { class: 'grid', x1: left, x2: width - right, y1: y(v), y2: y(v) }));
    chart.appendChild(svg('text', { x: left - 5, y: y(v) + 4, 'text-anchor': 'end' }, String(Math.round(v))));
  }
  hours.forEach((h, i) => {
    const x = left + i * barWidth;
    chart.appendChild(svg('rect', { x: x + 1, y: y(h.objects), width: Math.max(1, barWidth - 2), height: height - bottom - y(h.objects), fill: '#dde9ea', stroke: '#2f6470' },
      svg('title', {}, `${h.hour}: ${h.objects} objects, ${h.without_indices} without indices`)));
    if (h.without_indices > 0) {
      chart.appendChild(svg('rect', { x: x + 1, y: y(h.without_indices), width: Math.max(1, barWidth - 2), height: height - bottom - y(h.without_indices), fill: 'url(#hatch-status)', stroke: '#7a4b12' }));
    }
    if (i % Math.ceil(hours.length / 8) === 0) chart.appendChild(svg('text', { x: x + barWidth / 2, y: height - bottom + 15, 'text-anchor': 'middle' }, h.hour.slice(5, 13).replace('T', ' ') + 'h'));
  });
  chart.appendChild(svg('text', { x: left, y: height - 6 }, 'objects per hour (UTC) · hatched: images without any index'));
  return chart;
}

// The newest run of `mitilog backfill` (another process: it records its
// progress in the database, docs/backfill.md), as one line.
function backfillLine(b) {
  if (!b) return 'No backfill from the PACS has run (mitilog backfill, docs/backfill.md).';
  const states = { running: 'running', waiting: 'waiting for its time window', finished: 'finished', failed: 'stopped on an error', interrupted: 'interrupted (the same command resumes it)' };
  const run = b.run;
  const parts = [`${b.source}: ${states[b.state] || b.state}`,
    `${run.studies_done}/${run.studies_found} studies done`, `${run.studies_failed} failed`, `${run.objects} objects`];
  if (b.objects_per_minute !== null) parts.push(`${b.objects_per_minute.toFixed(1)} objects/min`);
  if (b.state === 'running' && b.seconds_left !== null) parts.push(`about ${b.seconds_left < 120 ? b.seconds_left + ' s' : Math.round(b.seconds_left / 60) + ' min'} left`);
  parts.push(`last progress ${b.updated_at}`);
  return parts.join(', ') + (b.message && b.message !== b.state ? ` (${b.message})` : '');
}

function table(id, head, rows) {
  return el('table', { id }, el('thead', {}, el('tr', {}, head.map((h) => el('th', {}, h)))), el('tbody', {}, rows));
}

async function main() {
  clear(content);
  let data;
  try {
    data = await getJSON('/api/v1/ingest');
  } catch (error) {
    showError(content, error);
    return;
  }
  const t = data.totals;
  content.appendChild(el('dl', { class: 'facts' },
    el('dt', {}, 'Instances'), el('dd', {}, String(t.instances)),
    el('dt', {}, 'Studies'), el('dd', {}, String(t.studies)),
    el('dt', {}, 'Rejected objects'), el('dd', {}, String(t.rejections)),
    el('dt', {}, 'Quarantined'), el('dd', {}, String(t.quarantined)),
    el('dt', {}, 'Re-sent (replaced)'), el('dd', { id: 'replaced' },
      t.replacements === 0 ? 'none: every object arrived once'
        : `${t.replacements} object(s) received again for ${t.replaced_instances} instance(s); each replaced its row, counted once`),
    el('dt', {}, 'Last received'), el('dd', {}, orNone(t.last_received_at)),
    el('dt', {}, 'Backfill from the PACS'), el('dd', { id: 'backfill' }, backfillLine(data.backfill)),
    el('dt', {}, 'Generated'), el('dd', {}, data.generated_at)));
  content.appendChild(el('h2', {}, `Objects per hour, last ${data.window_hours} hours`));
  content.appendChild(hourChart(data.objects_per_hour));
  content.appendChild(el('h2', {}, 'Devices'));
  content.appendChild(table('devices', ['Calling AE', 'Station', 'Room', 'Objects', `In the last ${data.window_hours} h`, 'Last received', 'State'],
    data.devices.map((d) => el('tr', { class: d.silent ? 'flagged' : null },
      el('td', {}, orNone(d.calling_ae_title)), el('td', {}, orNone(d.station_name)), el('td', {}, orNone(d.room)),
      el('td', { class: 'n' }, d.objects), el('td', { class: 'n' }, d.objects_in_window), el('td', {}, d.last_received_at),
      el('td', {}, d.silent ? el('span', { class: 'tag' }, `silent > ${data.silent_after_hours} h`) : 'sending')))));
  content.appendChild(el('h2', {}, `Transducers not reporting output (last ${data.not_reporting_days} days of data)`));
  if (data.not_reporting.length === 0) content.appendChild(el('p', {}, 'Every image carried at least one index.'));
  else content.appendChild(table('not-reporting', ['Room', 'Transducer', 'Images', 'Without any index', 'First without'],
    data.not_reporting.map((r) => el('tr', { class: 'flagged' }, el('td', {}, orNone(r.room)), el('td', {}, orNone(r.transducer)),
      el('td', { class: 'n' }, r.instances), el('td', { class: 'n' }, r.without_indices), el('td', {}, orNone(r.first_without_at))))));
  content.appendChild(el('h2', {}, 'Rejections by reason'));
  content.appendChild(data.rejections_by_reason.length === 0 ? el('p', {}, 'None.') :
    table('rejections-by-reason', ['Reason', 'Objects'], data.rejections_by_reason.map((r) => el('tr', {}, el('td', {}, r.reason), el('td', { class: 'n' }, r.count)))));
  content.appendChild(el('h2', {}, 'Recent rejections'));
  content.appendChild(data.rejections_recent.length === 0 ? el('p', {}, 'None.') :
    table('rejections', ['Received', 'Calling AE', 'SOP class', 'Reason', 'Quarantined'], data.rejections_recent.map((r) => el('tr', {},
      el('td', {}, r.received_at), el('td', {}, orNone(r.calling_ae_title)), el('td', {}, orNone(r.sop_class_uid)), el('td', {}, r.reason),
      el('td', {}, r.quarantined ? 'yes' : 'no')))));
}

main();
