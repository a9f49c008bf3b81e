'use strict';
// The workbench page. It holds no circuit arithmetic: each edit rewrites the stage file's
// text and posts it to the server, which answers with what the commands' --json give; the
// page draws those figures. It reads the run's token from its own address.

const token = new URLSearchParams(location.search).get('token') || '';
const $ = (id) => document.getElementById(id);
const esc = (s) => String(s).replace(/[&<>"']/g, (c) => ({ '&': '&amp;', '<': '&lt;', '>': '&gt;', '"': '&quot;', "'": '&#39;' }[c]));

function call(path, body) {
  const url = path + (path.includes('?') ? '&' : '?') + 'token=' + encodeURIComponent(token);
  return fetch(url, body === undefined ? {} : { method: 'POST', body, headers: { 'Content-Type': 'text/plain' } });
}

const state = {
  files: [], index: 0, clip: null, series: {},
  text: '',        // the design as shown (the last text the server accepted)
  fields: [],      // the values found in it
  analysis: null,  // the server's answer for it
  pinned: null,    // { analysis, label }
  seq: 0,
};

// ---- The values of the file: every `key = value` outside comments, with its place in the text.

const textKeys = new Set(['name', 'topology', 'kind', 'class', 'label', 'polarity', 'channel']);

function stripComment(line) {
  let quoted = false;
  for (let i = 0; i < line.length; i++) {
    if (line[i] === '"') quoted = !quoted;
    else if (line[i] === '#' && !quoted) return line.slice(0, i);
  }
  return line;
}

function findFields(text) {
  const out = [];
  const stageNames = [];
  let section = '', stage = 0, pos = 0;
  for (const line of text.split('\n')) {
    const start = pos;
    pos += line.length + 1;
    const code = stripComment(line);
    if (/^\s*\[\[\s*stage\s*\]\]/.test(code)) { stage += 1; section = ''; continue; }
    const sec = code.match(/^\s*\[\s*([\w.]+)\s*\]/);
    if (sec) { section = sec[1].replace(/^stage\./, ''); continue; }
    const between = /^\s*between\s*=/.test(code);
    const re = /([A-Za-z_]\w*)\s*=\s*("([^"]*)"|[-+]?\.?[0-9][0-9.eE+-]*)/g;
    let m;
    while ((m = re.exec(code)) !== null) {
      const quoted = m[2].startsWith('"');
      const value = quoted ? m[3] : m[2];
      const at = start + m.index + m[0].length - m[2].length + (quoted ? 1 : 0);
      if (m[1] === 'name' && section === '' && stage > 0) stageNames[stage] = value;
      out.push({ stage, section: between ? 'between' : section, key: m[1], value, start: at, end: at + value.length, quoted });
    }
  }
  return { fields: out, stageNames };
}

// ---- Values as the files write them: 4k7, 4.7k, 100n, 2.2u, -2.0

const prefixes = { p: 1e-12, n: 1e-9, u: 1e-6, 'µ': 1e-6, m: 1e-3, k: 1e3, K: 1e3, M: 1e6, G: 1e9 };

function readValue(s) {
  s = s.trim();
  let m = s.match(/^([-+]?\d+)([pnuµmkKMG])(\d+)$/);
  if (m) return parseFloat(m[1] + '.' + m[3]) * prefixes[m[2]];
  m = s.match(/^([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)([pnuµmkKMG]?)$/);
  if (!m) return NaN;
  return parseFloat(m[1]) * (m[2] ? prefixes[m[2]] : 1);
}

function writeValue(v) {
  const a = Math.abs(v);
  const steps = [[1e9, 'G'], [1e6, 'M'], [1e3, 'k'], [1, ''], [1e-3, 'm'], [1e-6, 'u'], [1e-9, 'n'], [1e-12, 'p']];
  for (const [scale, p] of steps) {
    if (a >= scale * 0.9995 || scale === 1e-12) {
      const n = parseFloat((v / scale).toPrecision(3));
      return String(n) + p;
    }
  }
  return String(v);
}

// The next value of the chosen E-series above (dir 1) or below (dir -1) v, keeping its sign.
function stepValue(v, dir) {
  const mant = state.series[$('series').value];
  if (!mant || !isFinite(v) || v === 0) return v;
  const sign = v < 0 ? -1 : 1, a = Math.abs(v);
  const d = Math.floor(Math.log10(a));
  const cands = [];
  for (let k = d - 1; k <= d + 1; k++) for (const m of mant) cands.push(parseFloat((m * Math.pow(10, k)).toPrecision(3)));
  cands.sort((x, y) => x - y);
  const next = dir > 0 ? cands.find((c) => c > a * (1 + 1e-9)) : cands.reverse().find((c) => c < a * (1 - 1e-9));
  return next === undefined ? v : sign * next;
}

// ---- Figures as text (formatting only)

function si(v, unit, digits = 3) {
  if (v === null || v === undefined || !isFinite(v)) return '–';
  if (v === 0) return '0 ' + unit;
  const a = Math.abs(v);
  const steps = [[1e9, 'G'], [1e6, 'M'], [1e3, 'k'], [1, ''], [1e-3, 'm'], [1e-6, 'µ'], [1e-9, 'n'], [1e-12, 'p']];
  for (const [scale, p] of steps) if (a >= scale * 0.9995) return parseFloat((v / scale).toPrecision(digits)) + ' ' + p + unit;
  return parseFloat((v / 1e-12).toPrecision(digits)) + ' p' + unit;
}
const num = (v, d = 3) => (v === null || v === undefined || !isFinite(v) ? '–' : String(parseFloat(Number(v).toPrecision(d))));

// ---- Plots (SVG drawn from the server's figures)

function niceTicks(lo, hi, n) {
  const span = hi - lo, raw = span / n, mag = Math.pow(10, Math.floor(Math.log10(raw)));
  const step = [1, 2, 5, 10].map((k) => k * mag).find((s) => span / s <= n) || 10 * mag;
  const ticks = [];
  for (let t = Math.ceil(lo / step) * step; t <= hi + 1e-9; t += step) ticks.push(parseFloat(t.toPrecision(6)));
  return ticks;
}

const palette = ['#b4532a', '#2f6f73', '#7a5aa6', '#8a7a2b', '#3f7d3a', '#26303a'];

function plot(opt) {
  const W = 640, H = 260, L = 52, R = 12, T = 10, B = 34;
  const xs = opt.xlog ? (x) => Math.log10(x) : (x) => x;
  let ylo = opt.ymin, yhi = opt.ymax;
  if (ylo === undefined || yhi === undefined) {
    const ys = opt.lines.flatMap((l) => l.y.filter((v) => v !== null && isFinite(v)));
    ylo = ys.length ? Math.min(...ys) : -1; yhi = ys.length ? Math.max(...ys) : 1;
    if (opt.yfloor !== undefined) ylo = Math.max(ylo, opt.yfloor);
    if (yhi - ylo < 1) { yhi += 0.5; ylo -= 0.5; }
    const pad = (yhi - ylo) * 0.06; ylo -= pad; yhi += pad;
  }
  const x0 = xs(opt.xmin), x1 = xs(opt.xmax);
  const px = (x) => L + ((xs(x) - x0) / (x1 - x0)) * (W - L - R);
  const py = (y) => T + (1 - (y - ylo) / (yhi - ylo)) * (H - T - B);
  let s = `<svg viewBox="0 0 ${W} ${H}" role="img" aria-label="${esc(opt.label)}">`;
  for (const t of niceTicks(ylo, yhi, 6)) s += `<line class="grid" x1="${L}" x2="${W - R}" y1="${py(t)}" y2="${py(t)}"/><text x="${L - 4}" y="${py(t) + 4}" text-anchor="end">${t}</text>`;
  const xticks = opt.xlog ? [] : niceTicks(opt.xmin, opt.xmax, 8);
  if (opt.xlog) for (let e = Math.ceil(Math.log10(opt.xmin)); e <= Math.log10(opt.xmax); e++) xticks.push(Math.pow(10, e));
  for (const t of xticks) s += `<line class="grid" y1="${T}" y2="${H - B}" x1="${px(t)}" x2="${px(t)}"/><text x="${px(t)}" y="${H - B + 14}" text-anchor="middle">${opt.xlog ? si(t, 'Hz', 2) : t}</text>`;
  s += `<line class="axis" x1="${L}" x2="${L}" y1="${T}" y2="${H - B}"/><line class="axis" x1="${L}" x2="${W - R}" y1="${H - B}" y2="${H - B}"/>`;
  s += `<text x="${(L + W - R) / 2}" y="${H - 4}" text-anchor="middle">${esc(opt.xlabel)}</text>`;
  s += `<text x="12" y="${(T + H - B) / 2}" text-anchor="middle" transform="rotate(-90 12 ${(T + H - B) / 2})">${esc(opt.ylabel)}</text>`;
  let legendX = L + 8;
  opt.lines.forEach((l) => {
    let d = '', pen = false;
    for (let i = 0; i < l.x.length; i++) {
      const y = l.y[i];
      if (y === null || !isFinite(y) || y < ylo || y > yhi) { pen = false; continue; }
      d += (pen ? 'L' : 'M') + px(l.x[i]).toFixed(1) + ' ' + py(y).toFixed(1);
      pen = true;
    }
    s += `<path d="${d}" fill="none" stroke="${l.color}" stroke-width="${l.width || 1.6}" class="${l.pinned ? 'pinned' : ''}"/>`;
    if (l.label && !l.pinned) {
      s += `<rect x="${legendX}" y="${T + 4}" width="10" height="3" fill="${l.color}"/><text x="${legendX + 14}" y="${T + 9}">${esc(l.label)}</text>`;
      legendX += 22 + 7 * l.label.length;
    }
  });
  return s + '</svg>';
}

// ---- Panels

function stageRows(b) {
  if (b.stages) return b.stages.map((st) => ({ name: st.name, op: st.operating_point, gain: st.small_signal.gain_db, gm: st.small_signal.gm_s }));
  return [{ name: b.stage.name, op: b.operating_point, gain: b.small_signal.gain_midband_db, gm: b.small_signal.gm_s }];
}

function showOperatingPoint(a) {
  let h = '<table><tr><th>stage</th><th>VG</th><th>VS</th><th>VD</th><th>VGS</th><th>VDS</th><th>ID</th><th>gm</th><th>gain</th><th>region</th></tr>';
  for (const r of stageRows(a.bias)) {
    const o = r.op;
    h += `<tr><td>${esc(r.name)}</td><td>${si(o.vg_v, 'V')}</td><td>${si(o.vs_v, 'V')}</td><td data-key="vd">${si(o.vd_v, 'V', 4)}</td>` +
      `<td>${si(o.vgs_v, 'V')}</td><td>${si(o.vds_v, 'V')}</td><td>${si(o.id_a, 'A')}</td><td>${si(r.gm, 'S')}</td>` +
      `<td>${num(r.gain)} dB</td><td class="region-${esc(o.region.split(' ')[0])}">${esc(o.region)}</td></tr>`;
  }
  $('op').innerHTML = h + '</table>';
}

function showHeadroom(a) {
  const b = a.bias;
  const whole = b.chain || b.small_signal;
  const gain = b.chain ? b.chain.gain_midband_db : b.small_signal.gain_midband_db;
  let h = '<table>';
  h += `<tr><td>mid-band gain</td><td>${num(gain)} dB</td></tr>`;
  h += `<tr><td>input impedance</td><td>${si(whole.zin_ohm, 'Ω')}</td></tr>`;
  h += `<tr><td>output impedance</td><td>${si(whole.zout_ohm, 'Ω')}</td></tr>`;
  h += `<tr><td>-3 dB points</td><td>${si(b.low_3db_hz, 'Hz')} – ${si(b.high_3db_hz, 'Hz')}</td></tr>`;
  h += `<tr><td>clean symmetric swing</td><td>${si(b.headroom.symmetric_output_vpk, 'Vpk')}</td></tr>`;
  h += `<tr><td>clean up to a drive of</td><td>${si(b.headroom.clean_drive_vpk, 'Vpk')}</td></tr>`;
  h += `<tr><td>output up: limit</td><td>${esc(b.headroom.up.limit)}</td></tr>`;
  h += `<tr><td>output down: limit</td><td>${esc(b.headroom.down.limit)}</td></tr>`;
  h += '</table>';
  if (b.clip_order) {
    h += '<p class="small">clip order (drive at the input where each stage leaves its clean region)</p><ol>';
    for (const c of b.clip_order) {
      const name = b.stages[c.stage - 1] ? b.stages[c.stage - 1].name : 'stage ' + c.stage;
      h += `<li>${esc(name)}: ${c.drive_vpk === null ? 'clean throughout' : si(c.drive_vpk, 'Vpk') + ', ' + esc(c.limit)}</li>`;
    }
    h += '</ol>';
  }
  $('head').innerHTML = h;
}

function showResponse(a) {
  const lines = [];
  const add = (an, pinned) => {
    const p = an.response.points;
    lines.push({ x: p.map((q) => q.frequency_hz), y: p.map((q) => q.magnitude_db), color: pinned ? '#6b7079' : palette[0], label: pinned ? '' : 'gain', pinned });
  };
  if (state.pinned) add(state.pinned.analysis, true);
  add(a, false);
  const p = a.response.points;
  $('resp').innerHTML = plot({ label: 'gain against frequency', xlog: true, xmin: p[0].frequency_hz, xmax: p[p.length - 1].frequency_hz,
    xlabel: 'frequency', ylabel: 'gain (dB)', lines });
}

function sweepLines(an, pinned) {
  const p = an.sweep.points;
  const x = p.map((q) => q.drive_dbu);
  const lines = [{ x, y: p.map((q) => q.thd_db), color: pinned ? '#6b7079' : palette[0], label: 'THD', width: 2.2, pinned }];
  if (!pinned) for (let h = 0; h < 4; h++) lines.push({ x, y: p.map((q) => q.harmonics_dbc[h]), color: palette[h + 1], label: 'H' + (h + 2), pinned });
  return lines;
}

function showSweep(a) {
  const p = a.sweep.points;
  const lines = (state.pinned && state.pinned.analysis.sweep ? sweepLines(state.pinned.analysis, true) : []).concat(sweepLines(a, false));
  $('sweep').innerHTML = plot({ label: 'THD and harmonics against drive', xmin: p[0].drive_dbu, xmax: p[p.length - 1].drive_dbu,
    xlabel: 'drive at the generator (dBu)', ylabel: 'dB re fundamental', yfloor: -140, lines });
  showBars();
}

function showBars() {
  const a = state.analysis;
  if (!a || !a.sweep) return;
  const slider = $('bar-drive');
  slider.max = a.sweep.points.length - 1;
  const i = Math.min(+slider.value, a.sweep.points.length - 1);
  const pt = a.sweep.points[i];
  $('bar-drive-text').textContent = num(pt.drive_dbu) + ' dBu, THD ' + num(pt.thd_percent) + ' %';
  const sets = [{ h: pt.harmonics_dbc, color: palette[1] }];
  if (state.pinned && state.pinned.analysis.sweep && state.pinned.analysis.sweep.points[i]) sets.push({ h: state.pinned.analysis.sweep.points[i].harmonics_dbc, color: '#6b7079' });
  const W = 320, H = 180, L = 40, B = 24, floor = -140;
  let s = `<svg viewBox="0 0 ${W} ${H}" role="img" aria-label="harmonic levels at one drive">`;
  for (let t = 0; t >= floor; t -= 20) {
    const y = 8 + (-t / -floor) * (H - B - 8);
    s += `<line class="grid" x1="${L}" x2="${W}" y1="${y}" y2="${y}"/><text x="${L - 4}" y="${y + 4}" text-anchor="end">${t}</text>`;
  }
  const n = 4, slot = (W - L) / n;
  for (let h = 0; h < n; h++) {
    sets.forEach((set, k) => {
      const v = set.h[h];
      const x = L + h * slot + 8 + k * (slot - 16) / sets.length;
      const w = (slot - 16) / sets.length - 2;
      if (v === null || !isFinite(v)) { s += `<text x="${x + w / 2}" y="${H - B - 4}" text-anchor="middle">&lt;-180</text>`; return; }
      const top = 8 + (Math.min(0, -v) / floor + 1) * 0 + (-Math.max(v, floor) / -floor) * (H - B - 8);
      s += `<rect x="${x}" y="${top}" width="${w}" height="${H - B - top}" fill="${set.color}"/>`;
    });
    s += `<text x="${L + h * slot + slot / 2}" y="${H - 6}" text-anchor="middle">H${h + 2}</text>`;
  }
  $('bars').innerHTML = s + '</svg>';
}

function showNoise(a) {
  const n = a.noise;
  let h = '<table>';
  h += `<tr><td>EIN, A-weighted</td><td>${num(n.ein_a_dbu, 4)} dBu</td></tr>`;
  h += `<tr><td>output noise, A-weighted</td><td>${si(n.output_noise_a_v, 'V')}</td></tr>`;
  h += `<tr><td>signal to noise, A (clean swing)</td><td>${num(n.snr_a_db)} dB</td></tr>`;
  if (n.self_noise_dba_spl !== null) h += `<tr><td>self-noise</td><td>${num(n.self_noise_dba_spl)} dB(A) SPL</td></tr>`;
  h += '</table>';
  const top = [...n.contributions].sort((x, y) => y.share_percent_a - x.share_percent_a).slice(0, 3);
  h += '<p class="small">loudest parts (A-weighted share): ' + top.map((c) => esc(c.part) + ' ' + num(c.share_percent_a, 2) + ' %').join(', ') + '</p>';
  $('noise').innerHTML = h;
}

function showWarnings(a) {
  const all = new Set([...(a.bias.warnings || []), ...(a.response.warnings || []), ...(a.response.notes || []), ...((a.sweep && a.sweep.warnings) || []), ...(a.noise.warnings || [])]);
  $('warn').innerHTML = all.size ? [...all].map((w) => `<li>${esc(w)}</li>`).join('') : '<li class="none">none</li>';
}

function showAll() {
  const a = state.analysis;
  if (!a) return;
  showOperatingPoint(a); showHeadroom(a); showResponse(a); showNoise(a); showWarnings(a);
  if (a.sweep) showSweep(a);
  for (const id of ['card-sweep', 'card-bars']) $(id).classList.toggle('updating', !!state.sweepPending);
}

// ---- The design, drawn from the file's values

function sectionTitle(stage, names, single) {
  if (stage === 0) return single ? 'the stage' : 'shared: supply, source, load';
  return 'stage ' + stage + (names[stage] ? ': ' + names[stage] : '');
}

function drawDesign() {
  const { fields, stageNames } = findFields(state.text);
  state.fields = fields;
  const single = !fields.some((f) => f.stage > 0);
  const box = $('design');
  box.innerHTML = '';
  let group = null, groupStage = -1;
  fields.forEach((f, i) => {
    if (f.stage !== groupStage) {
      group = document.createElement('div');
      group.className = 'group';
      group.innerHTML = `<h3>${esc(sectionTitle(f.stage, stageNames, single))}</h3>`;
      box.appendChild(group);
      groupStage = f.stage;
    }
    const row = document.createElement('div');
    row.className = 'part';
    const id = 'v' + i;
    const label = (f.section ? f.section + ' · ' : '') + f.key;
    row.innerHTML = `<label for="${id}">${esc(label)}</label>`;
    const input = document.createElement('input');
    input.type = 'text';
    input.id = id;
    input.value = f.value;
    input.dataset.index = i;
    input.dataset.key = (f.stage > 0 ? 'stage' + f.stage + '.' : '') + (f.section ? f.section + '.' : '') + f.key;
    input.addEventListener('change', () => { clearTimeout(pending); propose(i, input.value); });
    input.addEventListener('keydown', (e) => {
      if (e.key === 'ArrowUp' || e.key === 'ArrowDown') { e.preventDefault(); step(i, e.key === 'ArrowUp' ? 1 : -1); }
    });
    input.addEventListener('wheel', (e) => {
      if (document.activeElement !== input) return;
      e.preventDefault();
      step(i, e.deltaY < 0 ? 1 : -1);
    }, { passive: false });
    row.appendChild(input);
    if (f.key === 'position') {
      const knob = document.createElement('input');
      knob.type = 'range'; knob.min = 0; knob.max = 1; knob.step = 0.01; knob.value = readValue(f.value);
      knob.setAttribute('aria-label', label + ' (knob)');
      knob.addEventListener('input', () => { input.value = String(+knob.value); schedule(i, input.value); });
      const holder = document.createElement('div');
      holder.style.gridColumn = '1 / -1';
      holder.appendChild(knob);
      row.appendChild(holder);
    }
    const why = document.createElement('div');
    why.className = 'why';
    why.id = 'why' + i;
    row.appendChild(why);
    group.appendChild(row);
  });
}

function step(i, dir) {
  const f = state.fields[i];
  if (textKeys.has(f.key)) return;
  const input = $('v' + i);
  const v = readValue(input.value);
  if (!isFinite(v)) return;
  const next = f.key === 'position' ? Math.min(1, Math.max(0, Math.round((v + dir * 0.05) * 100) / 100)) : stepValue(v, dir);
  input.value = f.key === 'position' ? String(next) : writeValue(next);
  schedule(i, input.value);
}

let pending = null;
function schedule(i, value) {
  clearTimeout(pending);
  pending = setTimeout(() => propose(i, value), 120);
}

// The text with field i set to `value`: a bare number stays bare, anything else is quoted.
function textWith(i, value) {
  const f = state.fields[i];
  const bare = /^[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?$/.test(value.trim());
  const put = f.quoted ? value.replace(/"/g, '') : bare ? value.trim() : '"' + value.replace(/"/g, '') + '"';
  return state.text.slice(0, f.start) + put + state.text.slice(f.end);
}

async function propose(i, value) {
  const input = $('v' + i), why = $('why' + i);
  const text = textWith(i, value);
  const ok = await analyse(text, (message) => {
    input.classList.add('refused');
    why.textContent = message;
  });
  if (ok) {
    const focused = document.activeElement && document.activeElement.id;
    const caret = focused === input.id ? input.selectionStart : null;
    state.text = text;
    drawDesign();
    const again = $('v' + i);
    again.classList.toggle('changed', again.value !== originalValue(i));
    if (focused && $(focused)) { $(focused).focus(); if (caret !== null) $(focused).setSelectionRange(caret, caret); }
  }
}

function originalValue(i) {
  const orig = findFields(state.files[state.index].text).fields[i];
  return orig ? orig.value : '';
}

function setStatus(text, kind) {
  const s = $('status');
  s.textContent = text;
  s.className = 'status' + (kind ? ' ' + kind : '');
}

// Posts the text; on success shows its figures and returns true; on a refusal passes the
// server's message to `refused` and keeps the design as it was. The two halves are asked
// for at once: bias, response and noise come back quickly on any design and are shown (and
// the edit taken) as soon as they do; the sweep, most of the time on a chain, follows, its
// panels marked as updating meanwhile.
async function analyse(text, refused) {
  const seq = ++state.seq;
  setStatus('computing', 'busy');
  const t0 = performance.now();
  const path = '/api/analyse?file=' + state.index + '&parts=';
  const sweepAnswer = call(path + 'sweep', text);
  const res = await call(path + 'small', text);
  const body = await res.json();
  if (seq !== state.seq) return false;  // a newer edit is on its way
  if (res.status !== 200) {
    document.body.dataset.refusals = String(+(document.body.dataset.refusals || 0) + 1);
    setStatus('refused: ' + body.error, 'error');
    if (refused) refused(body.error);
    return false;
  }
  const before = state.analysis;
  state.analysis = Object.assign(body, { sweep: before ? before.sweep : null });
  state.sweepPending = true;
  $('pin').disabled = true;
  showAll();
  const tSmall = Math.round(performance.now() - t0);
  setStatus('figures ready in ' + tSmall + ' ms; harmonics computing', 'busy');
  sweepAnswer.then(async (r) => {
    const b = await r.json();
    if (seq !== state.seq) return;
    state.sweepPending = false;
    $('pin').disabled = false;
    if (r.status !== 200) { setStatus('harmonics: ' + b.error, 'error'); showAll(); return; }
    state.analysis.sweep = b.sweep;
    showAll();
    // For the browser tests: how many answers the page has shown in full.
    document.body.dataset.answers = String(+(document.body.dataset.answers || 0) + 1);
    setStatus('figures ready in ' + tSmall + ' ms, harmonics in ' + Math.round(performance.now() - t0) + ' ms');
  });
  return true;
}

// ---- Pin, render, save

function pin() {
  state.pinned = { analysis: state.analysis, label: 'pinned' };
  $('unpin').disabled = false;
  $('pin-text').textContent = 'pinned at ' + new Date().toLocaleTimeString() + ': dashed grey in the plots and bars';
  showAll();
}
function unpin() {
  state.pinned = null;
  $('unpin').disabled = true;
  $('pin-text').textContent = '';
  showAll();
}

function wavUrl(b64) {
  const bin = atob(b64);
  const bytes = new Uint8Array(bin.length);
  for (let i = 0; i < bin.length; i++) bytes[i] = bin.charCodeAt(i);
  return URL.createObjectURL(new Blob([bytes], { type: 'audio/wav' }));
}

async function render() {
  const button = $('render');
  button.disabled = true;
  const t0 = performance.now();
  const tick = setInterval(() => { $('render-state').textContent = 'rendering… ' + ((performance.now() - t0) / 1000).toFixed(1) + ' s'; }, 100);
  try {
    const res = await call('/api/render?file=' + state.index + '&input_peak=' + encodeURIComponent($('input-peak').value), state.text);
    const body = await res.json();
    if (res.status !== 200) { $('render-state').textContent = 'refused: ' + body.error; return; }
    const takes = $('takes');
    for (const old of takes.querySelectorAll('audio')) URL.revokeObjectURL(old.src);
    takes.innerHTML = '';
    const names = { edited: 'the edited design', loaded: 'the design as loaded', dry: 'the dry clip' };
    for (const key of ['edited', 'loaded', 'dry']) {
      const o = body.outputs[key];
      const div = document.createElement('div');
      div.className = 'take';
      div.innerHTML = `<div>${names[key]} <span class="small">${num(o.loudness_lufs)} LUFS${o.clipped_samples ? ', ' + o.clipped_samples + ' samples clipped' : ''}</span></div>`;
      const audio = document.createElement('audio');
      audio.controls = true;
      audio.id = 'take-' + key;
      audio.src = wavUrl(o.wav_base64);
      div.appendChild(audio);
      takes.appendChild(div);
    }
    $('render-state').textContent = `rendered ${num(body.duration_s)} s at ${body.oversampling}x in ${num(body.seconds)} s, loudness-matched`;
  } finally {
    clearInterval(tick);
    button.disabled = false;
  }
}

async function save(confirmed) {
  const path = $('save-path').value.trim();
  if (!path) { $('save-state').textContent = 'type the path of the new file'; return; }
  const res = await call('/api/save?file=' + state.index + '&path=' + encodeURIComponent(path) + (confirmed ? '&confirm=1' : ''), state.text);
  const body = await res.json();
  if (res.status === 409 && !confirmed) {
    if (window.confirm(body.error + '\n\nReplace it? The old file is kept beside it as ' + path + '.bak.')) return save(true);
    $('save-state').textContent = 'not saved';
    return;
  }
  $('save-state').textContent = res.status === 200 ? 'saved ' + body.saved + (body.backup ? ' (the old one kept as ' + body.backup + ')' : '') : 'refused: ' + body.error;
}

async function load(index) {
  state.index = index;
  state.text = state.files[index].text;
  drawDesign();
  await analyse(state.text);
}

async function start() {
  const [files, series] = await Promise.all([call('/api/files'), call('/api/series')]);
  if (files.status !== 200) { setStatus('refused: open the address the program printed (it holds the token)', 'error'); return; }
  const f = await files.json();
  state.files = f.files;
  state.clip = f.clip;
  state.series = await series.json();
  const pick = $('file-pick');
  pick.innerHTML = state.files.map((x) => `<option value="${x.index}">${esc(x.name)}</option>`).join('');
  pick.addEventListener('change', () => load(+pick.value));
  $('pin').addEventListener('click', pin);
  $('unpin').addEventListener('click', unpin);
  $('bar-drive').addEventListener('input', showBars);
  $('render').addEventListener('click', render);
  $('render').disabled = !state.clip;
  if (!state.clip) $('render-state').textContent = 'no clip: start the workbench with --audio CLIP.wav';
  else $('render-state').textContent = 'clip: ' + state.clip;
  $('save').addEventListener('click', () => save(false));
  await load(0);
}

start();
