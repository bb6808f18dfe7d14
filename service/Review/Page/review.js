// Review page: plain script, no build step and nothing fetched from outside the service (the box may be offline).
'use strict';

const KEY_STORE = 'strayspot.apiKey';
const VERDICTS = ['label-it', 'false-alarm', 'unsure'];
const SCROLL_KEYS = new Set(['ArrowUp', 'ArrowDown', 'ArrowLeft', 'ArrowRight', 'PageUp', 'PageDown', 'Home', 'End']);
const VERDICT_TEXT = { 'label-it': 'Label it', 'false-alarm': 'False alarm', 'unsure': 'Unsure' };
const LIST_PAGE = 300; // frames drawn in the list at a time; a batch can hold many thousands

const state = {
  batchId: null,
  overview: null,     // GET /v1/batches/{id}/review
  frames: [],         // overview.frames, highest score first
  index: -1,          // position of the open frame in state.frames
  frame: null,        // the open frame: { seq, frameId, width, height, regions, decision, files, threshold, scoreRange } or a dropped one
  dropped: false,     // the open frame was dropped on the page, not part of a batch
  region: null,       // selected region id, null = whole frame
  recording: null,    // the open frame is a recording: GET …/frames/{seq}/recording (timeline, tracks)
  track: null,        // selected track id of the open recording, null = whole recording
  urls: [],           // object URLs of the open frame's images, revoked on the next frame
  shown: LIST_PAGE,   // how many frames the list draws
  drafts: new Map(),  // notes typed but not yet sent, by target, so moving between regions loses none
  loadToken: 0,
};

const $ = (id) => document.getElementById(id);

function setStatus(text, isError) {
  const s = $('status');
  s.textContent = text || '';
  s.classList.toggle('error', !!isError);
}

// ---- HTTP: every call carries the key; a 401 asks for one.

class ApiError extends Error {
  constructor(status, problem) {
    super((problem && (problem.detail || problem.title)) || ('HTTP ' + status));
    this.status = status;
    this.code = problem && problem.code;
  }
}

function headers(extra) {
  const h = Object.assign({}, extra || {});
  const key = sessionStorage.getItem(KEY_STORE);
  if (key) h['X-Api-Key'] = key;
  return h;
}

async function api(path, options) {
  const opts = Object.assign({}, options || {});
  opts.headers = headers(opts.headers);
  const response = await fetch(path, opts);
  if (response.status === 401) $('key-form').hidden = false;
  if (!response.ok) {
    let problem = null;
    try { problem = await response.json(); } catch (e) { /* not JSON */ }
    throw new ApiError(response.status, problem);
  }
  return response;
}

async function apiJson(path, options) {
  const response = await api(path, options);
  return response.status === 204 ? null : response.json();
}

async function objectUrl(path) {
  const blob = await (await api(path)).blob();
  const url = URL.createObjectURL(blob);
  state.urls.push(url);
  return url;
}

function releaseUrls() {
  for (const u of state.urls) URL.revokeObjectURL(u);
  state.urls = [];
}

// ---- Formatting

function fmtScore(x) {
  return x === null || x === undefined ? '–' : Number(x).toFixed(2);
}

function fmtRate(x) {
  return x === null || x === undefined ? '–' : (100 * x).toFixed(0) + '%';
}

function el(tag, attrs, children) {
  const e = document.createElement(tag);
  for (const [k, v] of Object.entries(attrs || {})) {
    if (k === 'text') e.textContent = v;
    else if (k === 'class') e.className = v;
    else e.setAttribute(k, v);
  }
  for (const c of children || []) e.append(c);
  return e;
}

function svg(tag, attrs) {
  const e = document.createElementNS('http://www.w3.org/2000/svg', tag);
  for (const [k, v] of Object.entries(attrs || {})) e.setAttribute(k, v);
  return e;
}

function verdictSpan(verdict) {
  return verdict ? el('span', { class: 'v-' + verdict, text: VERDICT_TEXT[verdict] }) : el('span', { class: 'muted', text: '–' });
}

// ---- Batches and models

async function loadBatches() {
  const select = $('batch-select');
  try {
    const list = await apiJson('/v1/batches?limit=200');
    const keep = state.batchId;
    select.replaceChildren(el('option', { value: '', text: '(none)' }));
    for (const b of list.batches) {
      const label = b.id + ' · ' + b.model + ' · ' + b.state + ' · ' + b.frames.done + '/' + b.frames.total;
      select.append(el('option', { value: b.id, text: label }));
    }
    if (keep) select.value = keep;
  } catch (e) {
    setStatus('Batches could not be listed: ' + e.message, true);
  }
}

async function loadModels() {
  try {
    const list = await apiJson('/v1/models');
    const select = $('drop-model');
    select.replaceChildren();
    for (const m of list.models) if (m.usable) select.append(el('option', { value: m.name, text: m.name }));
  } catch (e) {
    /* the batch list reports the problem */
  }
}

async function openBatch(id, seq) {
  state.batchId = id || null;
  $('batch-select').value = id || '';
  if (!id) {
    state.overview = null;
    state.frames = [];
    renderFrameList();
    return;
  }
  try {
    await refreshOverview();
  } catch (e) {
    setStatus('Batch ' + id + ' could not be opened: ' + e.message, true);
    return;
  }
  const at = seq === undefined ? 0 : Math.max(0, state.frames.findIndex((f) => f.seq === seq));
  if (state.frames.length > 0) await openFrame(at);
  else clearFrame(state.overview.batch.frames.total > 0 ? 'No frame of this batch is scored yet.' : 'This batch has no frames.');
}

// After a decision only the counts are fetched again: a batch's frame list can be long, and the page knows its own change.
async function refreshOverview(withFrames) {
  const all = withFrames !== false;
  const o = await apiJson('/v1/batches/' + encodeURIComponent(state.batchId) + '/review' + (all ? '' : '?frames=false'));
  if (all) {
    state.frames = o.frames;
    state.shown = LIST_PAGE;
  }
  o.frames = state.frames;
  state.overview = o;
  renderProvenance(o);
  renderLegend(o.classes);
  renderSummary(o);
  renderFrameList();
}

function renderProvenance(o) {
  const p = o.provenance;
  const parts = $('provenance');
  parts.replaceChildren();
  const add = (label, value) => {
    parts.append(label + ' ');
    parts.append(el('b', { text: value }));
    parts.append('  ');
  };
  add('Model', p.model);
  if (p.modelSha256) add('sha256', p.modelSha256.slice(0, 12));
  add('profile', p.profileVersion || 'not yet scored');
  if (p.method) add('method', p.method);
  if (p.calibration) add('calibration', p.calibration.file + (p.calibration.frameCount ? ' (' + p.calibration.frameCount + ' frames)' : ''));
  else add('calibration', 'none');
  if (p.currentProfileVersion && p.profileVersion && p.currentProfileVersion !== p.profileVersion) {
    parts.append(el('span', { class: 'warn', text: 'The model\'s profile is now ' + p.currentProfileVersion + '; this batch was scored with ' + p.profileVersion + '.' }));
  }
  if (o.notice) $('notice').textContent = o.notice;
}

function renderLegend(classes) {
  const list = $('class-legend');  // compact chips under the frame, visible without scrolling
  list.replaceChildren();
  for (const c of classes || []) {
    const sw = el('span', { class: 'swatch' });
    sw.style.background = c.color;
    list.append(el('li', {}, [sw, c.name + (c.surface ? ' (surface)' : '')]));
  }
}

function renderSummary(o) {
  const c = o.counts;
  $('summary-counts').textContent =
    c.frames.reviewed + ' of ' + c.frames.total + ' frames reviewed' + (c.frames.inProgress ? ' (' + c.frames.inProgress + ' more in progress)' : '') + '; ' +
    c.regions.reviewed + ' of ' + c.regions.total + ' regions decided: ' +
    c.regions.verdicts.labelIt + ' label it, ' + c.regions.verdicts.falseAlarm + ' false alarm, ' + c.regions.verdicts.unsure + ' unsure.';
  const body = $('class-table').tBodies[0];
  body.replaceChildren();
  for (const k of c.byClassBeneath) {
    body.append(el('tr', { 'data-class': k.classBeneathName }, [
      el('td', { text: k.classBeneathName }),
      el('td', { class: 'num', text: k.reviewed + ' / ' + k.regions }),
      el('td', { class: 'num', text: String(k.verdicts.falseAlarm) }),
      el('td', { class: 'num rate', text: fmtRate(k.falseAlarmRate) }),
      el('td', { class: 'num', text: fmtScore(k.highestFalseAlarmScore) }),
      el('td', { class: 'num', text: fmtScore(k.lowestLabelItScore) }),
    ]));
  }
  const link = $('evaluation-link');
  link.replaceChildren();
  if (o.evaluation) {
    const a = el('a', { href: '#', id: 'evaluation-report', text: 'Evaluation report ' + o.evaluation.id });
    a.addEventListener('click', (e) => { e.preventDefault(); openProtected(o.evaluation.report, 'text/markdown'); });
    link.append('Measured on labeled frames: ', a);
  } else {
    link.textContent = 'No evaluation of this model yet (POST /v1/models/{model}/evaluations measures one on labeled frames).';
  }
}

// A box that scrolls sideways says so: data-more on its wrapper names the side(s) with more to see (the shaded
// edges), and it takes keyboard focus only while there is something to scroll.
function watchOverflow(box) {
  const update = () => {
    const max = box.scrollWidth - box.clientWidth;
    const more = [];
    if (box.scrollLeft > 1) more.push('left');
    if (box.scrollLeft < max - 1) more.push('right');
    box.parentElement.dataset.more = more.join(' ');
    if (max > 1) box.tabIndex = 0; else box.removeAttribute('tabindex');
  };
  box.addEventListener('scroll', update, { passive: true });
  const watch = new ResizeObserver(update);
  watch.observe(box);
  watch.observe(box.firstElementChild);
  update();
}

function renderFrameList() {
  const list = $('frame-list');
  list.replaceChildren();
  if (state.index >= state.shown) state.shown = (Math.floor(state.index / LIST_PAGE) + 1) * LIST_PAGE;
  const count = Math.min(state.frames.length, state.shown);
  for (let i = 0; i < count; i++) {
    const f = state.frames[i];
    const bar = el('span', {});
    bar.style.width = (isReviewed(f) ? 100 : f.regionCount ? Math.round(100 * f.regionsDecided / f.regionCount) : 0) + '%';
    const li = el('li', { 'data-seq': String(f.seq), title: f.frameId }, [
      el('span', { class: 'name', text: f.frameId }),
      el('span', { class: 'score', text: fmtScore(f.frameScore) }),
      el('span', { class: 'meta', text: (f.recording ? 'recording · ' : '') + (f.regionCount ? f.regionsDecided + '/' + f.regionCount + (f.recording ? ' tracks' : ' regions') + ' decided'
        : f.recording ? 'no tracks' : 'no regions') + (f.verdict ? (f.recording ? ' · recording: ' : ' · frame: ') + VERDICT_TEXT[f.verdict] : '') }),
      el('span', { class: 'progress', 'aria-hidden': 'true' }, [bar]),
    ]);
    if (isReviewed(f)) li.classList.add('reviewed');
    else if (f.regionsDecided > 0) li.classList.add('partial');
    if (!state.dropped && i === state.index) li.classList.add('current');
    li.addEventListener('click', () => openFrame(i));
    list.append(li);
  }
  if (count < state.frames.length) {
    const more = el('button', { type: 'button', id: 'show-more', text: 'Show ' + Math.min(LIST_PAGE, state.frames.length - count) + ' more of ' + (state.frames.length - count) });
    more.addEventListener('click', () => { state.shown += LIST_PAGE; renderFrameList(); });
    list.append(el('li', { class: 'more' }, [more]));
  }
  $('frame-count').textContent = state.batchId ? state.frames.length + ' scored frames, highest score first' : '';
}

// A frame is reviewed when the whole frame has a verdict or every one of its regions has one; with some decided it is in progress.
function isReviewed(item) {
  return !!item.verdict || (item.regionCount > 0 && item.regionsDecided >= item.regionCount);
}

function needsReview(item) {
  return !isReviewed(item) && item.regionCount > 0;
}

// ---- One frame

function clearFrame(message) {
  releaseUrls();
  leaveRecording();
  state.frame = null;
  state.region = null;
  $('frame-title').textContent = message || '';
  for (const id of ['layer-source', 'layer-heat', 'layer-outline']) $(id).removeAttribute('href');
  $('layer-boxes').replaceChildren();
  $('region-table').tBodies[0].replaceChildren();
  renderDecision();
}

async function openFrame(i, firstUndecided) {
  if (i < 0 || i >= state.frames.length) return;
  const token = ++state.loadToken;
  state.index = i;
  state.dropped = false;
  const item = state.frames[i];
  setStatus('Loading ' + item.frameId + '…');
  let frame;
  try {
    frame = await apiJson('/v1/batches/' + encodeURIComponent(state.batchId) + '/frames/' + item.seq);
  } catch (e) {
    setStatus('Frame ' + item.frameId + ' could not be loaded: ' + e.message, true);
    return;
  }
  if (token !== state.loadToken) return;
  releaseUrls();
  if (frame.recording) {
    let recording;
    try {
      recording = await apiJson(frame.recording);
    } catch (e) {
      setStatus('Recording ' + item.frameId + ' could not be loaded: ' + e.message, true);
      return;
    }
    if (token !== state.loadToken) return;
    showRecording(frame, recording);
    if (firstUndecided) {
      const t = recording.tracks.find((x) => !trackDecided(x));
      if (t) selectTrack(t.id);
    }
  } else {
    // A batch may have been made without the heat map or the mask (its artifacts field): those layers stay empty.
    const optional = (path) => (path ? objectUrl(path) : Promise.resolve(null));
    const [source, heat, mask] = await Promise.all([objectUrl(frame.files.source), optional(frame.files.heat), optional(frame.files.mask)]);
    if (token !== state.loadToken) return;
    showFrame(frame, source, heat, mask);
    if (firstUndecided) {
      const r = state.frame.order.find((x) => !x.decision);
      if (r) selectRegion(r.id);
    }
  }
  history.replaceState(null, '', '#batch=' + encodeURIComponent(state.batchId) + '&seq=' + frame.seq);
  renderFrameList();
  const current = $('frame-list').querySelector('li.current');
  if (current) current.scrollIntoView({ block: 'nearest' });
  setStatus('');
}

function showFrame(frame, sourceUrl, heatUrl, maskUrl) {
  // The work order: highest score first, so the likeliest finds come up first; ids stay as in the report.
  frame.order = frame.regions.slice().sort((a, b) => (b.maxScore - a.maxScore) || (a.id - b.id));
  leaveRecording();
  state.frame = frame;
  state.region = null;
  const w = frame.width, h = frame.height;
  if (!w || !h) {
    clearFrame(frame.frameId + ': its report and mask are missing from the batch folder, so it cannot be shown.');
    return;
  }
  const stage = $('stage');
  stage.setAttribute('viewBox', '0 0 ' + w + ' ' + h);
  for (const id of ['layer-source', 'layer-heat', 'layer-outline']) {
    $(id).setAttribute('width', w);
    $(id).setAttribute('height', h);
  }
  $('layer-source').setAttribute('href', sourceUrl);
  if (heatUrl) $('layer-heat').setAttribute('href', heatUrl);
  const toggle = $('heat-toggle');
  toggle.disabled = !heatUrl;
  toggle.parentElement.title = heatUrl ? '' : 'This batch was made without the heat map (its artifacts field).';
  $('layer-outline').removeAttribute('href');
  if (maskUrl) drawOutline(maskUrl, w, h, frame);
  applyLayers();
  const title = (state.dropped ? 'Dropped frame ' : (state.index + 1) + ' of ' + state.frames.length + ': ') + frame.frameId +
    ' · frame score ' + fmtScore(frame.frameScore) + ' · threshold ' + fmtScore(frame.threshold) + ' · ' + frame.regions.length +
    (frame.regions.length === 1 ? ' region' : ' regions');
  $('frame-title').textContent = title;
  renderHeatLegend(frame);
  renderBoxes();
  renderRegionTable();
  renderDecision();
}

// The colour bar under the frame: its score range and where the threshold sits on it.
function renderHeatLegend(frame) {
  const hs = frame.heatScale || (frame.scoreRange && frame.threshold !== null && frame.threshold !== undefined
    ? { low: frame.scoreRange.min, high: frame.scoreRange.max, threshold: frame.threshold, mode: 'frame' } : null);
  const legend = $('heat-legend');
  legend.hidden = !hs;
  if (!hs) return;
  const at = Math.min(1, Math.max(0, (hs.threshold - hs.low) / ((hs.high - hs.low) || 1)));
  $('heat-marker').style.left = (100 * at).toFixed(1) + '%';
  $('heat-threshold').style.left = (100 * at).toFixed(1) + '%';
  $('heat-low').textContent = fmtScore(hs.low);
  $('heat-high').textContent = fmtScore(hs.high);
  $('heat-threshold').textContent = 'threshold ' + fmtScore(hs.threshold);
  legend.dataset.threshold = String(hs.threshold);
  legend.dataset.mode = hs.mode;
  $('heat-scale').textContent = hs.mode === 'fixed'
    ? 'Fixed scale, the same in every frame; flagged = right of the marker.'
    : 'This frame\'s own range: colours do not compare across frames.';
}

// The mask's edge pixels, drawn once per frame into a transparent image laid over the frame.
function drawOutline(maskUrl, w, h, frame) {
  const img = new Image();
  img.onload = () => {
    if (state.frame !== frame) return;
    const canvas = document.createElement('canvas');
    canvas.width = w;
    canvas.height = h;
    const ctx = canvas.getContext('2d');
    ctx.drawImage(img, 0, 0, w, h);
    const src = ctx.getImageData(0, 0, w, h).data;
    const out = ctx.createImageData(w, h);
    const d = out.data;
    const on = (x, y) => x >= 0 && y >= 0 && x < w && y < h && src[(y * w + x) * 4] > 127;
    let edges = 0;
    // Light on the mask's border, dark just outside it: a double line that reads on pale and dark ground alike.
    for (let y = 0; y < h; y++) {
      for (let x = 0; x < w; x++) {
        const inside = on(x, y);
        const border = on(x - 1, y) !== inside || on(x + 1, y) !== inside || on(x, y - 1) !== inside || on(x, y + 1) !== inside;
        if (!border) continue;
        const o = (y * w + x) * 4;
        const v = inside ? 255 : 16;
        d[o] = v; d[o + 1] = v; d[o + 2] = v + (inside ? 0 : 4); d[o + 3] = 255;
        if (inside) edges++;
      }
    }
    ctx.putImageData(out, 0, 0);
    $('layer-outline').setAttribute('href', canvas.toDataURL('image/png'));
    $('layer-outline').setAttribute('data-edges', String(edges));
  };
  img.src = maskUrl;
}

function applyLayers() {
  const heatOn = $('heat-toggle').checked && !$('heat-toggle').disabled;
  const heat = $('layer-heat');
  heat.style.display = heatOn ? '' : 'none';
  heat.setAttribute('opacity', String($('heat-opacity').value / 100));
  $('layer-outline').style.display = $('outline-toggle').checked ? '' : 'none';
}

function renderBoxes() {
  const g = $('layer-boxes');
  g.replaceChildren();
  if (!state.frame) return;
  // Numbers keep one size on screen whatever the zoom: sized from the part of the frame in view.
  const viewBox = $('stage').viewBox.baseVal;
  const size = Math.max(4, Math.min(viewBox.width, viewBox.height) / 26);
  const frame = state.frame;
  const halos = [], boxes = [], leaders = [], tags = [];
  for (const r of frame.regions) {
    const verdict = r.decision ? r.decision.verdict : null;
    const at = { x: r.box.x - 1, y: r.box.y - 1, width: r.box.width + 2, height: r.box.height + 2 };
    halos.push(svg('rect', Object.assign({ class: 'box-halo' }, at)));
    const rect = svg('rect', Object.assign({
      class: 'box' + (verdict ? ' ' + verdict : '') + (state.region === r.id ? ' selected' : ''),
      'data-region': r.id,
    }, at));
    rect.addEventListener('click', (ev) => { ev.stopPropagation(); selectRegion(r.id); });
    boxes.push(rect);
  }
  for (const t of placeTags(frame, size)) {
    if (t.leader) {
      const line = { x1: t.x + t.w / 2, y1: t.y + t.h / 2, x2: t.leader.x, y2: t.leader.y };
      leaders.push(svg('line', Object.assign({ class: 'leader-halo' }, line)), svg('line', Object.assign({ class: 'leader' }, line)));
    }
    const bg = svg('rect', { x: t.x, y: t.y, width: t.w, height: t.h, rx: size / 6, class: 'tag-bg' + (state.region === t.id ? ' selected' : ''), 'data-region': t.id });
    const text = svg('text', { x: t.x + t.w / 2, y: t.y + t.h * 0.78, 'text-anchor': 'middle', class: 'tag', 'font-size': size, 'data-region': t.id });
    text.textContent = String(t.id);
    for (const e of [bg, text]) e.addEventListener('click', (ev) => { ev.stopPropagation(); selectRegion(t.id); });
    tags.push(bg, text);
  }
  g.append(...halos, ...boxes, ...leaders, ...tags);
}

// Region numbers that never overlap: each tag tries the spots hugging its box, then rings further out with a
// leader line; higher-scoring regions choose first. The same rule as the overlay PNG's numbers.
function placeTags(frame, size) {
  const viewBox = $('stage').viewBox.baseVal;
  const minX = viewBox.x, minY = viewBox.y, maxX = viewBox.x + viewBox.width, maxY = viewBox.y + viewBox.height;
  const placed = [];
  const pad = size * 0.15;
  const collides = (x, y, w, h) => placed.some((p) => x < p.x + p.w + pad && p.x < x + w + pad && y < p.y + p.h + pad && p.y < y + h + pad);
  const covers = (x, y, w, h) => frame.regions.filter((r) => x < r.box.x + r.box.width + 1 && r.box.x - 1 < x + w && y < r.box.y + r.box.height + 1 && r.box.y - 1 < y + h).length;
  for (const r of frame.order) {
    // Zoomed in, only the regions in view get a number.
    if (r.box.x + r.box.width < minX || r.box.x > maxX || r.box.y + r.box.height < minY || r.box.y > maxY) continue;
    const w = String(r.id).length * size * 0.62 + size * 0.5, h = size * 1.2;
    const b = { l: r.box.x - 1, t: r.box.y - 1, r: r.box.x + r.box.width + 1, b: r.box.y + r.box.height + 1 };
    const spots = [
      [b.l, b.t - h, true], [b.r - w, b.t - h, true], [b.l, b.b, true], [b.r - w, b.b, true],
      [b.r, b.t, true], [b.l - w, b.t, true], [b.r, b.b - h, true], [b.l - w, b.b - h, true],
    ];
    const cx = (b.l + b.r) / 2, cy = (b.t + b.b) / 2;
    for (let ring = 1; ring <= 8; ring++) {
      const dx = (b.r - b.l) / 2 + ring * (w + pad * 2), dy = (b.b - b.t) / 2 + ring * (h + pad * 2);
      for (const [sx, sy] of [[0, -1], [1, -1], [1, 0], [1, 1], [0, 1], [-1, 1], [-1, 0], [-1, -1]]) {
        spots.push([Math.min(Math.max(cx + sx * dx - w / 2, minX), maxX - w), Math.min(Math.max(cy + sy * dy - h / 2, minY), maxY - h), false]);
      }
    }
    let best = null, bestCost = Infinity;
    for (const [x, y, near] of spots) {
      if (x < minX || y < minY || x + w > maxX || y + h > maxY || collides(x, y, w, h)) continue;
      const cost = covers(x, y, w, h) * 4 + (near ? 0 : 1);
      if (cost < bestCost) { bestCost = cost; best = { x, y, near }; if (cost === 0) break; }
    }
    if (!best) best = { x: Math.min(Math.max(b.l, minX), maxX - w), y: Math.min(Math.max(b.t, minY), maxY - h), near: true };
    const t = { id: r.id, x: best.x, y: best.y, w, h, leader: null };
    if (!best.near) t.leader = { x: Math.min(Math.max(t.x + w / 2, b.l), b.r), y: Math.min(Math.max(t.y + h / 2, b.t), b.b) };
    placed.push(t);
  }
  return placed;
}

function classColor(name) {
  const classes = state.overview ? state.overview.classes : [];
  const c = classes.find((x) => x.name === name);
  return c ? c.color : null;
}

// A table cell naming a class beneath, with the descriptor's colour when it has one.
function classCell(name) {
  const cell = el('td', {});
  const color = classColor(name);
  if (color) {
    const sw = el('span', { class: 'swatch' });
    sw.style.background = color;
    cell.append(sw);
  }
  cell.append(name);
  return cell;
}

function renderRegionTable() {
  const body = $('region-table').tBodies[0];
  body.replaceChildren();
  if (!state.frame) return;
  for (const r of state.frame.order) {
    const cls = classCell(r.classBeneathName || String(r.classBeneath));
    const tr = el('tr', { 'data-region': String(r.id) }, [
      el('td', { text: String(r.id) }),
      el('td', { class: 'num', text: fmtScore(r.maxScore) }),
      el('td', { class: 'num', text: String(r.area) }),
      cls,
      el('td', { text: r.onSurface ? 'yes' : 'no' }),
      el('td', { class: 'decision' }, [verdictSpan(r.decision ? r.decision.verdict : null)]),
    ]);
    if (state.region === r.id) tr.classList.add('selected');
    tr.addEventListener('click', () => selectRegion(r.id));
    body.append(tr);
  }
  renderProgress();
}

function renderProgress() {
  const f = state.frame;
  const p = $('frame-progress');
  if (!f || state.dropped) { p.textContent = ''; return; }
  const decided = f.regions.filter((r) => r.decision).length;
  p.textContent = f.decision ? 'This frame is reviewed (whole-frame verdict); ' + decided + ' of ' + f.regions.length + ' regions decided on their own.'
    : f.regions.length === 0 ? 'No regions: decide on the whole frame.'
    : decided === f.regions.length ? 'This frame is reviewed: all ' + decided + ' regions decided.'
    : decided + ' of ' + f.regions.length + ' regions decided in this frame.';
  p.dataset.decided = String(decided);
}

function currentTarget() {
  if (!state.frame) return null;
  if (state.recording) return state.track === null ? { decision: state.frame.decision } : findTrack(state.track);
  if (state.region === null) return { decision: state.frame.decision };
  return state.frame.regions.find((r) => r.id === state.region) || null;
}

function renderDecision() {
  const target = currentTarget();
  const decision = target ? target.decision : null;
  $('target-title').textContent = !state.frame ? 'No frame open'
    : state.recording ? (state.track === null ? 'Whole recording' : 'Track ' + state.track)
    : state.region === null ? 'Whole frame' : 'Region ' + state.region;
  $('target-verdict').replaceChildren(decision
    ? el('span', {}, ['Now: ', verdictSpan(decision.verdict), decision.decidedBy ? ' by ' + decision.decidedBy : ''])
    : el('span', { class: 'muted', text: 'No decision.' }));
  const draft = state.frame ? state.drafts.get(draftKey()) : undefined;
  $('note').value = draft !== undefined ? draft : decision && decision.note ? decision.note : '';
  const enabled = !!state.frame && !state.dropped;
  for (const b of document.querySelectorAll('.verdicts button')) {
    b.disabled = !enabled;
    b.classList.toggle('chosen', !!decision && b.dataset.verdict === decision.verdict);
  }
  $('withdraw').disabled = !enabled || !decision;
  $('save-note').disabled = !enabled || !decision;
  $('note').disabled = !enabled;
  if (state.dropped) $('target-verdict').textContent = 'Decisions are kept for batch frames; a dropped frame is scored, not stored.';
}

function selectRegion(id) {
  state.region = id;
  renderRegionTable();
  renderDecision();
  if (id === null) zoomTo(null);
  else zoomTo(state.frame.regions.find((r) => r.id === id));
  const row = $('region-table').querySelector('tr.selected');
  if (row) row.scrollIntoView({ block: 'nearest' });
}

// Zoom by narrowing the SVG's view box to the region, with margin, keeping the frame's aspect.
function zoomTo(region) {
  const f = state.frame;
  if (!f) return;
  const stage = $('stage');
  if (!region) {
    stage.setAttribute('viewBox', '0 0 ' + f.width + ' ' + f.height);
    stage.dataset.zoomed = 'false';
    renderBoxes();
    return;
  }
  const aspect = f.width / f.height;
  let w = Math.max(region.box.width * 3, f.width / 8);
  let h = Math.max(region.box.height * 3, f.height / 8);
  if (w / h > aspect) h = w / aspect; else w = h * aspect;
  w = Math.min(w, f.width);
  h = Math.min(h, f.height);
  const cx = region.box.x + region.box.width / 2, cy = region.box.y + region.box.height / 2;
  const x = Math.min(Math.max(cx - w / 2, 0), f.width - w);
  const y = Math.min(Math.max(cy - h / 2, 0), f.height - h);
  stage.setAttribute('viewBox', [x, y, w, h].map((v) => v.toFixed(1)).join(' '));
  stage.dataset.zoomed = 'true';
  renderBoxes();
}

function stepRegion(delta) {
  const regions = state.frame ? state.frame.order : [];
  if (regions.length === 0) return;
  const at = state.region === null ? -1 : regions.findIndex((r) => r.id === state.region);
  let next = at + delta;
  if (at === -1 && delta < 0) next = regions.length - 1;
  if (next < 0 || next >= regions.length) { selectRegion(null); return; }
  selectRegion(regions[next].id);
}

// ---- The work queue: the next undecided region of this frame, then the next frame that still needs review.

function nextUndecided(saved) {
  const f = state.frame;
  if (!f || state.dropped) return;
  if (state.recording) { nextUndecidedTrack(saved); return; }
  const order = f.order;
  const at = state.region === null ? -1 : order.findIndex((r) => r.id === state.region);
  for (let k = 1; k <= order.length; k++) {
    const r = order[(at + k + order.length) % order.length];
    if (!r.decision && !f.decision) { selectRegion(r.id); return; }
  }
  nextFrameToReview(saved);
}

// saved: the message of the verdict that led here, kept in the status line so the move is explained.
async function nextFrameToReview(saved) {
  const n = state.frames.length;
  for (let k = 1; k <= n; k++) {
    const i = (state.index + k + n) % n;
    if (i === state.index && !state.dropped) continue;
    if (needsReview(state.frames[i])) {
      await openFrame(i, true);
      setStatus((saved ? saved + ' ' : '') + 'Next frame to review: ' + state.frames[i].frameId + '.');
      return;
    }
  }
  setStatus((saved ? saved + ' ' : '') + 'Every frame with regions is reviewed.');
}

// ---- A recording: the timeline strip (frame score over time, the threshold, tracks as bars), the picked track's
// best frame and facts, and decisions on whole tracks. Tracks step in time order, as they lie on the strip.

const STRIP = { left: 46, right: 14, top: 10, plot: 96, axis: 20, lane: 14, laneGap: 4, maxLanes: 8 };

function setUnit(word) {
  for (const e of document.querySelectorAll('.unit')) e.textContent = word;
}

function leaveRecording() {
  state.recording = null;
  state.track = null;
  setUnit('region');
  $('center').classList.remove('recording-mode');
  $('recording-view').hidden = true;
}

function findTrack(id) {
  return state.recording ? state.recording.tracks.find((t) => t.id === id) || null : null;
}

// What the manifest carries for the track's regions: the later of the track's own decision and a region decision.
function effectiveTrackDecision(t) {
  const a = t.decision, b = t.regionDecision;
  if (!a) return b || null;
  if (!b) return a;
  return a.revision >= b.revision ? a : b;
}

function trackDecided(t) {
  return !!effectiveTrackDecision(t) || !!(state.frame && state.frame.decision);
}

function fmtTime(t) {
  if (t === null || t === undefined) return '–';
  if (Math.abs(t) < 60) return t.toFixed(2) + ' s';
  const m = Math.floor(t / 60);
  return m + ':' + (t - 60 * m).toFixed(1).padStart(4, '0');
}

function showRecording(frame, recording) {
  frame.order = frame.regions.slice();
  state.frame = frame;
  state.region = null;
  state.recording = recording;
  state.track = null;
  // Lanes: a track goes to the first lane whose last bar ended before it starts, so bars never hide each other.
  recording.tracks.sort((a, b) => (a.firstTime - b.firstTime) || (a.id - b.id));
  const ends = [];
  for (const t of recording.tracks) {
    let lane = ends.findIndex((e) => e < t.firstTime);
    if (lane < 0 && ends.length < STRIP.maxLanes) { lane = ends.length; ends.push(t.lastTime); }
    else if (lane < 0) lane = ends.indexOf(Math.min(...ends));
    ends[lane] = Math.max(ends[lane] === undefined ? -Infinity : ends[lane], t.lastTime);
    t.lane = lane;
  }
  recording.lanes = Math.max(1, ends.length);
  $('center').classList.add('recording-mode');
  setUnit('track');
  $('recording-view').hidden = false;
  const span = recording.endSeconds - recording.startSeconds;
  $('frame-title').textContent = (state.index + 1) + ' of ' + state.frames.length + ': ' + frame.frameId + ' · recording ' +
    fmtTime(recording.startSeconds) + '–' + fmtTime(recording.endSeconds) + ' (' + fmtTime(span) + ', ' + recording.framesScored + ' frames scored, ' +
    recording.sampling + ') · threshold ' + fmtScore(recording.threshold) + ' · ' + recording.tracks.length +
    (recording.tracks.length === 1 ? ' track' : ' tracks') + ' kept of ' + recording.tracksFound + ' found (seen in ≥ ' + recording.minimumFramesSeen + ' frames)';
  renderRecording();
}

function renderRecording() {
  renderTimeline();
  renderTrackTable();
  renderTrackDetail();
  renderDecision();
  renderRecordingProgress();
}

function renderTimeline() {
  const r = state.recording;
  const g = $('timeline');
  g.replaceChildren();
  if (!r) return;
  const width = Math.max(320, Math.round(g.getBoundingClientRect().width || 800));
  const lanesTop = STRIP.top + STRIP.plot + STRIP.axis;
  const height = lanesTop + r.lanes * (STRIP.lane + STRIP.laneGap) + 4;
  g.setAttribute('viewBox', '0 0 ' + width + ' ' + height);
  g.setAttribute('height', String(height));
  const t0 = r.startSeconds, t1 = r.endSeconds > r.startSeconds ? r.endSeconds : r.startSeconds + 1;
  const x = (t) => STRIP.left + (width - STRIP.left - STRIP.right) * (t - t0) / (t1 - t0);
  const finite = r.scores.filter((v) => v !== null);
  let lo = Math.min(r.threshold, ...finite), hi = Math.max(r.threshold, ...finite);
  if (!(hi > lo)) { lo -= 1; hi += 1; }
  const pad = (hi - lo) * 0.08;
  lo -= pad; hi += pad;
  const y = (v) => STRIP.top + STRIP.plot * (1 - (v - lo) / (hi - lo));
  const parts = [];

  // Time ticks at a round step giving about one label per 90 px.
  const steps = [0.1, 0.2, 0.5, 1, 2, 5, 10, 15, 30, 60, 120, 300, 600, 1800, 3600];
  const want = (t1 - t0) / Math.max(2, (width - STRIP.left - STRIP.right) / 90);
  const step = steps.find((s) => s >= want) || steps[steps.length - 1];
  for (let t = Math.ceil(t0 / step) * step; t <= t1 + 1e-9; t += step) {
    const px = x(t);
    parts.push(svg('line', { class: 'grid', x1: px, x2: px, y1: STRIP.top, y2: height - 2 }));
    const label = svg('text', { class: 'tick', x: px, y: STRIP.top + STRIP.plot + 14, 'text-anchor': 'middle' });
    label.textContent = fmtTime(Math.round(t * 1000) / 1000);
    parts.push(label);
  }
  parts.push(svg('line', { class: 'axis', x1: STRIP.left, x2: width - STRIP.right, y1: STRIP.top + STRIP.plot, y2: STRIP.top + STRIP.plot }));
  for (const [v, cls] of [[hi - pad, 'tick'], [lo + pad, 'tick']]) {
    const label = svg('text', { class: cls, x: STRIP.left - 4, y: y(v) + 4, 'text-anchor': 'end' });
    label.textContent = fmtScore(v);
    parts.push(label);
  }

  // Frame score: the stretches above the threshold filled, the line over them, the threshold dashed.
  const pts = [];
  for (let i = 0; i < r.times.length; i++) if (r.scores[i] !== null) pts.push([x(r.times[i]), y(r.scores[i]), r.scores[i]]);
  const yt = y(r.threshold);
  for (let i = 0; i < pts.length; i++) {
    if (pts[i][2] <= r.threshold) continue;
    let j = i;
    while (j + 1 < pts.length && pts[j + 1][2] > r.threshold) j++;
    const xa = i > 0 ? cross(pts[i - 1], pts[i], r.threshold) : pts[i][0];
    const xb = j + 1 < pts.length ? cross(pts[j], pts[j + 1], r.threshold) : pts[j][0];
    const poly = [[xa, yt]].concat(pts.slice(i, j + 1).map((p) => [p[0], p[1]]), [[xb, yt]]);
    if (xb - xa < 2) poly.push([xa + 2, yt]);
    parts.push(svg('polygon', { class: 'above', points: poly.map((p) => p[0].toFixed(1) + ',' + p[1].toFixed(1)).join(' ') }));
    i = j;
  }
  parts.push(svg('polyline', { class: 'score-line', points: pts.map((p) => p[0].toFixed(1) + ',' + p[1].toFixed(1)).join(' ') }));
  parts.push(svg('line', { class: 'threshold', x1: STRIP.left, x2: width - STRIP.right, y1: yt, y2: yt }));
  const tl = svg('text', { class: 'threshold-label', x: width - STRIP.right - 2, y: yt - 3, 'text-anchor': 'end' });
  tl.textContent = 'threshold ' + fmtScore(r.threshold);
  parts.push(tl);

  // Tracks: one bar per track from its first to its last sighting, in lanes under the plot.
  for (let lane = 0; lane < r.lanes; lane++) {
    parts.push(svg('rect', { class: 'lane-band', x: STRIP.left, width: width - STRIP.left - STRIP.right,
      y: lanesTop + lane * (STRIP.lane + STRIP.laneGap), height: STRIP.lane }));
  }
  const picked = findTrack(state.track);
  if (picked) parts.push(svg('line', { class: 'best-mark', x1: x(picked.bestTime), x2: x(picked.bestTime), y1: STRIP.top, y2: height - 2 }));
  for (const t of r.tracks) {
    const decision = effectiveTrackDecision(t);
    const verdict = decision ? decision.verdict : (state.frame.decision ? state.frame.decision.verdict : null);
    const bx = x(t.firstTime), bw = Math.max(5, x(t.lastTime) - bx), by = lanesTop + t.lane * (STRIP.lane + STRIP.laneGap);
    if (state.track === t.id) parts.push(svg('rect', { class: 'track-halo', x: bx - 2, y: by - 2, width: bw + 4, height: STRIP.lane + 4, rx: 4 }));
    const bar = svg('rect', {
      class: 'track-bar' + (verdict ? ' ' + verdict : '') + (state.track === t.id ? ' selected' : ''),
      x: bx, y: by, width: bw, height: STRIP.lane, rx: 3, tabindex: '0', role: 'button', 'data-track': t.id,
      'aria-label': 'Track ' + t.id + ', ' + fmtTime(t.firstTime) + ' to ' + fmtTime(t.lastTime) + ', highest score ' + fmtScore(t.maxScore) +
        ', ' + (verdict ? VERDICT_TEXT[verdict] : 'undecided'),
    });
    const title = svg('title', {});
    title.textContent = 'Track ' + t.id + ': ' + fmtTime(t.firstTime) + '–' + fmtTime(t.lastTime) + ', ' + t.framesSeen + ' frames, highest ' + fmtScore(t.maxScore);
    bar.append(title);
    bar.addEventListener('click', (ev) => { ev.stopPropagation(); selectTrack(t.id); });
    bar.addEventListener('keydown', (ev) => { if (ev.key === 'Enter' || ev.key === ' ') { ev.preventDefault(); selectTrack(t.id); } });
    parts.push(bar);
    const label = String(t.id), room = label.length * 7 + 6;
    const inside = bw >= room;
    const num = svg('text', { class: 'track-num' + (inside && verdict !== 'false-alarm' && verdict !== 'unsure' ? '' : ' outside'),
      x: inside ? bx + 3 : bx + bw + 3, y: by + STRIP.lane - 3 });
    num.textContent = label;
    parts.push(num);
  }
  g.append(...parts);
  g.dataset.tracks = String(r.tracks.length);
  g.dataset.points = String(pts.length);
}

// Where the segment a–b crosses the threshold, in x.
function cross(a, b, threshold) {
  const f = (threshold - a[2]) / ((b[2] - a[2]) || 1);
  return a[0] + (b[0] - a[0]) * Math.min(1, Math.max(0, f));
}

function renderTrackTable() {
  const body = $('track-table').tBodies[0];
  body.replaceChildren();
  for (const t of state.recording.tracks) {
    const d = effectiveTrackDecision(t);
    const cls = classCell(t.classBeneathName || String(t.classBeneath));
    const tr = el('tr', { 'data-track': String(t.id) }, [
      el('td', { text: String(t.id) }),
      el('td', { class: 'num', text: fmtTime(t.firstTime) + '–' + fmtTime(t.lastTime) }),
      el('td', { class: 'num', text: String(t.framesSeen) }),
      el('td', { class: 'num', text: fmtScore(t.maxScore) }),
      el('td', { class: 'num', text: fmtScore(t.meanScore) }),
      cls,
      el('td', { class: 'decision' }, [verdictSpan(d ? d.verdict : null)]),
    ]);
    if (state.track === t.id) tr.classList.add('selected');
    tr.addEventListener('click', () => selectTrack(t.id));
    body.append(tr);
  }
}

async function renderTrackDetail() {
  const t = findTrack(state.track);
  const facts = $('track-facts');
  const img = $('track-best');
  facts.replaceChildren();
  if (!t) {
    img.removeAttribute('src');
    img.removeAttribute('data-track');
    $('track-mark').hidden = true;
    img.alt = '';
    $('track-caption').textContent = state.recording.tracks.length ? 'Pick a track to see its best frame.' : 'No track was kept in this recording.';
    return;
  }
  const own = t.decision, region = t.regionDecision, now = effectiveTrackDecision(t);
  const rows = [
    ['First seen', fmtTime(t.firstTime)],
    ['Last seen', fmtTime(t.lastTime) + ' (' + fmtTime(t.lastTime - t.firstTime) + ' in view)'],
    ['Frames seen', String(t.framesSeen)],
    ['Highest score', fmtScore(t.maxScore) + ' at ' + fmtTime(t.bestTime)],
    ['Mean score', fmtScore(t.meanScore)],
    ['Class beneath', t.classBeneathName],
    ['Decision', now ? VERDICT_TEXT[now.verdict] + (now === own ? ' (on the track)' : ' (on its region, written later)') : 'none'],
  ];
  if (own && region && now === own) rows.push(['Region decision', VERDICT_TEXT[region.verdict] + ' (earlier; the track decision wins)']);
  for (const [k, v] of rows) facts.append(el('dt', { text: k }), el('dd', { text: v }));
  $('track-caption').textContent = 'Track ' + t.id + ': best frame ' + t.bestFrameId + ' at ' + fmtTime(t.bestTime) + ', with its overlay.';
  if (img.dataset.track === String(t.id)) { placeTrackMark(); return; }
  $('track-mark').hidden = true;
  const frame = state.frame;
  try {
    const url = await objectUrl(t.best);
    if (state.frame !== frame || state.track !== t.id) return;
    img.onload = placeTrackMark;
    img.src = url;
    img.dataset.track = String(t.id);
    img.alt = 'Best frame of track ' + t.id + ' with its overlay';
  } catch (e) {
    setStatus('The best frame of track ' + t.id + ' could not be loaded: ' + e.message, true);
  }
}

// The track's box in its best frame, drawn over the shown image (scaled as the image is; the PNG's legend strip is below the frame).
function placeTrackMark() {
  const t = findTrack(state.track);
  const img = $('track-best'), mark = $('track-mark');
  if (!t || !img.naturalWidth || img.dataset.track !== String(t.id)) { mark.hidden = true; return; }
  const scale = Math.min(img.clientWidth / img.naturalWidth, img.clientHeight / img.naturalHeight);
  const b = t.bestBox;
  mark.style.left = (img.offsetLeft + img.clientLeft + b.x * scale - 3) + 'px';
  mark.style.top = (img.offsetTop + img.clientTop + b.y * scale - 3) + 'px';
  mark.style.width = (b.width * scale + 6) + 'px';
  mark.style.height = (b.height * scale + 6) + 'px';
  mark.hidden = false;
}

function renderRecordingProgress() {
  const r = state.recording;
  const decided = r.tracks.filter((t) => effectiveTrackDecision(t)).length;
  const p = $('frame-progress');
  p.textContent = state.frame.decision ? 'This recording is reviewed (whole-recording verdict); ' + decided + ' of ' + r.tracks.length + ' tracks decided on their own.'
    : r.tracks.length === 0 ? 'No tracks kept: decide on the whole recording.'
    : decided === r.tracks.length ? 'This recording is reviewed: all ' + decided + ' tracks decided.'
    : decided + ' of ' + r.tracks.length + ' tracks decided in this recording.';
  p.dataset.decided = String(decided);
}

function selectTrack(id) {
  if (!state.recording) return;
  state.track = id;
  renderRecording();
  const row = $('track-table').querySelector('tr.selected');
  if (row) row.scrollIntoView({ block: 'nearest' });
}

function stepTrack(delta) {
  const tracks = state.recording.tracks;
  if (tracks.length === 0) return;
  const at = state.track === null ? -1 : tracks.findIndex((t) => t.id === state.track);
  let next = at + delta;
  if (at === -1 && delta < 0) next = tracks.length - 1;
  if (next < 0 || next >= tracks.length) { selectTrack(null); return; }
  selectTrack(tracks[next].id);
}

function nextUndecidedTrack(saved) {
  const tracks = state.recording.tracks;
  const at = state.track === null ? -1 : tracks.findIndex((t) => t.id === state.track);
  for (let k = 1; k <= tracks.length; k++) {
    const t = tracks[(at + k + tracks.length) % tracks.length];
    if (!trackDecided(t)) { selectTrack(t.id); return; }
  }
  nextFrameToReview(saved);
}

function applyTrackDecision(frame, id, stored) {
  const r = state.recording && state.frame === frame ? state.recording : null;
  const t = r ? r.tracks.find((x) => x.id === id) : null;
  if (t) t.decision = stored;
  // The recording's line carries its tracks as regions: keep the list's count in step with the manifest.
  const region = frame.regions.find((x) => x.id === id);
  if (region) region.decision = t ? effectiveTrackDecision(t) : stored;
}

// ---- Decisions

// The target of a verdict: a region, or on a recording a track ('t' + id); null is the whole frame or recording.
function targetKey() {
  if (state.recording) return state.track === null ? null : 't' + state.track;
  return state.region;
}

function targetName(target) {
  return target === null ? (state.recording ? 'Recording' : 'Frame')
    : typeof target === 'string' ? 'Track ' + target.slice(1) : 'Region ' + target;
}

function draftKey() {
  const t = targetKey();
  return state.batchId + '/' + state.frame.seq + '/' + (t === null ? 'frame' : t);
}

function decisionPath() {
  const base = '/v1/batches/' + encodeURIComponent(state.batchId) + '/frames/' + state.frame.seq;
  const t = targetKey();
  return t === null ? base + '/decision' : typeof t === 'string' ? base + '/tracks/' + t.slice(1) + '/decision' : base + '/regions/' + t + '/decision';
}

async function decide(verdict, advance) {
  if (!state.frame || state.dropped) return;
  const note = $('note').value.trim();
  const target = targetKey();
  const frame = state.frame;
  try {
    const stored = await apiJson(decisionPath(), {
      method: 'PUT',
      headers: { 'Content-Type': 'application/json' },
      body: JSON.stringify({ verdict: verdict, note: note || null }),
    });
    state.drafts.delete(state.batchId + '/' + frame.seq + '/' + (target === null ? 'frame' : target));
    applyDecision(frame, target, stored);
    const saved = targetName(target) + ': ' + VERDICT_TEXT[verdict] + ' (saved).';
    setStatus(saved);
    if (advance && $('advance-toggle').checked && state.frame === frame && targetKey() === target) {
      if (target === null) await nextFrameToReview(saved); else nextUndecided(saved);
    }
  } catch (e) {
    setStatus('Not saved: ' + e.message, true);
  }
}

// Verdicts wait for the one before: with "go to the next undecided" on, a key pressed while the last verdict is
// still being saved belongs to the region or track the page moves on to, not to the one being saved.
let verdictChain = Promise.resolve();
function queueVerdict(verdict) {
  verdictChain = verdictChain.then(() => decide(verdict, true));
  return verdictChain;
}

async function withdraw() {
  if (!state.frame || state.dropped) return;
  const target = targetKey();
  const frame = state.frame;
  try {
    await api(decisionPath(), { method: 'DELETE' });
    applyDecision(frame, target, null);
    setStatus(targetName(target) + ': decision withdrawn.');
  } catch (e) {
    setStatus('Not withdrawn: ' + e.message, true);
  }
}

function applyDecision(frame, target, stored) {
  if (target === null) frame.decision = stored;
  else if (typeof target === 'string') applyTrackDecision(frame, Number(target.slice(1)), stored);
  else {
    const r = frame.regions.find((x) => x.id === target);
    if (r) r.decision = stored;
  }
  const item = state.frames.find((f) => f.seq === frame.seq);
  if (item) {
    item.verdict = frame.decision ? frame.decision.verdict : null;
    item.regionsDecided = frame.regions.filter((r) => r.decision).length;
  }
  if (state.frame === frame && state.recording) renderRecording();
  else if (state.frame === frame) {
    renderBoxes();
    renderRegionTable();
    renderDecision();
  }
  renderFrameList();
  refreshOverview(false).catch((e) => setStatus('Summary not refreshed: ' + e.message, true));
}

// ---- Dropped frame: scored on the spot, shown like a batch frame, not stored.

async function scoreDropped(file) {
  const model = $('drop-model').value;
  if (!model) { setStatus('No usable model to score with.', true); return; }
  const form = new FormData();
  form.append('frame', file, file.name);
  form.append('artifacts', 'heat,mask');
  setStatus('Scoring ' + file.name + ' with ' + model + '…');
  const token = ++state.loadToken;
  try {
    const answer = await apiJson('/v1/models/' + encodeURIComponent(model) + '/frames', { method: 'POST', body: form });
    if (token !== state.loadToken) return;
    const report = answer.report;
    releaseUrls();
    const sourceUrl = URL.createObjectURL(file);
    state.urls.push(sourceUrl);
    const [heat, mask] = await Promise.all([objectUrl(report.artifacts.heat), objectUrl(report.artifacts.mask)]);
    state.dropped = true;
    state.index = -1;
    renderFrameList();
    showFrame({
      seq: null,
      frameId: file.name,
      width: report.frame.width,
      height: report.frame.height,
      frameScore: report.frameScore,
      threshold: report.threshold,
      scoreRange: report.scoreRange,
      heatScale: report.heatScale,
      decision: null,
      regions: report.regions.map((r) => ({
        id: r.id, box: r.box, area: r.area, maxScore: r.maxScore, meanScore: r.meanScore,
        classBeneath: r.classBeneath, classBeneathName: r.classBeneathName, onSurface: r.onSurface, decision: null,
      })),
    }, sourceUrl, heat, mask);
    setStatus('Scored ' + file.name + ' with ' + model + '.');
  } catch (e) {
    setStatus(file.name + ' could not be scored: ' + e.message, true);
  }
}

// ---- Files that need the key: fetched, then opened or saved from memory.

async function openProtected(path) {
  try {
    const blob = await (await api(path)).blob();
    const url = URL.createObjectURL(new Blob([blob], { type: 'text/plain' }));
    window.open(url, '_blank');
  } catch (e) {
    setStatus('Could not open ' + path + ': ' + e.message, true);
  }
}

async function exportManifest() {
  if (!state.batchId) return;
  try {
    const text = await (await api('/v1/batches/' + encodeURIComponent(state.batchId) + '/manifest')).text();
    const lines = text.split('\n').filter((l) => l.length > 0).length;
    const url = URL.createObjectURL(new Blob([text], { type: 'application/x-ndjson' }));
    const a = el('a', { href: url, download: state.batchId + '-manifest.jsonl' });
    document.body.append(a);
    a.click();
    a.remove();
    setTimeout(() => URL.revokeObjectURL(url), 10000);
    setStatus('Manifest re-exported with decisions: ' + lines + ' lines (also written to the batch folder).');
  } catch (e) {
    setStatus('Manifest not exported: ' + e.message, true);
  }
}

// ---- Keyboard

function onKey(e) {
  const t = e.target;
  if (t && (t.tagName === 'TEXTAREA' || t.tagName === 'SELECT' || (t.tagName === 'INPUT' && t.type !== 'checkbox' && t.type !== 'range'))) return;
  if (e.ctrlKey || e.metaKey || e.altKey) return;
  const k = e.key;
  // A list or table the reader reached with the keyboard scrolls with the arrow and paging keys, as any scrolling
  // box does; after a click on a row the keys keep their meaning on the page.
  if (t && t.dataset && t.dataset.scrollKeys === 'yes' && SCROLL_KEYS.has(k)) return;
  let handled = true;
  if (state.recording && (k === 'n' || k === 'ArrowRight')) stepTrack(1);
  else if (state.recording && (k === 'b' || k === 'ArrowLeft')) stepTrack(-1);
  else if (state.recording && k === 'f') selectTrack(null);
  else if (k === 'j' || k === 'ArrowDown') { if (state.index + 1 < state.frames.length) openFrame(state.index + 1); }
  else if (k === 'k' || k === 'ArrowUp') { if (state.index > 0) openFrame(state.index - 1); }
  else if (k === 'n') stepRegion(1);
  else if (k === 'b') stepRegion(-1);
  else if (k === 'f') selectRegion(null);
  else if (k === 'z' || k === 'Escape') zoomTo(null);
  else if (k === 'h') { $('heat-toggle').checked = !$('heat-toggle').checked; applyLayers(); }
  else if (k === 'o') { $('outline-toggle').checked = !$('outline-toggle').checked; applyLayers(); }
  else if (k === 'u') nextUndecided();
  else if (k === 'U') nextFrameToReview();
  else if (k === '1' || k === '2' || k === '3') queueVerdict(VERDICTS[Number(k) - 1]);
  else handled = false;
  if (handled) e.preventDefault();
}

// A running batch gains frames: the list and counts are fetched again, the open frame stays open.
async function refreshAll() {
  await loadBatches();
  if (!state.batchId) return;
  const seq = state.frame && !state.dropped ? state.frame.seq : null;
  try {
    await refreshOverview(true);
  } catch (e) {
    setStatus('Batch ' + state.batchId + ' could not be refreshed: ' + e.message, true);
    return;
  }
  const at = seq === null ? -1 : state.frames.findIndex((f) => f.seq === seq);
  if (at >= 0) {
    state.index = at;
    renderFrameList();
  } else if (state.frames.length > 0 && !state.dropped) {
    await openFrame(0);
  }
  setStatus('Refreshed: ' + state.frames.length + ' scored frames.');
}

// ---- Start

function readHash() {
  const p = new URLSearchParams(location.hash.slice(1));
  const seq = p.get('seq');
  return { batch: p.get('batch'), seq: seq === null ? undefined : Number(seq) };
}

function wire() {
  $('key-form').addEventListener('submit', async (e) => {
    e.preventDefault();
    const key = $('key-input').value.trim();
    if (key) sessionStorage.setItem(KEY_STORE, key); else sessionStorage.removeItem(KEY_STORE);
    $('key-input').value = '';
    $('key-form').hidden = true;
    setStatus('');
    await start();
  });
  $('batch-select').addEventListener('change', (e) => openBatch(e.target.value));
  $('reload-batches').addEventListener('click', refreshAll);
  $('heat-toggle').addEventListener('change', applyLayers);
  $('heat-opacity').addEventListener('input', applyLayers);
  $('outline-toggle').addEventListener('change', applyLayers);
  $('zoom-reset').addEventListener('click', () => zoomTo(null));
  $('stage').addEventListener('click', () => zoomTo(null));
  for (const b of document.querySelectorAll('.verdicts button[data-verdict]')) b.addEventListener('click', () => queueVerdict(b.dataset.verdict));
  $('next-undecided').addEventListener('click', () => nextUndecided());
  $('next-frame-todo').addEventListener('click', () => nextFrameToReview());
  $('withdraw').addEventListener('click', withdraw);
  $('save-note').addEventListener('click', () => {
    const t = currentTarget();
    if (t && t.decision) decide(t.decision.verdict);
  });
  $('export').addEventListener('click', exportManifest);
  $('note').addEventListener('input', () => { if (state.frame && !state.dropped) state.drafts.set(draftKey(), $('note').value); });
  // Leaving the note saves it when the target already has a verdict; otherwise it goes with the verdict.
  $('note').addEventListener('change', () => {
    const t = currentTarget();
    if (t && t.decision && !state.dropped && ($('note').value.trim() || null) !== (t.decision.note || null)) decide(t.decision.verdict);
  });
  watchOverflow($('class-scroll'));
  let pointerDown = false;
  document.addEventListener('pointerdown', (e) => {
    pointerDown = true;
    const box = e.target.closest && e.target.closest('[role="region"]');
    if (box) box.dataset.scrollKeys = 'no';
  }, true);
  document.addEventListener('keydown', () => { pointerDown = false; }, true);
  document.addEventListener('focusin', (e) => {
    if (e.target.getAttribute && e.target.getAttribute('role') === 'region') e.target.dataset.scrollKeys = pointerDown ? 'no' : 'yes';
    pointerDown = false;
  });
  document.addEventListener('keydown', onKey);
  window.addEventListener('resize', () => { if (state.recording) { renderTimeline(); placeTrackMark(); } });

  const zone = $('drop-zone');
  zone.addEventListener('dragover', (e) => { e.preventDefault(); zone.classList.add('over'); });
  zone.addEventListener('dragleave', () => zone.classList.remove('over'));
  zone.addEventListener('drop', (e) => {
    e.preventDefault();
    zone.classList.remove('over');
    const file = e.dataTransfer && e.dataTransfer.files[0];
    if (file) scoreDropped(file);
  });
  $('drop-file').addEventListener('change', (e) => {
    const file = e.target.files[0];
    if (file) scoreDropped(file);
    e.target.value = '';
  });
}

async function start() {
  await Promise.all([loadBatches(), loadModels()]);
  const h = readHash();
  if (h.batch) await openBatch(h.batch, h.seq);
  document.body.dataset.ready = 'true';
}

document.addEventListener('DOMContentLoaded', () => {
  wire();
  renderDecision();
  start();
});
