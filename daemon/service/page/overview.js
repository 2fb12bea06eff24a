// lifeledger status page: the plant overview.
'use strict';

(() => {
  const { $, esc } = LL;
  let snap = null;

  // The address keeps the view: #unit=U1&sort=remaining&dir=asc.
  function fromHash(key) {
    const m = new RegExp('(?:^#|&)' + key + '=([^&]*)').exec(location.hash);
    return m ? decodeURIComponent(m[1]) : '';
  }
  function unitFromHash() { return fromHash('unit'); }
  function writeHash() {
    const u = $('unit-filter').value;
    const parts = [];
    if (u) parts.push('unit=' + encodeURIComponent(u));
    if (sortBy) parts.push('sort=' + sortBy, 'dir=' + (sortDir > 0 ? 'asc' : 'desc'));
    history.replaceState(null, '', parts.length ? '#' + parts.join('&') : location.pathname);
  }

  // Everything about one component the table needs, in the API's order:
  // the attention ranking (alarm::attention; README "Which part first").
  function rows(s) {
    const alarms = new Map((s.alarms || []).map((a) => [a.component, a]));
    const fresh = new Map(((s.freshness || {}).components || []).map((f) => [f.component, f]));
    const out = (s.components || []).map((c, i) => ({ c, a: alarms.get(c.component) || {}, f: fresh.get(c.component), rank: LL.num(c.rank) === null ? i + 1 : c.rank }));
    out.sort((x, y) => x.rank - y.rank);
    return out;
  }

  // Sorting by a column header: null is the ranking. Each column sorts by
  // one figure; its first click puts the worst first.
  let sortBy = null, sortDir = 1;
  const SORTS = {
    rank: { get: (r) => r.rank, first: 1 },
    alarm: { get: (r) => LL.sevRank(r.a.worst_severity) * 1e6 + (r.a.unacknowledged || 0) * 1e3 + (r.a.shelved || 0), first: -1 },
    component: { get: (r) => r.c.component, first: 1 },
    life: { get: (r) => (has(r.c, 'life_fraction') ? r.c.creep_life_fraction : null), first: -1 },
    strain: { get: (r) => (has(r.c, 'life_fraction') || has(r.c, 'creep_strain') ? r.c.creep_strain : null), first: -1 },
    wear: { get: (r) => (has(r.c, 'wear_index') ? r.c.wear_index : null), first: -1 },
    worst: { get: (r) => worstIndex(r.c).fraction, first: -1 },
    remaining: { get: (r) => (r.c.exhausted ? 0 : LL.num(r.c.remaining_life_h)), first: 1 },
    unmonitored: { get: (r) => r.c.unmonitored_h, first: -1 },
    age: { get: (r) => (r.f ? LL.num(r.f.data_age_s) : null), first: -1 },
    flags: { get: (r) => (r.c.flags || []).length, first: -1 },
  };
  {
    const k = fromHash('sort');
    if (SORTS[k] && !(k === 'rank' && fromHash('dir') !== 'desc')) {
      sortBy = k;
      sortDir = fromHash('dir') === 'asc' ? 1 : fromHash('dir') === 'desc' ? -1 : SORTS[k].first;
    }
  }
  function sorted(list) {
    if (!sortBy || !SORTS[sortBy]) return list;
    const get = SORTS[sortBy].get;
    // Parts without the figure go last either way; equal ones keep the ranking.
    return list.slice().sort((x, y) => {
      const a = get(x), b = get(y);
      const na = a === null || a === undefined, nb = b === null || b === undefined;
      if (na || nb) return na === nb ? x.rank - y.rank : na ? 1 : -1;
      const c = typeof a === 'string' ? a.localeCompare(b) : a - b;
      return c * sortDir || x.rank - y.rank;
    });
  }
  function renderSortHeads() {
    for (const th of document.querySelectorAll('#components thead th[data-sort]')) {
      const k = th.dataset.sort;
      const on = sortBy === k || (!sortBy && k === 'rank');
      const dir = sortBy === k ? sortDir : 1;
      th.classList.toggle('sorted', on);
      th.setAttribute('aria-sort', on ? (dir > 0 ? 'ascending' : 'descending') : 'none');
      const ind = th.querySelector('.sort-ind');
      if (ind) ind.textContent = on ? (dir > 0 ? '▲' : '▼') : '';
      if (on && sortBy) $('order-note').textContent = 'sorted by ' + th.textContent.replace(/[▲▼]/g, '').toLowerCase() + (dir > 0 ? ', ascending' : ', descending');
    }
    if (!sortBy) $('order-note').textContent = 'needing attention first';
  }

  // The index nearest its own next level (the ranking's third tier, as
  // alarm::attention judges it), for the compact column: name, value shown
  // as the page shows that index, and the fraction of that level.
  function worstIndex(c) {
    let best = { fraction: null, label: '', value: null, key: '', text: '' };
    const lv = (key) => levelsOf(c, key);
    const fromHours = (list) => {
      const o = {};
      for (const x of list || []) o[x.severity] = x.level;
      return o;
    };
    const f = c.fatigue || null;
    const cands = [
      ['life_fraction', 'life fraction', c.creep_life_fraction, has(c, 'life_fraction') && lv('life_fraction'), (v) => LL.capped(v, c.display_ceiling)],
      ['creep_strain', 'creep strain', c.creep_strain, has(c, 'creep_strain') && lv('creep_strain'), (v) => LL.capped(v * 100, 100) + ' %'],
      ['wear_index', 'wear index', c.wear_index, has(c, 'wear_index') && lv('wear_index'), (v) => LL.capped(v, c.display_ceiling)],
      ['fatigue_usage', 'fatigue usage', f && f.fatigue_usage, f && fromHours(f.hours_to_usage), LL.frac],
      ['creep_fatigue_index', 'creep-fatigue index', f && f.creep_fatigue_index, f && fromHours(f.hours_to_combined), LL.frac],
    ];
    for (const [key, label, value, levels, show] of cands) {
      if (!levels || LL.num(value) === null) continue;
      const set = ['advisory', 'warning', 'critical'].map((k) => levels[k]).filter((l) => LL.num(l) !== null && l > 0);
      if (!set.length) continue;
      const next = set.filter((l) => l > value).reduce((m, l) => Math.min(m, l), Infinity);
      const fr = Math.max(0, value) / (isFinite(next) ? next : Math.max(...set));
      if (best.fraction === null || fr > best.fraction) best = { fraction: fr, label, value, key, text: show(value) };
    }
    return best;
  }

  // A bar from 0 to 1 with marks at the levels.
  function meter(v, levels, reached) {
    const w = Math.max(0, Math.min(1, v || 0)) * 100;
    let marks = '';
    for (const k of ['advisory', 'warning', 'critical']) {
      const l = levels && levels[k];
      if (LL.num(l) !== null && l > 0 && l < 1) marks += '<i class="mark ' + k + '" style="left:' + (l * 100).toFixed(1) + '%"></i>';
    }
    return '<span class="meter ' + esc(reached || '') + '"><span class="fill" style="width:' + w.toFixed(2) + '%"></span>' + marks + '</span>';
  }

  function levelsOf(c, key) {
    return (c.thresholds && c.thresholds[key]) || LL.DEFAULT_LEVELS[key];
  }

  function has(c, key) {
    return Object.keys(c.hours_to_threshold || {}).some((k) => k.startsWith(key + '.'));
  }

  function renderUnits(s) {
    const sel = $('unit-filter');
    const units = [...new Set((s.components || []).map((c) => c.unit))].sort();
    const want = sel.value || unitFromHash();
    const have = [...sel.options].slice(1).map((o) => o.value);
    if (have.join('\u0000') !== units.join('\u0000')) {
      sel.innerHTML = '<option value="">All units</option>' + units.map((u) => '<option value="' + esc(u) + '">' + esc(u) + '</option>').join('');
    }
    sel.value = units.includes(want) ? want : '';
  }

  // Alarm-system performance (whole plant): alarms per 10 minutes, with
  // standing, chattering, floods and what is held out of view.
  function kpiTile(k) {
    if (!k) return '';
    const bad = k.alarms_last_10_min > 1 || k.standing >= 5 || (k.chattering || []).length || k.floods_24_h;
    const sub = 'last hour ' + k.alarms_last_hour + ' · standing ' + k.standing + ' · chattering ' + (k.chattering || []).length +
      ' · floods (24 h) ' + k.floods_24_h + ' · shelved ' + k.shelved + ' · out of service ' + k.out_of_service + ' · suppressed ' + k.suppressed;
    return tile('Alarms / 10 min', String(k.alarms_last_10_min), bad ? 'unack' : 'quiet', sub);
  }

  function tile(label, value, cls, sub) {
    return '<div class="tile ' + (cls || '') + '"><span class="tile-label">' + esc(label) + '</span><span class="tile-value">' + esc(value) + '</span>' +
      (sub ? '<span class="tile-sub">' + esc(sub) + '</span>' : '') + '</div>';
  }

  function render() {
    if (!snap) return;
    LL.renderHeader(snap);
    renderUnits(snap);
    const unit = $('unit-filter').value;
    const all = rows(snap);
    const list = all.filter((r) => !unit || r.c.unit === unit);
    $('shown-count').textContent = unit ? list.length + ' of ' + all.length + ' components' : all.length + ' components';

    const count = (sev) => list.filter((r) => r.a.worst_severity === sev).length;
    const unack = list.reduce((n, r) => n + (r.a.unacknowledged || 0), 0);
    const shelved = list.reduce((n, r) => n + (r.a.shelved || 0), 0);
    const unmon = list.reduce((n, r) => n + (r.c.unmonitored_h || 0), 0);
    const crit = count('critical'), warn = count('warning'), adv = count('advisory');
    $('tiles').innerHTML =
      tile('Components', String(list.length), '', unit ? 'unit ' + unit : 'all units') +
      tile('Critical', String(crit), crit ? 'critical' : 'quiet') +
      tile('Warning', String(warn), warn ? 'warning' : 'quiet') +
      tile('Advisory', String(adv), adv ? 'advisory' : 'quiet') +
      tile('Unacknowledged', String(unack), unack ? 'unack' : 'quiet', shelved ? shelved + ' shelved' : 'alarms') +
      tile('Unmonitored', LL.hours(unmon) + ' h', unmon > 0 ? 'data' : 'quiet', 'summed over components') +
      kpiTile(snap.alarm_kpi);

    if (!list.length) {
      $('component-rows').innerHTML = '<tr><td colspan="11" class="muted">' + (all.length ? 'No component in this unit.' : 'No component in the ledger yet.') + '</td></tr>';
    } else {
      $('component-rows').innerHTML = sorted(list).map((r) => {
        const { c, a } = r;
        const sev = a.worst_severity || '';
        const href = '/component/' + encodeURIComponent(c.component);
        const creep = has(c, 'life_fraction');
        const wear = has(c, 'wear_index');
        const strain = has(c, 'creep_strain');
        const lr = c.levels_reached || {};
        const rem = LL.remaining(c.remaining_life_h, c.exhausted);
        const worst = worstIndex(c);
        const alarmCell = LL.sevBadge(sev) +
          (a.unacknowledged ? '<span class="pill unack" title="alarms waiting for an acknowledge">' + a.unacknowledged + ' unack</span>' : '') +
          (a.shelved ? '<span class="pill" title="shelved alarms">' + a.shelved + ' shelved</span>' : '') +
          (a.alerts ? '<span class="pill alert sev-' + esc(a.worst_alert_severity || 'none') + '" title="engineering alerts (for the integrity engineer; no acknowledge asked)">' + a.alerts + ' alert' + (a.alerts > 1 ? 's' : '') + ' (' + esc(a.worst_alert_severity || '') + ')</span>' : '');
        return '<tr class="row sev-' + esc(sev || 'none') + '" data-component="' + esc(c.component) + '" data-rank="' + esc(r.rank) + '">' +
          '<td class="num rank col-rank" title="attention score ' + esc(LL.num(c.attention_score) === null ? '—' : String(c.attention_score)) + '">' + esc(r.rank) + '</td>' +
          '<td class="alarm col-alarm">' + alarmCell + '</td>' +
          '<td class="name col-component"><a href="' + href + '">' + esc(c.component) + '</a><span class="sub">' + esc(c.unit) + ' · ' + esc(LL.kindLabel(c.kind)) + ' · ' + esc(c.material) + '</span></td>' +
          '<td class="num worst col-worst">' + (worst.fraction === null ? '<span class="muted">—</span>' :
            '<span class="big">' + esc(worst.text) + '</span><span class="sub">' + esc(worst.label) + '</span>' +
            (['life_fraction', 'wear_index'].includes(worst.key) ? meter(worst.value, levelsOf(c, worst.key), lr[worst.key]) : '')) + '</td>' +
          '<td class="num lf col-detail' + (creep ? '' : ' na') + '" data-value="' + esc(c.creep_life_fraction) + '"><span class="big">' + (creep ? LL.capped(c.creep_life_fraction, c.display_ceiling) : '—') + '</span>' + (c.exhausted ? '<span class="sub exhausted">exhausted</span>' : '') +
            (creep ? meter(c.creep_life_fraction, levelsOf(c, 'life_fraction'), lr.life_fraction) : '') + '</td>' +
          '<td class="num col-detail' + (strain || creep ? '' : ' na') + '" data-value="' + esc(c.creep_strain) + '"><span class="big">' + (strain || creep ? LL.capped(c.creep_strain * 100, 100) : '—') + '</span>' + (strain || creep ? '<span class="sub">%</span>' : '') +
            (creep && c.creep_strain_note ? '<span class="sub warnnote" title="' + esc(c.creep_strain_note) + '">†</span>' : '') + '</td>' +
          '<td class="num wi col-detail' + (wear ? '' : ' na') + '" data-value="' + esc(c.wear_index) + '"><span class="big">' + (wear ? LL.capped(c.wear_index, c.display_ceiling) : '—') + '</span>' +
            (wear ? meter(c.wear_index, levelsOf(c, 'wear_index'), lr.wear_index) : '') + '</td>' +
          '<td class="num rem col-remaining' + (rem.text === 'exhausted' ? ' exhausted' : '') + '">' + (rem.text === 'not moving' ? '<span class="muted">not moving</span>' :
            '<span class="big">' + esc(rem.text) + (rem.unit ? ' ' + esc(rem.unit) : '') + '</span><span class="sub">' + esc(rem.sub) + '</span>') + '</td>' +
          '<td class="num col-unmonitored' + (c.unmonitored_h > 0 ? ' data' : '') + '"><span class="big">' + LL.hours(c.unmonitored_h) + '</span><span class="sub">h</span></td>' +
          ageCell(r.f) +
          '<td class="flags col-flags">' + LL.flagChips(c.flags) + '</td>' +
          '</tr>';
      }).join('');
    }
    renderSortHeads();
    // Columns cut off on a narrow screen: the table scrolls sideways and
    // shows a cue at its right edge.
    const wrap = document.querySelector('.table-wrap');
    wrap.classList.toggle('overflows', wrap.scrollWidth > wrap.clientWidth + 1);
    // Strain computed with Norton constants derived from the rupture curve
    // restates the life fraction: the footnote says so, per note and grade.
    const notes = new Map();
    for (const { c } of list) {
      if (!has(c, 'life_fraction') || !c.creep_strain_note) continue;
      if (!notes.has(c.creep_strain_note)) notes.set(c.creep_strain_note, new Set());
      notes.get(c.creep_strain_note).add(c.material);
    }
    const foot = $('strain-note');
    foot.textContent = [...notes].map(([n, g]) => '† Creep strain (' + [...g].join(', ') + '): ' + n + '.').join(' ');
    foot.hidden = !foot.textContent;

    // One time base: event time, newest first (the service's own alarms
    // before the first plant sample are stamped by the wall clock).
    const evs = (snap.recent_events || []).filter((e) => !unit || e.unit === unit).slice(-40).reverse()
      .map((e, i) => ({ e, i, t: LL.num(e.time_ms) === null ? Date.parse(e.time) : e.time_ms }))
      .sort((x, y) => y.t - x.t || x.i - y.i).map((x) => x.e);
    $('events-base').textContent = 'newest first · event time, ' + LL.timeBase();
    $('events').innerHTML = evs.length ? evs.map((e) => LL.eventItem(e, true)).join('') : '<li class="muted">No alarm events yet.</li>';
  }

  // Wall-clock age of a part's stalest input: seconds, minutes or hours.
  function ageCell(f) {
    if (!f) return '<td class="num muted col-age">—</td>';
    const s = LL.num(f.data_age_s);
    if (s === null) {
      const why = f.on_plant_clock ? 'plant clock' : 'no data yet';
      return '<td class="num data-age muted col-age">' + why + '</td>';
    }
    const text = s < 120 ? Math.round(s) + ' s' : s < 7200 ? Math.round(s / 60) + ' min' : (s / 3600).toFixed(1) + ' h';
    return '<td class="num data-age col-age" data-age-s="' + esc(s) + '"><span class="big">' + esc(text) + '</span></td>';
  }

  $('unit-filter').addEventListener('change', () => {
    const u = $('unit-filter').value;
    writeHash();
    render();
  });
  $('component-rows').addEventListener('click', (ev) => {
    // The whole row opens the component, not only its name.
    const tr = ev.target.closest('tr[data-component]');
    if (tr && !ev.target.closest('a')) location.href = '/component/' + encodeURIComponent(tr.dataset.component);
  });

  document.querySelector('#components thead').addEventListener('click', (ev) => {
    const th = ev.target.closest('th[data-sort]');
    if (!th) return;
    const k = th.dataset.sort;
    const current = sortBy || 'rank';
    const dir = k === current ? -(sortBy ? sortDir : 1) : SORTS[k].first;
    // The ranking itself, worst first, is the default order.
    sortBy = k === 'rank' && dir === 1 ? null : k;
    sortDir = dir;
    writeHash();
    render();
  });
  document.querySelector('#components thead').addEventListener('keydown', (ev) => {
    if ((ev.key === 'Enter' || ev.key === ' ') && ev.target.closest('th[data-sort]')) { ev.preventDefault(); ev.target.click(); }
  });
  LL.onDisplayChange(() => render());

  LL.poll(async () => {
    try {
      snap = await LL.api('/api/components');
      render();
    } catch (e) {
      LL.updated(e);
    }
  });
})();
