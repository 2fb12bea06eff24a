// lifeledger status page: shared helpers (formatting, header, operator
// token, alarm commands, SVG charts). No libraries, no network beyond the
// service's own JSON API.
'use strict';

const LL = (() => {
  const POLL_MS = 2000;
  const SEV_RANK = { critical: 3, warning: 2, advisory: 1 };
  const DEFAULT_LEVELS = {
    life_fraction: { advisory: 0.3, warning: 0.5, critical: 0.7 },
    creep_strain: { advisory: null, warning: 0.005, critical: 0.01 },
    wear_index: { advisory: null, warning: 0.5, critical: 0.8 },
  };
  const INDEX_LABEL = {
    creep_life_fraction: 'Creep life fraction',
    creep_strain: 'Creep strain',
    wear_index: 'Wear index',
    metal_temperature_over_design: 'Metal temperature above design',
    damage_rate: 'Damage rate',
    hours_to_critical: 'Hours to critical life fraction',
    sensor_stale: 'Sensor stale',
    sensor_out_of_range: 'Sensor out of range',
    sensor_bad_quality: 'Sensor bad quality',
    service_health: 'Service health',
    fatigue_usage: 'Fatigue usage',
    replica_bounds: 'Replica class bounds',
    creep_fatigue_index: 'Creep-fatigue index',
  };
  const CONDITION_INDEX = new Set(['sensor_stale', 'sensor_out_of_range', 'sensor_bad_quality', 'service_health', 'replica_bounds']);
  const FLAG_LABEL = {
    stress_below_data_range: 'stress below data range',
    stress_above_data_range: 'stress above data range',
    temperature_below_data_range: 'temperature below data range',
    temperature_above_data_range: 'temperature above data range',
    unmonitored_hours: 'unmonitored hours',
    over_design_temperature: 'over design temperature',
    wall_exhausted: 'wall exhausted',
    life_exhausted: 'life exhausted',
    wear_allowance_exhausted: 'wear allowance exhausted',
    fatigue_curve_temperature_exceeded: 'fatigue curve used above its temperature',
  };
  const STATE_LABEL = {
    normal: 'normal',
    unacknowledged: 'unacknowledged',
    acknowledged: 'acknowledged',
    rtn_unacknowledged: 'cleared, unacknowledged',
    shelved: 'shelved',
    alert: 'engineering alert',
  };

  // ---------- text and numbers ----------
  function esc(s) {
    return String(s == null ? '' : s)
      .replace(/&/g, '&amp;').replace(/</g, '&lt;').replace(/>/g, '&gt;')
      .replace(/"/g, '&quot;').replace(/'/g, '&#39;');
  }
  const $ = (id) => document.getElementById(id);
  const num = (v) => (typeof v === 'number' && isFinite(v) ? v : null);

  // Numbers, times and units: format.js (LLFormat), served in front of
  // this file. The names stay, so every page keeps working; times follow
  // the time base chosen in the top bar (UTC unless changed).
  const F = LLFormat;
  const { frac, capped, sig, fixed, group, hours, years, pad2 } = F;
  const timeUtc = F.time;
  const isoUtc = F.iso;
  const shortUtc = F.short;
  function kindLabel(k) { return String(k || '').replace(/_/g, ' '); }
  function sevRank(s) { return SEV_RANK[s] || 0; }
  function sevBadge(sev, extra) {
    if (!sev) return '<span class="badge ok">normal</span>';
    return '<span class="badge ' + esc(sev) + '">' + esc(sev) + (extra ? ' ' + esc(extra) : '') + '</span>';
  }
  function flagChips(flags) {
    if (!flags || !flags.length) return '<span class="muted">—</span>';
    return flags.map((f) => '<span class="flag flag-' + esc(f) + '">' + esc(FLAG_LABEL[f] || f.replace(/_/g, ' ')) + '</span>').join(' ');
  }
  function indexLabel(i) { return INDEX_LABEL[i] || String(i).replace(/_/g, ' '); }
  // A value of an alarm index the way people read it.
  function indexValue(index, v) {
    if (CONDITION_INDEX.has(index)) return v === 1 ? 'active' : v === 0 ? 'clear' : '—';
    if (v === 'inf' || v === Infinity) return index === 'hours_to_critical' ? 'not projected' : '∞';
    v = num(v);
    if (v === null) return '—';
    switch (index) {
      case 'creep_strain': return frac(v * 100) + ' %';
      case 'metal_temperature_over_design': return sig(F.temperatureDelta(v), 3) + ' ' + F.units.temperatureDelta();
      case 'damage_rate': return sig(v, 3) + ' /h';
      case 'hours_to_critical': return hours(v) + ' h';
      default: return frac(v);
    }
  }

  // ---------- fetching ----------
  async function api(path) {
    const r = await fetch(path, { cache: 'no-store', headers: { Accept: 'application/json' } });
    if (!r.ok) {
      const e = new Error(path + ': HTTP ' + r.status);
      e.status = r.status;
      throw e;
    }
    return r.json();
  }

  // Run `fn` now and every POLL_MS after it finished (never overlapping).
  function poll(fn, ms) {
    let stopped = false;
    const tick = async () => {
      try { await fn(); } catch (e) { /* shown by the caller */ }
      if (!stopped) setTimeout(tick, ms || POLL_MS);
    };
    tick();
    return () => { stopped = true; };
  }

  // ---------- header ----------
  let lastGood = 0;
  function chip(cls, label, value, title) {
    return '<span class="chip ' + cls + '"' + (title ? ' title="' + esc(title) + '"' : '') + '><i></i>' +
      esc(label) + (value != null ? ' <b>' + esc(value) + '</b>' : '') + '</span>';
  }
  function rejected(snap) {
    const e = snap.engine || {};
    let n = 0;
    for (const k of ['not_finite', 'out_of_range', 'bad_quality', 'duplicate', 'late', 'unknown_tag']) n += e[k] || 0;
    const d = (snap.service && snap.service.decode_rejected) || {};
    for (const k in d) n += d[k] || 0;
    return n;
  }
  function renderHeader(snap) {
    lastGood = Date.now();
    if (snap.plant) {
      $('plant-name').textContent = snap.plant;
    }
    if (snap.caution) $('caution-text').textContent = snap.caution;
    const parts = [];
    parts.push(snap.mqtt_connected ? chip('good', 'MQTT', 'connected') : chip('bad', 'MQTT', 'disconnected'));
    const ob = group(snap.outbox_lines) + ' lines';
    const obTitle = 'Points waiting for the database: ' + group(snap.outbox_bytes) + ' bytes' +
      (snap.outbox_quota_bytes ? ' of a ' + group(snap.outbox_quota_bytes) + ' byte quota' : '');
    parts.push(chip(snap.outbox_lines > 0 ? 'warn' : 'plain', 'Outbox', ob, obTitle));
    parts.push(snap.holding ? chip('bad', 'Intake', 'holding', 'Outbox over quota: intake paused') : chip('good', 'Intake', 'running'));
    const e = snap.engine || {};
    const rj = rejected(snap);
    parts.push(chip(rj > 0 ? 'warn' : 'plain', 'Samples', group(e.accepted || 0) + ' accepted · ' + group(rj) + ' rejected',
      'Rejected: samples or messages not integrated (non-finite, out of range, bad quality, duplicate, late, unknown tag, undecodable)'));
    if (snap.database_configured) {
      const reach = snap.database_reachable;
      parts.push(chip(reach === false ? 'bad' : reach ? 'good' : 'plain', 'Database', reach === false ? 'unreachable' : reach ? 'reachable' : 'unknown'));
    }
    $('service-status').innerHTML = parts.join('');
    if (num(snap.max_shelve_h) !== null && snap.max_shelve_h > 0) maxShelveH = snap.max_shelve_h;
    renderWarnings(snap);
    printHead();
    updated();
  }
  // The snapshot's warnings (configuration, another instance on the status
  // topic) and a refused reload, under the caution: no alarm, but an
  // operator or engineer should know.
  function renderWarnings(snap) {
    const el = $('service-warnings');
    if (!el) return;
    const list = (snap.warnings || []).slice();
    if (snap.reload_refused) list.unshift('configuration reload refused (the running configuration stays): ' + snap.reload_refused);
    el.hidden = !list.length;
    const html = list.length
      ? '<details' + (el.querySelector('details[open]') ? ' open' : '') + '><summary>' + list.length + ' warning' + (list.length > 1 ? 's' : '') +
        ' from the service</summary><ul>' + list.map((w) => '<li>' + esc(w) + '</li>').join('') + '</ul></details>'
      : '';
    if (el.dataset.html !== html) { el.innerHTML = html; el.dataset.html = html; }
  }
  // The printed page's header: plant, what is printed and when.
  function printHead() {
    const el = $('print-head');
    if (!el) return;
    const plant = ($('plant-name') || {}).textContent || '';
    const what = document.body.dataset.page === 'component' ? ($('component-name') || {}).textContent || '' : 'plant overview';
    const d = new Date();
    el.textContent = plant + ' · ' + what + ' · Printed ' + timeUtc(d.getTime()) + ' UTC';
  }
  window.addEventListener('beforeprint', printHead);
  function updated(err) {
    const el = $('updated');
    if (!el) return;
    if (err) {
      const ago = lastGood ? Math.round((Date.now() - lastGood) / 1000) : null;
      el.innerHTML = '<span class="stale">No answer from the service' + (ago !== null ? ' for ' + ago + ' s' : '') + ': ' + esc(err.message || err) + '</span>';
      document.body.classList.add('is-stale');
    } else {
      const d = new Date(lastGood);
      el.textContent = 'Updated ' + pad2(d.getHours()) + ':' + pad2(d.getMinutes()) + ':' + pad2(d.getSeconds()) + ' (local clock), every 2 s';
      document.body.classList.remove('is-stale');
    }
  }

  // ---------- operator token and alarm commands ----------
  const TOKEN_KEY = 'lifeledger.operator-token';
  // Who acknowledges or shelves: kept in this browser for the next visit.
  const NAME_KEY = 'lifeledger.operator-name';
  // The longest shelve the service takes, hours (the snapshot says).
  let maxShelveH = 720;
  let serverReadOnly = null; // null: unknown, true: no token configured
  let onOperatorChange = () => {};
  function token() {
    try { return sessionStorage.getItem(TOKEN_KEY) || ''; } catch (e) { return ''; }
  }
  function setToken(t) {
    try {
      if (t) sessionStorage.setItem(TOKEN_KEY, t); else sessionStorage.removeItem(TOKEN_KEY);
    } catch (e) { /* storage disabled: stay read-only */ }
    renderOperator();
    onOperatorChange();
  }
  function canCommand() { return !!token() && serverReadOnly !== true; }
  function operatorName() {
    try { return (localStorage.getItem(NAME_KEY) || '').trim(); } catch (e) { return ''; }
  }
  function setOperatorName(v) {
    try {
      if (v.trim()) localStorage.setItem(NAME_KEY, v.trim()); else localStorage.removeItem(NAME_KEY);
    } catch (e) { /* storage disabled: asked again next time */ }
  }
  // Asks the service whether it would take `t`, changing nothing.
  async function checkToken(t) {
    try {
      const r = await fetch('/api/operator/check', { cache: 'no-store', headers: { Authorization: 'Bearer ' + t } });
      return r.status;
    } catch (e) {
      return 0;
    }
  }
  function renderOperator() {
    const el = $('operator');
    if (!el) return;
    if (serverReadOnly === true) {
      el.innerHTML = '<span class="chip plain" title="The service has no [http] token_env configured: alarm commands over HTTP are off">read-only</span>';
      return;
    }
    if (token()) {
      const focused = document.activeElement && document.activeElement.id === 'op-name';
      if (focused) return; // typing a name
      el.innerHTML = '<span class="chip good" title="Acknowledge and shelve are enabled for this browser tab">operator</span>' +
        '<label class="op-name">Name <input type="text" id="op-name" maxlength="80" size="14" autocomplete="name" placeholder="who acknowledges" value="' + esc(operatorName()) + '"></label>' +
        '<button type="button" class="ghost" id="op-signout">Forget token</button>';
      $('op-name').oninput = (ev) => setOperatorName(ev.target.value);
      $('op-signout').onclick = () => setToken('');
      return;
    }
    el.innerHTML = '<span class="chip plain">read-only</span>' +
      '<form id="op-form" class="op-form" autocomplete="off">' +
      '<input type="password" id="op-token" placeholder="operator token" aria-label="Operator token" size="14">' +
      '<button type="submit">Enable commands</button></form>';
    $('op-form').onsubmit = async (ev) => {
      ev.preventDefault();
      const v = $('op-token').value.trim();
      if (!v) return;
      // Told at once: a wrong token is not kept.
      const status = await checkToken(v);
      if (status === 204) {
        setToken(v);
        notice('Token accepted: acknowledge and shelve are enabled' + (operatorName() ? '' : '; enter your name beside it'), 'good');
      } else if (status === 401) {
        if ($('op-token')) $('op-token').value = '';
        notice('The token was not accepted: commands stay off.', 'bad');
      } else if (status === 403) {
        serverReadOnly = true;
        renderOperator();
        notice('read-only: the service takes no commands over HTTP', 'bad');
      } else {
        notice('The token could not be checked (' + (status ? 'HTTP ' + status : 'no answer') + '); try again.', 'bad');
      }
    };
  }
  // Find out, without changing anything, whether the server takes commands:
  // with no token configured it answers 403 before reading the body.
  async function probeCommands() {
    try {
      const r = await fetch('/api/alarms/command', { method: 'POST', cache: 'no-store', body: '' });
      serverReadOnly = r.status === 403;
    } catch (e) {
      serverReadOnly = null;
    }
    renderOperator();
    onOperatorChange();
  }
  function notice(text, kind) {
    const el = $('notice');
    if (!el) return;
    el.className = 'notice show ' + (kind || '');
    el.textContent = text;
    clearTimeout(notice.timer);
    notice.timer = setTimeout(() => { el.className = 'notice'; }, 6000);
  }
  async function command(body) {
    // ISA-18.2 asks who acknowledged or shelved: a name, never a default.
    const by = operatorName();
    if (!by) {
      notice('Enter your name (top right, beside the operator token) first: the alarm journal records who acknowledged or shelved.', 'bad');
      const box = $('op-name');
      if (box) box.focus();
      return false;
    }
    body.by = by;
    let r;
    try {
      r = await fetch('/api/alarms/command', {
        method: 'POST',
        cache: 'no-store',
        headers: { 'Content-Type': 'application/json', Authorization: 'Bearer ' + token() },
        body: JSON.stringify(body),
      });
    } catch (e) {
      notice('The command did not reach the service: ' + e.message, 'bad');
      return false;
    }
    const text = (await r.text()).trim();
    if (r.ok) {
      notice(body.action + ' ' + body.component + ' ' + indexLabel(body.index).toLowerCase() + ': accepted', 'good');
      return true;
    }
    if (r.status === 403) {
      serverReadOnly = true;
      setToken('');
      notice('read-only: ' + text, 'bad');
    } else if (r.status === 401) {
      setToken('');
      notice('The token was not accepted: ' + text, 'bad');
    } else {
      notice('Command refused (HTTP ' + r.status + '): ' + text, 'bad');
    }
    return false;
  }

  // ---------- charts (inline SVG) ----------
  function niceStep(span, n) {
    const raw = span / Math.max(1, n);
    const p = Math.pow(10, Math.floor(Math.log10(raw)));
    const m = raw / p;
    return (m <= 1 ? 1 : m <= 2 ? 2 : m <= 2.5 ? 2.5 : m <= 5 ? 5 : 10) * p;
  }
  function ticks(lo, hi, n) {
    const step = niceStep(hi - lo, n);
    const out = [];
    for (let v = Math.ceil(lo / step - 1e-9) * step; v <= hi + step * 1e-9; v += step) out.push(Math.abs(v) < step * 1e-9 ? 0 : v);
    return { step, list: out };
  }
  const tickLabel = F.tick;
  const TIME_STEPS = [60e3, 300e3, 900e3, 1800e3, 3600e3, 3 * 3600e3, 6 * 3600e3, 12 * 3600e3, 86400e3, 2 * 86400e3, 7 * 86400e3, 14 * 86400e3, 30 * 86400e3];
  function timeTicks(t0, t1, n) {
    const span = Math.max(1, t1 - t0);
    let step = TIME_STEPS[TIME_STEPS.length - 1];
    for (const s of TIME_STEPS) if (span / s <= n) { step = s; break; }
    const out = [];
    for (let t = Math.ceil(t0 / step) * step; t <= t1; t += step) out.push(t);
    return { step, list: out };
  }
  const timeTickLabel = F.timeTick;

  const charts = new Map();

  // A line chart. opts: {id, points: [[t, v]...] sorted by t, t0, t1,
  // unit, fmt, levels: [{value, label, cls, dashed}], width, height, floor0}
  function lineChart(opts) {
    // Temperatures and pressures (stresses) in the unit chosen for display.
    const conv = F.converterFor(opts.unit, /stress/.test(opts.id || '') ? 'stress' : 'pressure');
    if (conv) {
      opts = Object.assign({}, opts, {
        unit: conv.unit,
        points: opts.points.map((p) => [p[0], conv.f(p[1])]),
        levels: (opts.levels || []).map((l) => Object.assign({}, l, { value: conv.f(l.value) })),
      });
    }
    const W = Math.max(320, Math.round(opts.width || 800));
    const H = opts.height || 220;
    const m = { l: 76, r: 124, t: 16, b: 30 };
    const pw = W - m.l - m.r, ph = H - m.t - m.b;
    const pts = opts.points.filter((p) => p[0] >= opts.t0 && p[0] <= opts.t1 && num(p[1]) !== null);
    const fmt = opts.fmt || ((v) => sig(v, 4));
    let svg = '<svg class="chart" id="' + esc(opts.id) + '" viewBox="0 0 ' + W + ' ' + H + '" width="' + W + '" height="' + H + '" role="img" aria-label="' + esc(opts.label || opts.id) + '">';
    if (!pts.length) {
      svg += '<text x="' + W / 2 + '" y="' + H / 2 + '" class="empty" text-anchor="middle">No points in this window</text></svg>';
      return svg;
    }
    let lo = Infinity, hi = -Infinity;
    for (const p of pts) { if (p[1] < lo) lo = p[1]; if (p[1] > hi) hi = p[1]; }
    if (opts.floor0 && lo > 0) lo = 0;
    // Levels near the data are brought into view; far ones are marked at the top.
    const span0 = Math.max(hi - lo, Math.abs(hi) * 0.02, 1e-12);
    const levels = (opts.levels || []).filter((l) => num(l.value) !== null);
    const inView = [], above = [], below = [];
    for (const l of levels) {
      if (opts.allLevels || (l.value >= lo - span0 * 0.6 && l.value <= hi + span0 * 0.6)) {
        inView.push(l); lo = Math.min(lo, l.value); hi = Math.max(hi, l.value);
      } else if (l.value > hi) above.push(l); else below.push(l);
    }
    if (hi - lo < 1e-12 * Math.max(1, Math.abs(hi))) {
      const d = Math.abs(hi) * 0.05 || 1;
      lo -= d; hi += d;
      if (opts.floor0 && lo < 0 && pts.every((p) => p[1] >= 0)) lo = 0;
    }
    const padY = (hi - lo) * 0.08;
    if (!(opts.floor0 && lo === 0)) lo -= padY;
    hi += padY;
    const yt = ticks(lo, hi, Math.max(3, Math.round(ph / 45)));
    lo = Math.min(lo, yt.list[0]);
    hi = Math.max(hi, yt.list[yt.list.length - 1]);
    const t0 = opts.t0, t1 = Math.max(opts.t1, opts.t0 + 1);
    const X = (t) => m.l + ((t - t0) / (t1 - t0)) * pw;
    const Y = (v) => m.t + ph - ((v - lo) / (hi - lo)) * ph;

    svg += '<rect class="plot" x="' + m.l + '" y="' + m.t + '" width="' + pw + '" height="' + ph + '"/>';
    for (const v of yt.list) {
      if (v < lo - 1e-12 || v > hi + 1e-12) continue;
      const y = Y(v).toFixed(1);
      svg += '<line class="grid" x1="' + m.l + '" x2="' + (m.l + pw) + '" y1="' + y + '" y2="' + y + '"/>';
      svg += '<text class="tick" x="' + (m.l - 8) + '" y="' + y + '" dy="0.35em" text-anchor="end">' + esc(tickLabel(v, yt.step)) + '</text>';
    }
    const xt = timeTicks(t0, t1, Math.max(2, Math.floor(pw / 110)));
    xt.list.forEach((t, i) => {
      const x = X(t).toFixed(1);
      svg += '<line class="grid v" x1="' + x + '" x2="' + x + '" y1="' + m.t + '" y2="' + (m.t + ph) + '"/>';
      svg += '<text class="tick" x="' + x + '" y="' + (H - 8) + '" text-anchor="middle">' + esc(timeTickLabel(t, xt.step, i === 0)) + '</text>';
    });
    // Level lines, their labels kept apart on the right.
    const labels = [];
    for (const l of inView) {
      const y = Y(l.value);
      svg += '<line class="level ' + esc(l.cls || '') + (l.dashed ? ' dashed' : '') + '" x1="' + m.l + '" x2="' + (m.l + pw) + '" y1="' + y.toFixed(1) + '" y2="' + y.toFixed(1) + '"/>';
      labels.push({ y, text: l.label + ' ' + fmt(l.value), cls: l.cls || '' });
    }
    above.forEach((l) => labels.push({ y: m.t + 6, text: '▲ ' + l.label + ' ' + fmt(l.value), cls: (l.cls || '') + ' off' }));
    below.forEach((l) => labels.push({ y: m.t + ph - 6, text: '▼ ' + l.label + ' ' + fmt(l.value), cls: (l.cls || '') + ' off' }));
    labels.sort((a, b) => a.y - b.y);
    const gapY = 16;
    for (let i = 1; i < labels.length; i++) labels[i].y = Math.max(labels[i].y, labels[i - 1].y + gapY);
    const bottom = m.t + ph + 10;
    if (labels.length && labels[labels.length - 1].y > bottom) {
      labels[labels.length - 1].y = bottom;
      for (let i = labels.length - 2; i >= 0; i--) labels[i].y = Math.min(labels[i].y, labels[i + 1].y - gapY);
    }
    for (const l of labels) {
      svg += '<text class="level-label ' + esc(l.cls) + '" x="' + (m.l + pw + 8) + '" y="' + l.y.toFixed(1) + '" dy="0.35em">' + esc(l.text) + '</text>';
    }
    // The line, broken across gaps much wider than the usual spacing,
    // thinned to at most two points per pixel column (min and max).
    const dts = [];
    for (let i = 1; i < pts.length; i++) dts.push(pts[i][0] - pts[i - 1][0]);
    dts.sort((a, b) => a - b);
    // A gap: wider than five usual spacings and than 5 % of the window.
    const gap = dts.length ? Math.max(dts[Math.floor(dts.length / 2)] * 5, (t1 - t0) * 0.05, 1) : Infinity;
    let d = '', area = '', seg = [], prevT = null;
    const flush = () => {
      if (!seg.length) return;
      d += 'M' + seg.map((p) => p[0].toFixed(1) + ',' + p[1].toFixed(1)).join('L');
      if (seg.length > 1) {
        const base = Y(Math.max(lo, Math.min(hi, 0 >= lo && 0 <= hi ? 0 : lo))).toFixed(1);
        area += 'M' + seg[0][0].toFixed(1) + ',' + base + 'L' + seg.map((p) => p[0].toFixed(1) + ',' + p[1].toFixed(1)).join('L') + 'L' + seg[seg.length - 1][0].toFixed(1) + ',' + base + 'Z';
      }
      seg = [];
    };
    let col = null, cmin = null, cmax = null;
    const pushCol = () => {
      if (col === null) return;
      if (cmin === cmax) seg.push([cmin.x, cmin.y]);
      else if (cmin.t < cmax.t) { seg.push([cmin.x, cmin.y]); seg.push([cmax.x, cmax.y]); }
      else { seg.push([cmax.x, cmax.y]); seg.push([cmin.x, cmin.y]); }
      col = null;
    };
    for (const p of pts) {
      if (prevT !== null && p[0] - prevT > gap) { pushCol(); flush(); }
      prevT = p[0];
      const x = X(p[0]), y = Y(p[1]);
      const c = Math.round(x * 2);
      const q = { x, y, t: p[0] };
      if (c !== col) { pushCol(); col = c; cmin = q; cmax = q; }
      else { if (y > cmin.y) cmin = q; if (y < cmax.y) cmax = q; }
    }
    pushCol(); flush();
    svg += '<path class="area ' + esc(opts.cls || '') + '" d="' + area + '"/>';
    svg += '<path class="line ' + esc(opts.cls || '') + '" d="' + d + '"/>';
    const last = pts[pts.length - 1];
    svg += '<circle class="last ' + esc(opts.cls || '') + '" cx="' + X(last[0]).toFixed(1) + '" cy="' + Y(last[1]).toFixed(1) + '" r="4"/>';
    svg += '<text class="unit" x="' + (m.l - 8) + '" y="' + (m.t - 4) + '" text-anchor="end">' + esc(opts.unit || '') + '</text>';
    svg += '<g class="hover" visibility="hidden"><line class="cross" y1="' + m.t + '" y2="' + (m.t + ph) + '"/><circle r="5"/>' +
      '<rect class="tip" height="24" rx="4"/><text class="tip-text" dy="0.35em"></text></g>';
    svg += '</svg>';
    charts.set(opts.id, { pts, X, Y, m, pw, ph, W, fmt, unit: opts.unit || '' });
    return svg;
  }

  // Crosshair read-out for a chart already in the page.
  function attachHover(id) {
    const el = $(id);
    const c = charts.get(id);
    if (!el || !c) return;
    const g = el.querySelector('g.hover');
    if (!g) return;
    const line = g.querySelector('line'), dot = g.querySelector('circle'), rect = g.querySelector('rect'), text = g.querySelector('text');
    el.addEventListener('mousemove', (ev) => {
      const r = el.getBoundingClientRect();
      const x = ((ev.clientX - r.left) / r.width) * c.W;
      if (x < c.m.l || x > c.m.l + c.pw) { g.setAttribute('visibility', 'hidden'); return; }
      let a = 0, b = c.pts.length - 1;
      while (b - a > 1) { const k = (a + b) >> 1; if (c.X(c.pts[k][0]) < x) a = k; else b = k; }
      const p = Math.abs(c.X(c.pts[a][0]) - x) < Math.abs(c.X(c.pts[b][0]) - x) ? c.pts[a] : c.pts[b];
      const px = c.X(p[0]), py = c.Y(p[1]);
      line.setAttribute('x1', px); line.setAttribute('x2', px);
      dot.setAttribute('cx', px); dot.setAttribute('cy', py);
      text.textContent = timeUtc(p[0]) + '  ' + c.fmt(p[1]) + ' ' + c.unit;
      const w = text.textContent.length * 8.2 + 16;
      const tx = px + w + 12 > c.m.l + c.pw ? px - w - 8 : px + 8;
      const ty = Math.max(c.m.t + 14, Math.min(py - 20, c.m.t + c.ph - 14));
      rect.setAttribute('x', tx); rect.setAttribute('y', ty - 12); rect.setAttribute('width', w);
      text.setAttribute('x', tx + 8); text.setAttribute('y', ty);
      g.setAttribute('visibility', 'visible');
    });
    el.addEventListener('mouseleave', () => g.setAttribute('visibility', 'hidden'));
  }

  // A bar chart of hours per class. opts: {id, classes: [{from, to, hours}],
  // unit, width, height, hot: v => bool (bars to mark)}
  function histogram(opts) {
    let cls = opts.classes || [];
    // Class edges in the unit chosen for display; `hot` sees the original.
    const conv = F.converterFor(opts.unit, 'pressure');
    if (conv) {
      cls = cls.map((c) => ({ from: conv.f(c.from), to: conv.f(c.to), hours: c.hours, orig: c }));
      const hot = opts.hot;
      opts = Object.assign({}, opts, { unit: conv.unit, hot: hot && ((c) => hot(c.orig || c)) });
    }
    let a = cls.findIndex((c) => c.hours > 0);
    let b = cls.length - 1 - [...cls].reverse().findIndex((c) => c.hours > 0);
    const W = Math.max(320, Math.round(opts.width || 600));
    const H = opts.height || 240;
    let svg = '<svg class="chart hist" id="' + esc(opts.id) + '" viewBox="0 0 ' + W + ' ' + H + '" width="' + W + '" height="' + H + '" role="img" aria-label="' + esc(opts.label || opts.id) + '">';
    if (a < 0) {
      return svg + '<text x="' + W / 2 + '" y="' + H / 2 + '" class="empty" text-anchor="middle">No hours recorded yet</text></svg>';
    }
    // One empty class either side for context, where there is one.
    a = Math.max(0, a - 1); b = Math.min(cls.length - 1, b + 1);
    cls = cls.slice(a, b + 1);
    const m = { l: 64, r: 16, t: 18, b: 48 };
    const pw = W - m.l - m.r, ph = H - m.t - m.b;
    const top = Math.max(...cls.map((c) => c.hours));
    const yt = ticks(0, top, 4);
    const hi = Math.max(top, yt.list[yt.list.length - 1]) || 1;
    const bw = pw / cls.length;
    const Y = (v) => m.t + ph - (v / hi) * ph;
    svg += '<rect class="plot" x="' + m.l + '" y="' + m.t + '" width="' + pw + '" height="' + ph + '"/>';
    for (const v of yt.list) {
      const y = Y(v).toFixed(1);
      svg += '<line class="grid" x1="' + m.l + '" x2="' + (m.l + pw) + '" y1="' + y + '" y2="' + y + '"/>';
      svg += '<text class="tick" x="' + (m.l - 8) + '" y="' + y + '" dy="0.35em" text-anchor="end">' + esc(tickLabel(v, yt.step)) + '</text>';
    }
    const every = Math.max(1, Math.ceil(cls.length / Math.max(1, Math.floor(pw / 64))));
    const edge = (v) => (num(v) === null ? '' : Math.abs(v) >= 100 ? v.toFixed(0) : sig(v, 3));
    cls.forEach((c, i) => {
      const x = m.l + i * bw;
      const y = Y(c.hours);
      const name = c.from == null ? '< ' + edge(c.to) : c.to == null ? '≥ ' + edge(c.from) : edge(c.from) + '–' + edge(c.to);
      const hot = opts.hot && opts.hot(c);
      svg += '<rect class="bar' + (hot ? ' hot' : '') + '" x="' + (x + Math.min(2, bw * 0.1)).toFixed(1) + '" y="' + y.toFixed(1) + '" width="' + Math.max(1, bw - Math.min(4, bw * 0.2)).toFixed(1) + '" height="' + Math.max(0, m.t + ph - y).toFixed(1) + '"><title>' + esc(name + ' ' + opts.unit + ': ' + hours(c.hours) + ' h') + '</title></rect>';
      if (i % every === 0) {
        const lab = c.from == null ? '<' + edge(c.to) : edge(c.from);
        svg += '<text class="tick" x="' + x.toFixed(1) + '" y="' + (m.t + ph + 18) + '" text-anchor="middle">' + esc(lab) + '</text>';
      }
    });
    svg += '<text class="unit" x="' + (m.l - 8) + '" y="' + (m.t - 5) + '" text-anchor="end">h</text>';
    svg += '<text class="unit" x="' + (m.l + pw) + '" y="' + (H - 6) + '" text-anchor="end">' + esc(opts.unit) + ' (class lower edge)</text>';
    return svg + '</svg>';
  }

  function eventItem(e, withComponent) {
    const t = Date.parse(e.time);
    const what = e.transition ? e.transition.replace(/_/g, ' ') : '';
    return '<li class="event sev-' + esc(e.severity || 'none') + ' tr-' + esc(e.transition || '') + '">' +
      '<time>' + esc(isNaN(t) ? e.time : timeUtc(t)) + '</time>' +
      (e.severity ? sevBadge(e.severity) : '<span class="badge ok">—</span>') +
      (withComponent ? '<a class="ev-comp" href="/component/' + encodeURIComponent(e.component) + '">' + esc(e.component) + '</a>' : '') +
      '<span class="ev-what">' + esc(what) + '</span>' +
      (e.priority ? '<span class="pill prio-' + esc(e.priority) + '" title="' + esc((e.corrective_action || '') + (e.time_to_respond_min ? ' (respond within ' + e.time_to_respond_min + ' min)' : '')) + '">' +
        esc(e.class === 'engineering' ? 'engineering alert' : e.priority + ' priority') + '</span>' : '') +
      '<span class="ev-msg">' + esc(e.message) + '</span></li>';
  }

  document.addEventListener('DOMContentLoaded', () => { renderOperator(); probeCommands(); });

  return {
    POLL_MS, DEFAULT_LEVELS, esc, $, num, frac, capped, sig, fixed, group, hours, years, timeUtc, shortUtc, isoUtc, kindLabel,
    sevRank, sevBadge, flagChips, indexLabel, indexValue, api, poll, renderHeader, updated,
    token, canCommand, command, notice, set onOperatorChange(f) { onOperatorChange = f; },
    operatorName, get maxShelveH() { return maxShelveH; },
    lineChart, attachHover, histogram, eventItem, STATE_LABEL, CONDITION_INDEX,
    F, remaining: F.remaining, timeBase: F.timeBase, onDisplayChange: F.onPrefs,
  };
})();
