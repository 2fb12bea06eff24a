// lifeledger status page: one component (trends, histograms, alarms,
// material data).
'use strict';

(() => {
  const { $, esc } = LL;
  const name = decodeURIComponent(location.pathname.replace(/^\/component\//, '').replace(/\/+$/, ''));
  const WINDOW_KEY = 'lifeledger.trend-window';
  const MAX_TREND_POINTS = 50000;
  let snap = null, comp = null, alarms = null, trend = null, trendErr = null;
  // This component's alarm history from the durable journal; null until
  // (or unless) it loads, then the snapshot's recent events stand in.
  let history = null;
  const HISTORY_LIMIT = 20;
  let material = null, materialGrade = null, materialErr = null;
  let windowMs = 0;
  let yscale = 'data';
  const SCALE_KEY = 'lifeledger.trend-scale';
  let shelveOpen = null, shelveReason = '', shelveHours = 8;
  let tick = 0;
  // While printing (between beforeprint and afterprint).
  let printing = false;
  // A chart's drawing width on paper, CSS px: half the printable width of
  // A4 or letter with 12 mm margins, less the gap.
  const PRINT_CHART_W = 340;

  try {
    windowMs = Number(sessionStorage.getItem(WINDOW_KEY) || 0) || 0;
    yscale = sessionStorage.getItem(SCALE_KEY) === 'levels' ? 'levels' : 'data';
  } catch (e) { windowMs = 0; }

  document.title = name + ' · ' + document.title.replace(/^Component · /, '');
  $('component-name').textContent = name;
  $('trend-link').href = '/api/components/' + encodeURIComponent(name) + '/trend';
  $('history-link').href = '/api/components/' + encodeURIComponent(name) + '/alarms';

  const has = (c, key) => Object.keys(c.hours_to_threshold || {}).some((k) => k.startsWith(key + '.'));

  // The alarm levels of an index: the component's own when the API gives
  // them, else the documented defaults (and the page says so).
  function levels(key) {
    const own = comp && comp.thresholds && comp.thresholds[key];
    return { levels: own || LL.DEFAULT_LEVELS[key] || {}, own: !!own };
  }
  function levelLines(key, scale) {
    const { levels: l, own } = levels(key);
    const out = [];
    for (const sev of ['advisory', 'warning', 'critical']) {
      if (LL.num(l[sev]) !== null) out.push({ value: l[sev] * (scale || 1), label: sev, cls: sev, dashed: !own });
    }
    return out;
  }

  function tile(label, value, unit, sub, cls) {
    return '<div class="tile ' + (cls || '') + '"><span class="tile-label">' + esc(label) + '</span>' +
      '<span class="tile-value">' + esc(value) + (unit ? '<small>' + esc(unit) + '</small>' : '') + '</span>' +
      (sub ? '<span class="tile-sub">' + esc(sub) + '</span>' : '') + '</div>';
  }

  // "warning in 12 345 h" for the nearest level not yet reached.
  function nextLevel(c, key) {
    let best = null;
    for (const [k, h] of Object.entries(c.hours_to_threshold || {})) {
      if (!k.startsWith(key + '.') || LL.num(h) === null || h <= 0) continue;
      if (!best || h < best.h) best = { sev: k.slice(key.length + 1), h };
    }
    const reached = (c.levels_reached || {})[key];
    const head = reached ? reached + ' level reached' : 'below all levels';
    return best ? head + '; ' + best.sev + ' in ' + LL.hours(best.h) + ' h' : head;
  }

  function renderFigures() {
    const c = comp;
    const creep = has(c, 'life_fraction'), wear = has(c, 'wear_index');
    const lr = c.levels_reached || {};
    let t = '';
    if (creep) {
      const gone = (c.flags || []).includes('life_exhausted') || (c.flags || []).includes('wall_exhausted');
      t += tile('Life fraction', LL.capped(c.creep_life_fraction, c.display_ceiling), '', (gone ? 'EXHAUSTED · ' : '') + nextLevel(c, 'life_fraction'), gone ? 'critical' : (lr.life_fraction || ''));
      t += tile('Creep strain', LL.capped(c.creep_strain * 100, 100), ' %', has(c, 'creep_strain') ? nextLevel(c, 'creep_strain') : 'no Norton law for this grade', lr.creep_strain || '');
    }
    if (wear) {
      const worn = (c.flags || []).includes('wear_allowance_exhausted');
      t += tile('Wear index', LL.capped(c.wear_index, c.display_ceiling), '', (worn ? 'EXHAUSTED · ' : '') + nextLevel(c, 'wear_index'), worn ? 'critical' : (lr.wear_index || ''));
      t += tile('Wear depth', LL.sig(c.wear_depth_mm, 3), ' mm', c.fretting_regime ? 'regime: ' + String(c.fretting_regime).replace(/_/g, ' ') : '');
    }
    const rem = c.remaining_life_h;
    const pr = c.projection || {};
    // While the recent rate settles the projection takes the larger of the
    // recent and the design rate; say so, with the hours still to go.
    const basis = pr.settling
      ? '; settling: larger of recent and design rate until ' + LL.hours(pr.settling_h) + ' operating h (' + LL.hours(pr.window_h) + ' so far)'
      : ' at the recent rate';
    const rl = LL.remaining(rem, c.exhausted);
    t += tile('Remaining life', rl.text, rl.unit ? ' ' + rl.unit : '',
      (LL.num(rem) === null ? 'no damage accumulating' : rl.sub) + basis, pr.settling ? 'data' : '');
    if (creep) {
      // Amber only while the metal is above design now; hours above design
      // in the past are history (their own card), not a colour.
      // Temperatures and pressures in the units chosen in the top bar.
      const U = LL.F;
      const now = LL.num(c.metal_temperature_c), design = LL.num(c.design_temperature_c);
      const hot = now !== null && design !== null && now > design;
      t += tile('Metal temperature', LL.fixed(U.temperature(c.metal_temperature_c), 1), ' ' + U.units.temperature(), design === null ? '' : (hot ? 'above ' : 'design ') + U.showTemperature(design, 0), hot ? 'warning' : '');
      t += tile('Peak metal temperature', LL.fixed(U.temperature(c.peak_metal_temperature_c), 1), ' ' + U.units.temperature(), 'highest integrated');
      t += tile('Pressure', LL.sig(U.pressure(c.pressure_mpa), 4), ' ' + U.units.pressure(), 'gauge');
      t += tile('Hoop stress', LL.sig(U.stress(c.hoop_stress_mpa), 4), ' ' + U.units.stress(), '');
      t += tile('Damage rate', LL.sig(c.damage_rate_per_h, 3), ' /h', 'recent, life fraction per hour');
      t += tile('In creep range', LL.hours(c.hours_in_creep_range), ' h', 'hours the metal was in the creep range');
      t += tile('Integrated', LL.hours(c.integrated_h), ' h', 'hours in the ledger');
      t += tile('Over design', LL.hours(c.over_design_h), ' h', 'hours above the design temperature, ever');
      t += tile('Extrapolated', LL.hours(c.extrapolated_h), ' h', 'hours outside the material data range');
    } else {
      t += tile('Integrated', LL.hours(c.integrated_h), ' h', '');
    }
    t += tile('Unmonitored', LL.hours(c.unmonitored_h), ' h', 'integrated by the gap policy', c.unmonitored_h > 0 ? 'data' : '');
    $('figures').innerHTML = t;
    $('component-flags').innerHTML = (c.flags && c.flags.length) ? '<span class="muted">Flags</span> ' + LL.flagChips(c.flags) : '';
    // Strain from Norton constants derived from the rupture curve restates
    // the life fraction: say so wherever strain is shown.
    const note = $('strain-note');
    note.textContent = creep && c.creep_strain_note ? 'Creep strain: ' + c.creep_strain_note + '.' : '';
    note.hidden = !note.textContent;
  }

  function renderTitle() {
    const c = comp;
    $('crumb-unit').textContent = '/ unit ' + c.unit + ' / ' + c.component;
    // A part's page shows what the part is tracked for: the rupture curve
    // only for creep parts.
    const creep = has(c, 'life_fraction');
    $('component-sub').textContent = LL.kindLabel(c.kind) + ' · ' + c.material + (creep ? ' · ' + c.curve_basis + ' rupture curve' : '') + ' · integrated to ' + LL.isoUtc(c.integrated_to);
    // Creep-only panels (time at temperature and pressure, the class
    // table) leave the page of a part that is not tracked for creep.
    if (!creep) for (const el of document.querySelectorAll('[data-track="creep"]')) el.remove();
    const a = alarms || {};
    $('component-alarm').innerHTML = LL.sevBadge(a.worst_severity) +
      (a.unacknowledged ? '<span class="pill unack">' + a.unacknowledged + ' unack</span>' : '') +
      (a.shelved ? '<span class="pill">' + a.shelved + ' shelved</span>' : '');
  }

  function renderCharts() {
    const box = $('charts');
    for (const b of document.querySelectorAll('#windows button')) b.classList.toggle('on', Number(b.dataset.window) === windowMs);
    for (const b of document.querySelectorAll('#yscale button')) b.classList.toggle('on', b.dataset.scale === yscale);
    const all = yscale === 'levels';
    if (!comp) return;
    if (!trend) {
      box.innerHTML = '<p class="muted">' + (trendErr ? esc(trendErr) : 'Loading the trend…') + '</p>';
      return;
    }
    const pts = trend.points || [];
    if (!pts.length) {
      box.innerHTML = '<p class="muted">No trend points yet.</p>';
      return;
    }
    const t1 = pts[pts.length - 1].t;
    const t0 = windowMs ? Math.max(pts[0].t, t1 - windowMs) : pts[0].t;
    // Two charts a row on wide screens (control room), one on a laptop;
    // on paper two a row, drawn at the width they print at so that their
    // text keeps its size.
    const cols = printing || box.clientWidth >= 1400 ? 2 : 1;
    box.style.gridTemplateColumns = 'repeat(' + cols + ', minmax(0, 1fr))';
    const width = printing ? PRINT_CHART_W : Math.max(320, (box.clientWidth - (cols - 1) * 10) / cols - 24);
    const creep = has(comp, 'life_fraction'), wear = has(comp, 'wear_index');
    const defs = [];
    if (creep) {
      const tl = [];
      if (LL.num(comp.design_temperature_c) !== null) {
        tl.push({ value: comp.design_temperature_c, label: 'design', cls: 'design' });
        const od = comp.thresholds && comp.thresholds.over_design_temperature_k;
        for (const sev of ['advisory', 'warning', 'critical']) {
          if (od && LL.num(od[sev]) !== null && od[sev] > 0) tl.push({ value: comp.design_temperature_c + od[sev], label: sev, cls: sev });
        }
      }
      defs.push({ key: 'metal_temperature_c', title: 'Metal temperature', unit: '°C', fmt: (v) => v.toFixed(1), levels: tl, cls: 's-temp', state: true });
      defs.push({ key: 'pressure_mpa', title: 'Pressure', unit: 'MPa', fmt: (v) => LL.sig(v, 4), cls: 's-press', state: true });
      defs.push({ key: 'hoop_stress_mpa', title: 'Hoop stress', unit: 'MPa', fmt: (v) => LL.sig(v, 4), cls: 's-stress', state: true });
      defs.push({ key: 'creep_life_fraction', title: 'Creep life fraction', unit: '', fmt: LL.frac, levels: levelLines('life_fraction'), floor0: all, cls: 's-life' });
      if (has(comp, 'creep_strain')) {
        defs.push({ key: 'creep_strain', title: 'Creep strain', unit: '%', scale: 100, fmt: LL.frac, levels: levelLines('creep_strain', 100), floor0: all, cls: 's-strain' });
      }
    }
    if (wear) {
      defs.push({ key: 'wear_index', title: 'Wear index', unit: '', fmt: LL.frac, levels: levelLines('wear_index'), floor0: all, cls: 's-wear' });
      // The contact's own inputs, where its model uses them (null otherwise).
      defs.push({ key: 'wear_load_n', title: 'Normal load', unit: 'N', fmt: (v) => LL.sig(v, 4), cls: 's-press', input: true });
      defs.push({ key: 'wear_sliding_speed_mm_s', title: 'Sliding speed', unit: 'mm/s', fmt: (v) => LL.sig(v, 4), cls: 's-stress', input: true });
      defs.push({ key: 'wear_slip_mm', title: 'Slip amplitude', unit: 'µm', scale: 1000, fmt: (v) => LL.sig(v, 4), cls: 's-stress', input: true });
      defs.push({ key: 'wear_frequency_hz', title: 'Frequency', unit: 'Hz', fmt: (v) => LL.sig(v, 4), cls: 's-temp', input: true });
    }
    if (comp.fatigue) {
      // Points stored before the ledger had fatigue figures carry null.
      defs.push({ key: 'fatigue_stress_mpa', title: 'Stress at the fatigue location', unit: 'MPa', fmt: (v) => LL.sig(v, 4), cls: 's-stress', fatigue: true });
    }
    const n = pts.filter((p) => p.t >= t0).length;
    let html = '';
    for (const d of defs) {
      const s = d.scale || 1;
      // A point at 0 K is the ledger before its first interval: no
      // temperature, pressure or stress yet.
      let src = d.state ? pts.filter((p) => p.metal_temperature_c > -273) : pts;
      if (d.fatigue || d.input) src = src.filter((p) => LL.num(p[d.key]) !== null);
      const series = src.map((p) => [p.t, p[d.key] * s]);
      if (!series.length) continue;
      const last = series[series.length - 1][1];
      html += '<figure class="chart-card ' + d.cls + '"><figcaption><span class="ct">' + esc(d.title) + '</span>' +
        '<span class="cv">' + esc(d.fmt(last)) + (d.unit ? ' <small>' + esc(d.unit) + '</small>' : '') + '</span></figcaption>' +
        LL.lineChart({ id: 'trend-' + d.key, label: d.title + ' trend', points: series, t0, t1, unit: d.unit, fmt: d.fmt, levels: d.levels, floor0: d.floor0, allLevels: all, width, height: 210, cls: d.cls }) +
        '</figure>';
    }
    html += '<p class="muted small span-all">' + n + ' of ' + pts.length + ' points shown, ' + LL.timeUtc(t0) + ' to ' + LL.timeUtc(t1) + ' ' + LL.esc(LL.timeBase()) + '</p>';
    box.innerHTML = html;
    for (const d of defs) LL.attachHover('trend-' + d.key);
    const own = comp.thresholds && comp.thresholds.life_fraction;
    $('level-note').innerHTML = own
      ? 'Level lines: this component\'s alarm levels (conservative defaults unless set in <code>[component.thresholds]</code>); the governing code sets the limits.'
      : '<span class="warnnote">Level lines at the <b>default levels</b></span> (life fraction 0.3 / 0.5 / 0.7, wear index 0.5 / 0.8, creep strain 0.5 / 1 %): this service does not report the component\'s configured levels.';
  }

  function renderHistograms() {
    const c = comp;
    if (!$('hist-temperature-box')) return; // not a creep part
    const w = Math.max(320, $('hist-temperature-box').clientWidth - 2);
    const design = LL.num(c.design_temperature_c);
    $('hist-temperature-box').innerHTML = LL.histogram({
      id: 'hist-temperature', label: 'Hours at metal temperature', classes: (c.histograms || {}).temperature_c, unit: '°C', width: w, height: 250,
      hot: design === null ? null : (k) => LL.num(k.from) !== null && k.from >= design,
    }) + (design === null ? '' : '<p class="muted small"><span class="key hot"></span> classes at or above the design temperature ' + LL.F.showTemperature(design, 0) + '</p>');
    $('hist-pressure-box').innerHTML = LL.histogram({
      id: 'hist-pressure', label: 'Hours at pressure', classes: (c.histograms || {}).pressure_mpa, unit: 'MPa', width: Math.max(320, $('hist-pressure-box').clientWidth - 2), height: 250,
    });
  }

  // Hours by temperature class (rows) and pressure class (columns), only
  // the temperature classes that hold hours; open classes read "< 500" and
  // "≥ 660".
  function renderClassTable() {
    const box = $('class-table-box');
    if (!box) return; // not a creep part
    const t = (comp.histograms || {}).temperature_pressure;
    if (!t || !t.hours) {
      box.innerHTML = '<p class="muted">No class table from this service.</p>';
      return;
    }
    const label = (edges, i, fmt) => i === 0 ? '< ' + fmt(edges[0])
      : i === edges.length ? '≥ ' + fmt(edges[edges.length - 1]) : fmt(edges[i - 1]) + ' – ' + fmt(edges[i]);
    const tc = (v) => { const x = LL.F.temperature(v); return LL.fixed(x, Number.isInteger(x) ? 0 : 1); };
    const pc = (v) => LL.sig(LL.F.pressure(v), 3);
    const rows = t.hours.map((r, i) => ({ i, r })).filter((x) => x.r.some((h) => h > 0));
    if (!rows.length) {
      box.innerHTML = '<p class="muted">No hours booked yet.</p>';
      return;
    }
    const cols = t.pressure_edges_mpa.length + 1;
    const colSum = new Array(cols).fill(0);
    let h = '<table class="classes" id="class-table"><thead><tr><th>' + esc(LL.F.units.temperature() + ' / ' + LL.F.units.pressure()) + '</th>';
    for (let j = 0; j < cols; j++) h += '<th class="num">' + esc(label(t.pressure_edges_mpa, j, pc)) + '</th>';
    h += '<th class="num">all</th></tr></thead><tbody>';
    for (const { i, r } of rows) {
      let sum = 0;
      h += '<tr><th>' + esc(label(t.temperature_edges_c, i, tc)) + '</th>';
      r.forEach((v, j) => {
        sum += v;
        colSum[j] += v;
        h += '<td class="num' + (v > 0 ? '' : ' zero') + '">' + (v > 0 ? esc(LL.hours(v)) : '·') + '</td>';
      });
      h += '<td class="num total">' + esc(LL.hours(sum)) + '</td></tr>';
    }
    h += '</tbody><tfoot><tr><th>all</th>' + colSum.map((v) => '<td class="num total">' + esc(LL.hours(v)) + '</td>').join('') +
      '<td class="num total">' + esc(LL.hours(colSum.reduce((a, b) => a + b, 0))) + '</td></tr></tfoot></table>';
    box.innerHTML = h;
  }

  function renderAlarms() {
    const box = $('alarms');
    if (box.contains(document.activeElement) && ['INPUT', 'SELECT'].includes(document.activeElement.tagName)) return; // typing a reason
    $('alarm-mode').textContent = LL.canCommand() ? 'operator: acknowledge and shelve enabled' : 'read-only';
    const recs = ((alarms && alarms.alarms) || []).slice();
    if (!recs.length) {
      box.innerHTML = '<p class="muted">No alarm records for this component yet.</p>';
      return;
    }
    const weight = (r) => (r.state === 'normal' ? 0 : 10) + (r.state === 'unacknowledged' || r.state === 'rtn_unacknowledged' ? 5 : 0) + LL.sevRank(r.severity);
    recs.sort((a, b) => weight(b) - weight(a));
    const cmd = LL.canCommand();
    let h = '<table class="alarms"><thead><tr><th>Index</th><th>State</th><th class="num">Value</th><th class="num">Level</th><th>Since</th><th>Notes</th>' + (cmd ? '<th></th>' : '') + '</tr></thead><tbody>';
    for (const r of recs) {
      const key = r.component + '/' + r.index;
      const notes = [];
      if (r.detail) notes.push(r.detail);
      const ra = r.rationale;
      if (ra && r.state !== 'normal') notes.push((ra.class === 'engineering' ? 'engineering alert' : ra.priority + ' priority, respond within ' + ra.time_to_respond_min + ' min') + ': ' + ra.corrective_action);
      if (r.acknowledged_by) notes.push('acknowledged by ' + r.acknowledged_by + (r.acknowledged_ms ? ' at ' + LL.shortUtc(r.acknowledged_ms) : ''));
      if (r.shelve) notes.push('shelved by ' + r.shelve.by + ' until ' + LL.shortUtc(r.shelve.until_ms) + (r.shelve.reason ? ': ' + r.shelve.reason : ''));
      let actions = '';
      if (cmd) {
        if (r.state === 'unacknowledged' || r.state === 'rtn_unacknowledged') actions += '<button type="button" data-act="acknowledge" data-index="' + esc(r.index) + '">Acknowledge</button>';
        if (r.state === 'shelved') actions += '<button type="button" class="ghost" data-act="unshelve" data-index="' + esc(r.index) + '">Unshelve</button>';
        else if (r.state !== 'normal') actions += '<button type="button" class="ghost" data-act="shelve-open" data-index="' + esc(r.index) + '">Shelve…</button>';
      }
      h += '<tr class="st-' + esc(r.state) + ' sev-' + esc(r.severity || 'none') + '">' +
        '<td>' + esc(LL.indexLabel(r.index)) + '</td>' +
        '<td>' + (r.state === 'normal' ? '<span class="muted">normal</span>' : (r.condition ? '' : '<span class="faded">') + LL.sevBadge(r.severity) + (r.condition ? '' : '</span>') + ' <span class="state">' + esc(LL.STATE_LABEL[r.state] || r.state) + '</span>') + '</td>' +
        '<td class="num">' + esc(LL.indexValue(r.index, r.value)) + '</td>' +
        '<td class="num">' + (LL.num(r.threshold) === null ? '<span class="muted">—</span>' : esc(LL.indexValue(r.index, r.threshold))) + '</td>' +
        '<td class="when">' + esc(LL.shortUtc(r.since_ms)) + '</td>' +
        '<td class="notes">' + esc(notes.join('; ')) + '</td>' +
        (cmd ? '<td class="actions">' + actions + '</td>' : '') + '</tr>';
      if (cmd && shelveOpen === key) {
        const choices = shelveChoices();
        if (!choices.includes(shelveHours)) shelveHours = choices.includes(8) ? 8 : choices[choices.length - 1];
        h += '<tr class="shelve-row"><td colspan="7"><form class="shelve-form" data-index="' + esc(r.index) + '">' +
          '<label>Reason for shelving ' + esc(LL.indexLabel(r.index).toLowerCase()) + ' ' +
          '<input type="text" name="reason" required maxlength="200" value="' + esc(shelveReason) + '" placeholder="for example thermocouple replacement"></label>' +
          '<label class="shelve-for">For <select name="duration_h">' +
          choices.map((v) => '<option value="' + v + '"' + (v === shelveHours ? ' selected' : '') + '>' + esc(shelveLabel(v)) + '</option>').join('') +
          '</select></label>' +
          '<button type="submit">Shelve</button><button type="button" class="ghost" data-act="shelve-cancel">Cancel</button></form></td></tr>';
      }
    }
    box.innerHTML = h + '</tbody></table>';
  }

  // Shelve durations offered: common lengths up to the service's maximum
  // (the snapshot's max_shelve_h), and the maximum itself.
  function shelveChoices() {
    const max = LL.maxShelveH;
    const out = [1, 2, 4, 8, 12, 24, 48, 72, 168, 336, 720].filter((h) => h < max);
    out.push(max);
    return out;
  }
  function shelveLabel(h) {
    if (h >= 48 && h % 24 === 0) return (h / 24) + ' days';
    return String(h) + ' h';
  }

  function renderEvents() {
    const evs = history ? history.events
      : (snap.recent_events || []).filter((e) => e.component === name || (e.affects || []).includes(name)).slice(-HISTORY_LIMIT).reverse();
    $('events').innerHTML = evs.length ? evs.map((e) => LL.eventItem(e, false)).join('') : '<li class="muted">No alarm events recorded for this component.</li>';
  }

  async function loadHistory() {
    try {
      history = await LL.api('/api/components/' + encodeURIComponent(name) + '/alarms?limit=' + HISTORY_LIMIT);
    } catch (e) {
      history = null;
    }
  }

  function sourced(label, s, fmt) {
    if (!s) return '';
    return '<tr><th>' + esc(label) + '</th><td class="num">' + fmt(s.value) + '</td><td class="source">' + esc(s.source) + '</td></tr>';
  }
  function renderMaterial() {
    const box = $('material');
    if (materialErr) { box.innerHTML = '<p class="muted">' + esc(materialErr) + '</p>'; return; }
    if (!material) return;
    const m = material;
    const k2c = (k) => LL.fixed(k, 0) + ' K (' + LL.fixed(k - 273.15, 0) + ' °C)';
    let h = '<div class="mat-head"><span class="grade">' + esc(m.grade) + '</span>' +
      (m.aliases && m.aliases.length ? '<span class="muted">also ' + esc(m.aliases.join(', ')) + '</span>' : '') +
      (m.description ? '<p>' + esc(m.description) + '</p>' : '') + '</div>';
    // A part not tracked for creep shows no creep data of its grade: its
    // wear constants are the contact's own, in the configuration.
    if (comp && !has(comp, 'life_fraction')) {
      h += '<table class="mat"><thead><tr><th>Quantity</th><th class="num">Value</th><th>Source</th></tr></thead><tbody>';
      h += sourced('Melting point', m.melting_point_k, k2c);
      if (m.hardness_hv) h += sourced('Hardness', m.hardness_hv, (v) => esc(LL.sig(v, 3)) + ' HV');
      h += '</tbody></table><p class="muted small">The wear coefficient, contact area and allowable depth are this contact\'s own, set in its <code>[component.wear]</code> configuration.</p>';
      box.innerHTML = h;
      return;
    }
    h += '<table class="mat"><thead><tr><th>Quantity</th><th class="num">Value</th><th>Source</th></tr></thead><tbody>';
    h += sourced('Melting point', m.melting_point_k, k2c);
    if (m.creep_threshold_k) h += sourced('Creep threshold', m.creep_threshold_k, k2c);
    else h += '<tr><th>Creep threshold</th><td class="num">' + k2c(0.4 * m.melting_point_k.value) + '</td><td class="source">rule of thumb 0.4·Tm (no value for this grade)</td></tr>';
    const lm = m.larson_miller;
    if (lm) {
      const coef = (lm.coefficients || []).map((a) => LL.sig(a, 5)).join(', ');
      const min = lm.minimum ? (lm.minimum.rule === 'stress_factor' ? 'minimum = ' + lm.minimum.factor + ' × mean stress' : 'minimum = mean − ' + lm.minimum.offset + ' in log10 t') : '';
      h += '<tr><th>Larson-Miller</th><td class="num">C = ' + esc(LL.sig(lm.constant_c, 4)) + '<br><span class="small">P(log10 σ): ' + esc(coef) + '</span>' +
        '<br><span class="small">' + esc(lm.stress_range_mpa[0] + '–' + lm.stress_range_mpa[1] + ' MPa, ' + LL.fixed(lm.temperature_range_k[0] - 273.15, 0) + '–' + LL.fixed(lm.temperature_range_k[1] - 273.15, 0) + ' °C') + '</span>' +
        (min ? '<br><span class="small">' + esc(min) + '</span>' : '') + '</td><td class="source">' + esc(lm.source) + '</td></tr>';
    }
    const nl = m.norton;
    if (nl) {
      const basis = { measured: 'measured', derived_from_rupture: 'derived from the rupture curve, not measured: strain is not independent evidence', not_stated: 'basis not stated: strain is not independent evidence until it is known' }[nl.basis] || nl.basis || '';
      h += '<tr><th>Norton creep</th><td class="num">A = ' + esc(LL.sig(nl.a_per_h, 3)) + ' /h·MPa⁻ⁿ<br>n = ' + esc(LL.sig(nl.n, 3)) + ', Q = ' + esc(LL.sig(nl.q_j_per_mol / 1000, 4)) + ' kJ/mol</td><td class="source">' + esc(nl.source) +
        (basis ? '<br><span class="' + (nl.basis === 'measured' ? 'muted' : 'warnnote') + '">Basis: ' + esc(basis) + '</span>' : '') + '</td></tr>';
    } else {
      h += '<tr><th>Norton creep</th><td class="num muted">—</td><td class="source muted">no creep strain law for this grade</td></tr>';
    }
    if (m.hardness_hv) h += sourced('Hardness', m.hardness_hv, (v) => esc(LL.sig(v, 3)) + ' HV');
    h += '</tbody></table>';
    const refs = m.reference_rupture_strengths || [];
    if (refs.length) {
      h += '<h3>Reference rupture strengths</h3><table class="mat refs"><thead><tr><th class="num">Temperature</th><th class="num">Time</th><th class="num">Stress</th><th>Source</th></tr></thead><tbody>' +
        refs.map((r) => '<tr><td class="num">' + esc(LL.fixed(r.temperature_c, 0)) + ' °C</td><td class="num">' + esc(LL.group(r.hours)) + ' h</td><td class="num">' + esc(LL.sig(r.stress_mpa, 3)) + ' MPa</td><td class="source">' + esc(r.source) +
          (r.dropped ? '<br><span class="warnnote">Dropped from the fit: ' + esc(r.dropped) + '</span>' : '') + '</td></tr>').join('') +
        '</tbody></table>';
    }
    box.innerHTML = h;
  }

  async function loadMaterial() {
    if (!comp || materialGrade === comp.material) return;
    materialGrade = comp.material;
    try {
      const r = await LL.api('/api/materials/' + encodeURIComponent(comp.material));
      material = r.material;
      materialErr = null;
    } catch (e) {
      materialErr = 'Material ' + comp.material + ': ' + e.message;
      materialGrade = null;
    }
    renderMaterial();
  }

  // The whole trend once, then only the points newer than the newest one
  // held (the store keeps a week or more per component).
  async function loadTrend() {
    const base = '/api/components/' + encodeURIComponent(name) + '/trend';
    try {
      const pts = trend && trend.points;
      if (pts && pts.length) {
        const newer = await LL.api(base + '?since_ms=' + (pts[pts.length - 1].t + 1));
        for (const p of newer.points || []) pts.push(p);
        if (pts.length > MAX_TREND_POINTS) pts.splice(0, pts.length - MAX_TREND_POINTS);
      } else {
        trend = await LL.api(base);
      }
      trendErr = null;
    } catch (e) {
      trend = null;
      trendErr = e.status === 404 ? 'No trend for this component in the ledger.' : 'Trend: ' + e.message;
    }
  }

  function renderAll() {
    LL.renderHeader(snap);
    if (!comp) {
      const retired = (snap.retired_components || []).includes(name);
      $('component-sub').textContent = retired ? 'This component is kept in the ledger but no longer configured.' : 'No component of this name in the ledger.';
      $('charts').innerHTML = '';
      $('material').innerHTML = '';
      return;
    }
    renderTitle();
    renderFigures();
    renderCharts();
    renderHistograms();
    renderClassTable();
    renderAlarms();
    renderEvents();
    if (typeof LLFatigue !== 'undefined') LLFatigue.render(comp);
  }

  $('windows').addEventListener('click', (ev) => {
    const b = ev.target.closest('button[data-window]');
    if (!b) return;
    windowMs = Number(b.dataset.window);
    try { sessionStorage.setItem(WINDOW_KEY, String(windowMs)); } catch (e) { /* fine */ }
    renderCharts();
  });
  $('yscale').addEventListener('click', (ev) => {
    const b = ev.target.closest('button[data-scale]');
    if (!b) return;
    yscale = b.dataset.scale;
    try { sessionStorage.setItem(SCALE_KEY, yscale); } catch (e) { /* fine */ }
    renderCharts();
  });
  $('alarms').addEventListener('click', async (ev) => {
    const b = ev.target.closest('button[data-act]');
    if (!b) return;
    const act = b.dataset.act;
    const index = b.dataset.index;
    if (act === 'shelve-open') { shelveOpen = name + '/' + index; shelveReason = ''; renderAlarms(); const i = document.querySelector('.shelve-form input'); if (i) i.focus(); return; }
    if (act === 'shelve-cancel') { shelveOpen = null; document.activeElement.blur(); renderAlarms(); return; }
    b.disabled = true;
    if (await LL.command({ action: act, component: name, index })) refreshSoon();
    b.disabled = false;
  });
  $('alarms').addEventListener('input', (ev) => { if (ev.target.name === 'reason') shelveReason = ev.target.value; });
  $('alarms').addEventListener('change', (ev) => { if (ev.target.name === 'duration_h') shelveHours = Number(ev.target.value); });
  $('alarms').addEventListener('submit', async (ev) => {
    ev.preventDefault();
    const f = ev.target;
    const reason = f.reason.value.trim();
    if (!reason) return;
    const hours = Number(f.duration_h.value);
    if (!(hours > 0 && hours <= LL.maxShelveH)) return;
    if (await LL.command({ action: 'shelve', component: name, index: f.dataset.index, duration_h: hours, reason })) {
      shelveOpen = null; shelveReason = '';
      document.activeElement.blur();
      refreshSoon();
    }
    renderAlarms();
  });
  LL.onOperatorChange = () => { if (comp) renderAlarms(); };
  // Time base and units chosen in the top bar: redraw at once.
  LL.onDisplayChange(() => { if (comp) renderAll(); });

  // Printing: charts redrawn for the paper, and back after.
  const onPrint = (on) => {
    if (printing === on) return;
    printing = on;
    if (comp) renderCharts();
  };
  window.addEventListener('beforeprint', () => onPrint(true));
  window.addEventListener('afterprint', () => onPrint(false));
  if (window.matchMedia) {
    const mq = window.matchMedia('print');
    if (mq.addEventListener) mq.addEventListener('change', (e) => onPrint(e.matches));
  }

  let resizeTimer = null;
  window.addEventListener('resize', () => {
    clearTimeout(resizeTimer);
    resizeTimer = setTimeout(() => { if (comp) { renderCharts(); renderHistograms(); } }, 150);
  });

  async function refresh() {
    try {
      snap = await LL.api('/api/components');
      comp = (snap.components || []).find((c) => c.component === name) || null;
      alarms = (snap.alarms || []).find((a) => a.component === name) || null;
      if (comp && (tick % 3 === 0 || !trend)) await loadTrend();
      if (comp) await loadHistory();
      tick++;
      renderAll();
      loadMaterial();
    } catch (e) {
      LL.updated(e);
    }
  }
  function refreshSoon() { setTimeout(refresh, 400); }

  LL.poll(refresh);
})();
