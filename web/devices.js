// devices.js - the device screen profiles: for each device that draws the
// indices into its images, its profile versions (proposed, active,
// retired), who confirmed them, what learning found, and the frame it was
// learned from with the regions the reader looks at drawn over it (label
// boxes solid, value areas dashed). Set-up happens with the command line:
// mitilog device learn / activate (docs/screen-reading.md). Per version,
// how many of its recent frames were refused and why.
import { el, clear, header, getJSON, showError, orNone } from './common.js';

header('devices.html');
const content = document.getElementById('content');

// The regions named in a profile's text (src/screen/screen_profile.c):
// "band ABOVE BELOW", "slot NAME LABEL_X BASELINE DECIMALS GAP STOP SPAN
// LABEL", "label NAME WIDTH HEIGHT HEX".
function regions(text) {
  let above = 0, below = 0;
  const slots = new Map();
  for (const line of text.split('\n')) {
    const words = line.split(' ');
    if (words[0] === 'band') { above = Number(words[1]); below = Number(words[2]); }
    if (words[0] === 'slot' && words[2] !== 'not_shown') {
      slots.set(words[1], { name: words[1], x: Number(words[2]), baseline: Number(words[3]),
        decimals: Number(words[4]), span: Number(words[7]), width: 0 });
    }
    if (words[0] === 'label' && slots.has(words[1])) slots.get(words[1]).width = Number(words[2]);
  }
  return [...slots.values()].map((s) => ({ ...s, top: s.baseline - above, height: above + below + 1 }));
}

// Binary PGM (P5, 8-bit) to an ImageData.
function pgmImage(bytes) {
  let at = 2;
  const numbers = [];
  while (numbers.length < 3 && at < bytes.length) {
    while (at < bytes.length && /\s/.test(String.fromCharCode(bytes[at]))) at++;
    let start = at;
    while (at < bytes.length && bytes[at] >= 48 && bytes[at] <= 57) at++;
    numbers.push(Number(new TextDecoder().decode(bytes.slice(start, at))));
  }
  at++;
  const [width, height] = numbers;
  if (bytes[0] !== 80 || bytes[1] !== 53 || !(width > 0 && height > 0)) return null;
  const image = new ImageData(width, height);
  for (let i = 0; i < width * height; i++) {
    const v = bytes[at + i];
    image.data[4 * i] = v; image.data[4 * i + 1] = v; image.data[4 * i + 2] = v; image.data[4 * i + 3] = 255;
  }
  return image;
}

async function exampleCanvas(profile) {
  const response = await fetch(`/api/v1/devices/example?key=${encodeURIComponent(profile.key)}&version=${profile.version}`);
  if (!response.ok) return el('p', { class: 'note' }, 'No example frame kept.');
  const image = pgmImage(new Uint8Array(await response.arrayBuffer()));
  if (image === null) return el('p', { class: 'note' }, 'The example frame could not be shown.');
  const canvas = el('canvas', { width: image.width, height: image.height, class: 'device-example',
    role: 'img', 'aria-label': `Frame ${profile.key} was learned from, with the regions read` });
  const context = canvas.getContext('2d');
  context.putImageData(image, 0, 0);
  context.lineWidth = 1;
  context.font = '11px sans-serif';
  // Indices shown at one place (TIS or TIB by exam) share one box.
  const places = new Map();
  for (const r of regions(profile.profile_text)) {
    const key = `${r.x},${r.top}`;
    if (places.has(key)) places.get(key).name += '/' + r.name;
    else places.set(key, { ...r });
  }
  for (const r of places.values()) {
    context.strokeStyle = '#e0a020';
    context.setLineDash([]);
    context.strokeRect(r.x - 0.5, r.top - 0.5, r.width + 1, r.height + 1);
    context.strokeStyle = '#3fb0d0';
    context.setLineDash([3, 2]);
    context.strokeRect(r.x + r.width + 0.5, r.top - 0.5, r.span, r.height + 1);
    context.fillStyle = '#e0a020';
    context.fillText(r.name.toUpperCase(), r.x, Math.max(10, r.top - 3));
  }
  return canvas;
}

// What the profile's frames of the last 7 days came to (GET /api/v1/devices
// recent_*): a profile that stops matching (a software update, a layout
// that moved) shows here as frames refused with the main reason.
function refusedCell(p) {
  if (!p.recent_frames) return el('td', { class: 'refused-none' }, 'no frames in the last 7 days');
  if (!p.recent_refused) return el('td', { class: 'refused-none' }, `0 of ${p.recent_frames} refused`);
  const reason = p.refused_reason || 'not read';
  const short = reason.split(/[:;]/)[0];
  const since = p.refused_since ? ` since ${p.refused_since.slice(0, 10)}` : '';
  return el('td', { class: 'refused', title: reason },
    el('strong', {}, `${short}: ${p.recent_refused} of ${p.recent_frames} frames${since}`),
    el('br', {}), el('span', { class: 'note' }, `main reason (${p.refused_reason_frames} frames): ${reason}`));
}

async function main() {
  clear(content);
  let profiles;
  try {
    profiles = await getJSON('/api/v1/devices');
  } catch (error) {
    showError(content, error);
    return;
  }
  if (profiles.length === 0) {
    content.appendChild(el('p', { class: 'note' },
      'No device profile yet. Set one up with: mitilog device learn --key KEY --value FRAME:MI=1.2,TIS=0.4 FRAME... (docs/screen-reading.md).'));
    return;
  }
  const table = el('table', {},
    el('thead', {}, el('tr', {}, ...['Key', 'Version', 'State', 'Device', 'Frame size', 'Learned', 'Confirmed by', 'Frames refused (last 7 days)'].map((h) => el('th', {}, h)))));
  const body = el('tbody', {});
  for (const p of profiles) {
    const device = [p.manufacturer, p.model_name, p.software_versions].filter((v) => v).join(' · ');
    body.appendChild(el('tr', {},
      el('td', {}, p.key), el('td', { class: 'n' }, String(p.version)), el('td', {}, p.state),
      el('td', {}, orNone(device || null)), el('td', {}, `${p.columns}×${p.rows}`),
      el('td', {}, p.learned_at),
      el('td', {}, p.confirmed_by ? `${p.confirmed_by}, ${p.confirmed_at}` : '—'),
      refusedCell(p)));
  }
  table.appendChild(body);
  content.appendChild(table);
  for (const p of profiles) {
    if (p.state === 'retired') continue;
    const section = el('section', {}, el('h2', {}, `${p.key} version ${p.version} (${p.state})`),
      el('p', { class: 'note' }, 'Solid boxes: labels the reader must find; dashed: where it reads the value.'),
      el('pre', {}, p.report || ''));
    if (p.has_example) section.appendChild(await exampleCanvas(p));
    content.appendChild(section);
  }
}

main();
