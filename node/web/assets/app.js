// leqnode field status page. Reads the node's read-only JSON endpoints and its live stream,
// and draws its own charts on canvases. No libraries, nothing loaded from outside the node.
'use strict';

(function () {
  const NA = 'not available';
  const HOUR_MS = 3600 * 1000;
  const TRACE_S = 30;

  const state = {
    status: null,
    zone: undefined,   // IANA zone of the node, when it reports one
    seconds: [],       // {t (ms), leq, max, flags}
    trace: [],         // {t (ms), laf}
    lastLive: 0,       // ms of the last level event
    spectrum: null,
  };

  const $ = (id) => document.getElementById(id);

  function css(name) {
    return getComputedStyle(document.documentElement).getPropertyValue(name).trim() || '#888';
  }

  function num(v, digits) {
    return (typeof v === 'number' && isFinite(v)) ? v.toFixed(digits === undefined ? 1 : digits) : null;
  }

  function fmtTime(ms, withSeconds) {
    const opts = { hour: '2-digit', minute: '2-digit', hour12: false };
    if (withSeconds) opts.second = '2-digit';
    if (state.zone) opts.timeZone = state.zone;
    try {
      return new Intl.DateTimeFormat(undefined, opts).format(new Date(ms));
    } catch (e) {
      delete opts.timeZone;
      return new Intl.DateTimeFormat(undefined, opts).format(new Date(ms));
    }
  }

  function fmtDateTime(s) {
    if (!s) return NA;
    const d = new Date(s);
    if (isNaN(d)) return NA;
    const opts = { year: 'numeric', month: 'short', day: '2-digit', hour: '2-digit', minute: '2-digit', hour12: false };
    if (state.zone) opts.timeZone = state.zone;
    try {
      return new Intl.DateTimeFormat(undefined, opts).format(d);
    } catch (e) {
      delete opts.timeZone;
      return new Intl.DateTimeFormat(undefined, opts).format(d);
    }
  }

  function fmtBytes(n) {
    if (typeof n !== 'number' || !isFinite(n) || n <= 0) return n === 0 ? '0 B' : NA;
    const units = ['B', 'kB', 'MB', 'GB', 'TB'];
    let i = 0;
    while (n >= 1000 && i < units.length - 1) { n /= 1000; i++; }
    return (i === 0 ? n.toFixed(0) : n.toFixed(1)) + ' ' + units[i];
  }

  function fmtDuration(s) {
    if (typeof s !== 'number' || !isFinite(s)) return NA;
    const d = Math.floor(s / 86400), h = Math.floor(s % 86400 / 3600), m = Math.floor(s % 3600 / 60);
    if (d > 0) return d + ' d ' + h + ' h';
    if (h > 0) return h + ' h ' + m + ' min';
    return m + ' min ' + Math.floor(s % 60) + ' s';
  }

  // text sets an element's text; a missing value shows "not available".
  function text(el, v) {
    el.textContent = (v === null || v === undefined || v === '') ? NA : String(v);
    el.classList.toggle('na', el.textContent === NA);
  }

  function facts(dl, rows) {
    dl.replaceChildren();
    for (const [k, v] of rows) {
      const dt = document.createElement('dt');
      dt.textContent = k;
      const dd = document.createElement('dd');
      text(dd, v);
      dl.append(dt, dd);
    }
  }

  async function getJSON(path) {
    const r = await fetch(path, { credentials: 'same-origin', cache: 'no-store' });
    if (!r.ok) throw new Error(path + ': HTTP ' + r.status);
    return r.json();
  }

  // ---------- canvas helpers ----------

  // prepare sizes a canvas to its box at the device's pixel ratio and returns a context
  // scaled to CSS pixels, with the box's width and height.
  function prepare(canvas) {
    const dpr = window.devicePixelRatio || 1;
    const w = Math.max(50, canvas.clientWidth), h = Math.max(40, canvas.clientHeight);
    if (canvas.width !== Math.round(w * dpr) || canvas.height !== Math.round(h * dpr)) {
      canvas.width = Math.round(w * dpr);
      canvas.height = Math.round(h * dpr);
    }
    const g = canvas.getContext('2d');
    g.setTransform(dpr, 0, 0, dpr, 0, 0);
    g.clearRect(0, 0, w, h);
    g.font = '11px ' + css('--mono');
    return { g, w, h };
  }

  // niceRange returns a y range in whole 10 dB steps around the values, at least span dB wide.
  function niceRange(vals, span) {
    let lo = Infinity, hi = -Infinity;
    for (const v of vals) {
      if (typeof v === 'number' && isFinite(v)) { lo = Math.min(lo, v); hi = Math.max(hi, v); }
    }
    if (!isFinite(lo)) { lo = 30; hi = 80; }
    lo = Math.floor((lo - 2) / 10) * 10;
    hi = Math.ceil((hi + 2) / 10) * 10;
    while (hi - lo < span) { hi += 5; lo -= 5; }
    return [lo, hi];
  }

  function yGrid(g, x0, x1, y, lo, hi) {
    g.strokeStyle = css('--rule');
    g.fillStyle = css('--muted');
    g.lineWidth = 1;
    g.textAlign = 'right';
    g.textBaseline = 'middle';
    const step = (hi - lo) > 60 ? 20 : 10;
    for (let v = Math.ceil(lo / step) * step; v <= hi; v += step) {
      const py = Math.round(y(v)) + 0.5;
      g.beginPath(); g.moveTo(x0, py); g.lineTo(x1, py); g.stroke();
      g.fillText(String(v), x0 - 4, py);
    }
  }

  // ---------- live level ----------

  function showLive(d) {
    const t = Date.parse(d.time) || Date.now();
    state.lastLive = Date.now();
    const v = num(d.LAF);
    const out = $('live-level');
    out.textContent = v === null ? '--' : v;
    const bar = $('live-bar');
    const frac = v === null ? 0 : Math.min(1, Math.max(0, (d.LAF - 30) / 80));
    bar.style.width = (frac * 100).toFixed(1) + '%';
    state.trace.push({ t, laf: (typeof d.LAF === 'number') ? d.LAF : null });
    while (state.trace.length && state.trace[0].t < t - TRACE_S * 1000) state.trace.shift();
  }

  function drawTrace() {
    const c = $('live-trace');
    const { g, w, h } = prepare(c);
    const pts = state.trace;
    const x0 = 30, x1 = w - 4, y0 = h - 6, y1 = 8;
    const [lo, hi] = niceRange(pts.map(p => p.laf), 20);
    const y = (v) => y0 - (v - lo) / (hi - lo) * (y0 - y1);
    yGrid(g, x0, x1, y, lo, hi);
    if (!pts.length) { c.dataset.points = '0'; return; }
    const tEnd = pts[pts.length - 1].t, tStart = tEnd - TRACE_S * 1000;
    const x = (t) => x0 + (t - tStart) / (TRACE_S * 1000) * (x1 - x0);
    g.strokeStyle = css('--signal');
    g.lineWidth = 2;
    g.beginPath();
    let pen = false, n = 0;
    for (const p of pts) {
      if (p.laf === null) { pen = false; continue; }
      const px = x(p.t), py = y(Math.min(hi, Math.max(lo, p.laf)));
      if (pen) g.lineTo(px, py); else g.moveTo(px, py);
      pen = true; n++;
    }
    g.stroke();
    c.dataset.points = String(n);
  }

  // ---------- last hour ----------

  function addSecond(s) {
    const t = Date.parse(s.start);
    if (isNaN(t)) return;
    const arr = state.seconds;
    if (arr.length && t <= arr[arr.length - 1].t) {
      if (arr.some(p => p.t === t)) return;
      arr.push({ t, leq: s.LAeq, max: s.LAFmax, flags: (s.flags || []).join('|') });
      arr.sort((a, b) => a.t - b.t);
    } else {
      arr.push({ t, leq: s.LAeq, max: s.LAFmax, flags: (s.flags || []).join('|') });
    }
    const cut = Date.now() - HOUR_MS - 60000;
    while (arr.length && arr[0].t < cut) arr.shift();
    const l = num(s.LAeq);
    text($('last-second'), 'Last second (' + fmtTime(t, true) + '): LAeq ' + (l === null ? '--' : l) +
      ' dB, LAFmax ' + (num(s.LAFmax) || '--') + ' dB' + (s.flags && s.flags.length ? ' · ' + s.flags.join(', ') : ''));
  }

  const flagged = /clipped|overload|dropped/;

  function drawHour() {
    const c = $('hour-chart');
    const { g, w, h } = prepare(c);
    const now = Date.now();
    const tStart = now - HOUR_MS;
    const pts = state.seconds.filter(p => p.t >= tStart);
    const x0 = 34, x1 = w - 8, y0 = h - 22, y1 = 6;
    const [lo, hi] = niceRange(pts.flatMap(p => [p.leq, p.max]), 30);
    const y = (v) => y0 - (Math.min(hi, Math.max(lo, v)) - lo) / (hi - lo) * (y0 - y1);
    const x = (t) => x0 + (t - tStart) / HOUR_MS * (x1 - x0);
    yGrid(g, x0, x1, y, lo, hi);
    // time ticks every 10 minutes
    g.fillStyle = css('--muted');
    g.strokeStyle = css('--rule');
    g.textAlign = 'center';
    g.textBaseline = 'top';
    const tick = 10 * 60000;
    for (let t = Math.ceil(tStart / tick) * tick; t <= now; t += tick) {
      const px = Math.round(x(t)) + 0.5;
      g.beginPath(); g.moveTo(px, y1); g.lineTo(px, y0 + 3); g.stroke();
      if (px > x0 + 14 && px < x1 - 14) g.fillText(fmtTime(t, false), px, y0 + 6);
    }
    const line = (key, colour, width) => {
      g.strokeStyle = colour;
      g.lineWidth = width;
      g.beginPath();
      let prev = null;
      for (const p of pts) {
        const v = p[key];
        if (typeof v !== 'number') { prev = null; continue; }
        if (prev && p.t - prev.t <= 1500) g.lineTo(x(p.t), y(v)); else g.moveTo(x(p.t), y(v));
        prev = p;
      }
      g.stroke();
    };
    line('max', css('--lead-soft'), 1);
    line('leq', css('--lead'), 1.5);
    g.fillStyle = css('--bad');
    let marks = 0;
    for (const p of pts) {
      if (flagged.test(p.flags)) { g.fillRect(x(p.t) - 1, y0 - 8, 2, 8); marks++; }
    }
    c.dataset.points = String(pts.length);
    c.dataset.flagged = String(marks);
    if (!pts.length) {
      g.fillStyle = css('--muted');
      g.textAlign = 'center';
      g.textBaseline = 'middle';
      g.fillText('no second records in the last hour', (x0 + x1) / 2, (y0 + y1) / 2);
      text($('hour-note'), 'No second records stored in the last hour.');
    } else {
      const cover = Math.min(100, pts.length / 36).toFixed(0);
      $('hour-note').textContent = pts.length + ' seconds stored (' + cover + ' % of the hour), ' + marks + ' flagged.';
      $('hour-note').classList.remove('na');
    }
  }

  // ---------- spectrum ----------

  function drawSpectrum() {
    const c = $('spectrum');
    const { g, w, h } = prepare(c);
    const sp = state.spectrum;
    const bands = (sp && sp.third_octave_LZeq) || [];
    const x0 = 34, x1 = w - 6, y0 = h - 22, y1 = 6;
    const vals = bands.map(b => b.LZeq);
    let [lo, hi] = niceRange(vals, 40);
    lo = Math.max(lo, hi - 80);
    const y = (v) => y0 - (Math.min(hi, Math.max(lo, v)) - lo) / (hi - lo) * (y0 - y1);
    yGrid(g, x0, x1, y, lo, hi);
    if (!bands.length) {
      g.fillStyle = css('--muted');
      g.textAlign = 'center';
      g.textBaseline = 'middle';
      g.fillText('no spectrum stored', (x0 + x1) / 2, (y0 + y1) / 2);
      c.dataset.bands = '0';
      text($('spectrum-note'), 'No spectrum stored: the node keeps none, or has not finished a minute yet.');
      return;
    }
    const bw = (x1 - x0) / bands.length;
    g.fillStyle = css('--lead');
    let drawn = 0;
    bands.forEach((b, i) => {
      if (typeof b.LZeq !== 'number') return;
      const top = y(b.LZeq);
      g.fillRect(x0 + i * bw + 1, top, Math.max(1, bw - 2), y0 - top);
      drawn++;
    });
    // label the octave midbands (every third band from 31.5 Hz)
    g.fillStyle = css('--muted');
    g.textAlign = 'center';
    g.textBaseline = 'top';
    const octave = new Set(['31.5', '63', '125', '250', '500', '1000', '2000', '4000', '8000', '16000']);
    bands.forEach((b, i) => {
      if (!octave.has(b.nominal_hz)) return;
      if (bw < 9 && !['31.5', '125', '500', '2000', '8000'].includes(b.nominal_hz)) return;
      const label = b.nominal_hz.length > 3 && b.nominal_hz.endsWith('000') ? b.nominal_hz.slice(0, -3) + 'k' : b.nominal_hz;
      g.fillText(label, x0 + (i + 0.5) * bw, y0 + 6);
    });
    c.dataset.bands = String(drawn);
    const when = sp.start ? fmtTime(Date.parse(sp.start), true) : NA;
    $('spectrum-note').textContent = (sp.record === 'second' ? 'Second' : 'Minute') + ' from ' + when +
      ': LZeq ' + (num(sp.LZeq) || '--') + ' dB, LAeq ' + (num(sp.LAeq) || '--') + ' dB; bands in Hz.';
    $('spectrum-note').classList.remove('na');
  }

  // ---------- status, calibration, condition, self-verification ----------

  function showStatus(st) {
    state.status = st;
    if (st.time_zone && st.time_zone !== state.zone) state.zone = st.time_zone;
    $('node-id').textContent = st.node_id ? 'Node ' + st.node_id : 'leqnode node';
    text($('site'), st.site || null);
    if (st.site) document.title = 'leqnode · ' + (st.node_id || '') + ' · ' + st.site;
    $('token-warning').classList.toggle('hidden', !(st.token_required && location.protocol === 'http:'));
    const c = st.counters || {};
    facts($('node-info'), [
      ['Software', st.version],
      ['Audio source', st.source],
      ['Sample rate', st.sample_rate_Hz ? st.sample_rate_Hz + ' Hz' : null],
      ['Running for', st.uptime_s ? fmtDuration(st.uptime_s) : null],
      ['Seconds stored', st.counters ? c.seconds : null],
      ['Minutes stored', st.counters ? c.minutes : null],
      ['Gaps', st.counters ? c.gaps : null],
      ['Time zone', st.time_zone],
      ['Store file', st.store ? st.store.path : null],
    ]);
  }

  function item(list, stateName, label, value) {
    const li = document.createElement('li');
    const dot = document.createElement('span');
    dot.className = 'dot dot-' + stateName;
    const l = document.createElement('span');
    l.className = 'label';
    l.textContent = label;
    const v = document.createElement('span');
    text(v, value);
    li.append(dot, l, v);
    li.dataset.state = stateName;
    list.append(li);
  }

  function showHealth(hd) {
    const list = $('health');
    list.replaceChildren();
    const fl = hd.last_hour.flagged_seconds || {};
    const clipped = (fl.clipped || 0), over = (fl.overload || 0);
    item(list, clipped + over ? 'bad' : 'ok', 'Clipping',
      clipped + over ? clipped + ' s clipped, ' + over + ' s overload in the last hour' : 'none in the last hour');
    const c = hd.counters;
    const dropS = fl.dropped || 0;
    if (c) {
      item(list, c.dropped_samples || dropS ? 'warn' : 'ok', 'Dropped samples',
        c.dropped_samples + ' since start (' + c.queue_overflows + ' queue overflows), ' + dropS + ' s flagged in the last hour');
    } else {
      item(list, dropS ? 'warn' : 'na', 'Dropped samples', dropS ? dropS + ' s flagged in the last hour' : null);
    }
    const lh = hd.last_hour;
    const cov = lh.expected_seconds ? Math.min(100, 100 * lh.seconds / lh.expected_seconds) : 0;
    item(list, cov >= 99 ? 'ok' : cov >= 90 ? 'warn' : 'bad', 'Coverage',
      lh.seconds + ' of ' + lh.expected_seconds + ' s stored in the last hour (' + cov.toFixed(0) + ' %)');
    const gaps = hd.gaps_last_day || [];
    item(list, gaps.length ? 'warn' : 'ok', 'Gaps',
      gaps.length ? gaps.length + ' in the last day, latest: ' + gaps[gaps.length - 1].reason : 'none in the last day');
    if (hd.clock_synced === true) item(list, 'ok', 'Clock', 'synchronised');
    else if (hd.clock_synced === false) item(list, 'bad', 'Clock', 'not synchronised: time stamps may be wrong');
    else item(list, 'na', 'Clock', null);
    const s = hd.store;
    if (s) {
      const frac = s.max_bytes ? s.used_bytes / s.max_bytes : 0;
      const st = s.recovered ? 'bad' : frac > 0.9 ? 'warn' : 'ok';
      item(list, st, 'Storage', fmtBytes(s.used_bytes) + ' used of ' + fmtBytes(s.max_bytes) + ' cap (file ' +
        fmtBytes(s.file_bytes) + ')' + (s.recovered ? '; a damaged file was moved aside: ' + s.recovered : ''));
    } else {
      item(list, 'na', 'Storage', null);
    }
    const m = hd.mqtt;
    if (m) {
      const st = !m.connected ? 'bad' : m.pending > 120 ? 'warn' : 'ok';
      item(list, st, 'MQTT backlog', (m.connected ? 'connected' : 'not connected') + ', ' + m.pending +
        ' records waiting' + (m.last_error && !m.connected ? ' (' + m.last_error + ')' : ''));
    } else {
      item(list, 'na', 'MQTT backlog', null);
    }
    const snap = hd.snapshot;
    if (snap) {
      const parts = [];
      if (typeof snap.disk_free_mb === 'number') parts.push(fmtBytes(snap.disk_free_mb * 1e6) + ' disk free');
      if (typeof snap.temperature_c === 'number') parts.push(snap.temperature_c.toFixed(0) + ' °C');
      if (typeof snap.cpu_percent === 'number') parts.push(snap.cpu_percent.toFixed(0) + ' % CPU');
      if (snap.stuck || snap.silent) parts.push(snap.stuck ? 'input stuck' : 'input silent');
      item(list, snap.stuck || snap.silent ? 'bad' : 'ok', 'Board', parts.join(', ') + ' (' + snap.age_s + ' s ago)');
    }
  }

  function showCalibrations(cd) {
    const st = cd.state;
    const checks = cd.checks || [];
    const last = checks[0];
    facts($('cal-state'), [
      ['Sensitivity', st ? num(st.sensitivity_dBFS, 2) + ' dBFS at 94 dB' : null],
      ['Nominal', st && st.nominal_dBFS ? num(st.nominal_dBFS, 2) + ' dBFS' : null],
      ['Set by', st ? (st.set_at ? 'check of ' + fmtDateTime(st.set_at) : 'nominal value (no check applied)') : null],
      ['Calibrator on', st ? (st.calibrating ? 'yes: levels flagged calibrating' : 'no') : null],
      ['Last check', last ? fmtDateTime(last.time) + ' (' + cd.days_since_last_check + ' days ago)' : 'none stored'],
      ['Last deviation', last ? (last.deviation_dB >= 0 ? '+' : '') + num(last.deviation_dB, 2) + ' dB' + (last.passed ? '' : ' (failed)') : null],
    ]);
    const body = $('cal-table').tBodies[0];
    body.replaceChildren();
    for (const k of checks.slice(0, 12)) {
      const tr = document.createElement('tr');
      const cells = [fmtDateTime(k.time), num(k.measured_dB, 2) + ' / ' + num(k.reference_dB, 1),
        (k.deviation_dB >= 0 ? '+' : '') + num(k.deviation_dB, 2),
        (k.passed ? 'passed' : 'failed') + (k.applied ? ', applied' : '') + (k.flags.includes('suspect') ? ', drift' : '')];
      for (const v of cells) {
        const td = document.createElement('td');
        td.textContent = v;
        tr.append(td);
      }
      body.append(tr);
    }
    if (!checks.length) {
      const tr = document.createElement('tr');
      const td = document.createElement('td');
      td.colSpan = 4;
      td.className = 'na';
      td.textContent = 'no calibration checks stored';
      tr.append(td);
      body.append(tr);
    }
  }

  function showSelfCheck(st) {
    const box = $('selfcheck');
    box.replaceChildren();
    const sc = st.self_check;
    const p = document.createElement('p');
    if (!sc) {
      p.className = 'na';
      p.textContent = NA + ': no self-verification reported by the node';
      box.append(p);
      return;
    }
    const tag = document.createElement('span');
    tag.className = 'tag ' + (sc.pass ? 'tag-ok' : 'tag-bad');
    tag.textContent = sc.pass ? 'passed' : 'failed';
    p.append(tag, ' ' + sc.checks + ' checks at ' + (sc.sample_rate_Hz || '?') + ' Hz, ' + fmtDateTime(sc.at));
    box.append(p);
    if (sc.error) {
      const e = document.createElement('p');
      e.textContent = sc.error;
      box.append(e);
    }
    if (sc.failed && sc.failed.length) {
      const ul = document.createElement('ul');
      for (const f of sc.failed.slice(0, 10)) {
        const li = document.createElement('li');
        li.textContent = f;
        ul.append(li);
      }
      box.append(ul);
    }
  }

  // ---------- wiring ----------

  function setConn(cls, label) {
    const c = $('conn');
    c.className = 'tag ' + cls;
    c.textContent = label;
  }

  async function refreshStatus() {
    try {
      const [st, hd, cd] = await Promise.all([getJSON('/api/status'), getJSON('/api/health'), getJSON('/api/calibrations')]);
      showStatus(st);
      showHealth(hd);
      showCalibrations(cd);
      showSelfCheck(st);
    } catch (e) {
      setConn('tag-bad', 'node unreachable');
    }
  }

  async function refreshSpectrum() {
    try {
      state.spectrum = await getJSON('/api/spectrum');
      drawSpectrum();
    } catch (e) { /* shown by the connection tag */ }
  }

  async function loadHour() {
    try {
      const d = await getJSON('/api/seconds?minutes=60');
      for (const s of d.seconds) addSecond(s);
      drawHour();
    } catch (e) {
      text($('hour-note'), null);
    }
  }

  function connect() {
    const es = new EventSource('/api/live');
    es.addEventListener('open', () => setConn('tag-ok', 'live'));
    es.addEventListener('error', () => setConn('tag-warn', 'reconnecting'));
    es.addEventListener('level', (ev) => showLive(JSON.parse(ev.data)));
    es.addEventListener('second', (ev) => { addSecond(JSON.parse(ev.data)); hourDirty = true; });
  }

  let hourDirty = false;

  function frame() {
    drawTrace();
    const age = state.lastLive ? (Date.now() - state.lastLive) / 1000 : null;
    $('live-age').textContent = age === null ? 'waiting for the node' : age < 2 ? 'live' : 'no update for ' + age.toFixed(0) + ' s';
    $('clock').textContent = fmtTime(Date.now(), true);
  }

  function start() {
    connect();
    loadHour();
    refreshStatus();
    refreshSpectrum();
    setInterval(frame, 250);
    setInterval(() => { if (hourDirty) { hourDirty = false; drawHour(); } }, 1000);
    setInterval(refreshSpectrum, 2000);
    setInterval(refreshStatus, 10000);
    setInterval(drawHour, 30000); // the time axis moves on even without new seconds
    let resizeTimer = 0;
    window.addEventListener('resize', () => {
      clearTimeout(resizeTimer);
      resizeTimer = setTimeout(() => { drawTrace(); drawHour(); drawSpectrum(); }, 100);
    });
  }

  if (document.readyState === 'loading') document.addEventListener('DOMContentLoaded', start);
  else start();
})();
