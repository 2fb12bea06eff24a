// lifeledger status page: the plant overview.
'use strict';

(() => {
  const { $, esc } = LL;
  let snap = null;

  function unitFromHash() {
    const m = /(?:^#|&)unit=([^&]*)/.exec(location.hash);
    return m ? decodeURIComponent(m[1]) : '';
  }

  // Everything about one component the table needs, worst first.
  function rows(s) {
    const alarms = new Map((s.alarms || []).map((a) => [a.component, a]));
    const out = (s.components || []).map((c) => {
      const a = alarms.get(c.component) || {};
      return { c, a, rank: LL.sevRank(a.worst_severity), worst: Math.max(c.creep_life_fraction || 0, c.wear_index || 0) };
    });
    out.sort((x, y) => y.rank - x.rank || y.worst - x.worst || x.c.component.localeCompare(y.c.component));
    return out;
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
      $('component-rows').innerHTML = '<tr><td colspan="9" class="muted">' + (all.length ? 'No component in this unit.' : 'No component in the ledger yet.') + '</td></tr>';
    } else {
      const fresh = {};
      ((snap.freshness || {}).components || []).forEach((f) => { fresh[f.component] = f; });
      $('component-rows').innerHTML = list.map(({ c, a }) => {
        const sev = a.worst_severity || '';
        const href = '/component/' + encodeURIComponent(c.component);
        const creep = has(c, 'life_fraction');
        const wear = has(c, 'wear_index');
        const strain = has(c, 'creep_strain');
        const lr = c.levels_reached || {};
        const rem = c.remaining_life_h;
        const alarmCell = LL.sevBadge(sev) +
          (a.unacknowledged ? '<span class="pill unack" title="alarms waiting for an acknowledge">' + a.unacknowledged + ' unack</span>' : '') +
          (a.shelved ? '<span class="pill" title="shelved alarms">' + a.shelved + ' shelved</span>' : '') +
          (a.alerts ? '<span class="pill alert sev-' + esc(a.worst_alert_severity || 'none') + '" title="engineering alerts (for the integrity engineer; no acknowledge asked)">' + a.alerts + ' alert' + (a.alerts > 1 ? 's' : '') + ' (' + esc(a.worst_alert_severity || '') + ')</span>' : '');
        return '<tr class="row sev-' + esc(sev || 'none') + '" data-component="' + esc(c.component) + '">' +
          '<td class="alarm">' + alarmCell + '</td>' +
          '<td class="name"><a href="' + href + '">' + esc(c.component) + '</a><span class="sub">' + esc(c.unit) + ' · ' + esc(LL.kindLabel(c.kind)) + ' · ' + esc(c.material) + '</span></td>' +
          '<td class="num lf' + (creep ? '' : ' na') + '" data-value="' + esc(c.creep_life_fraction) + '"><span class="big">' + (creep ? LL.capped(c.creep_life_fraction, c.display_ceiling) : '—') + '</span>' + (c.exhausted ? '<span class="sub exhausted">exhausted</span>' : '') +
            (creep ? meter(c.creep_life_fraction, levelsOf(c, 'life_fraction'), lr.life_fraction) : '') + '</td>' +
          '<td class="num' + (strain || creep ? '' : ' na') + '" data-value="' + esc(c.creep_strain) + '"><span class="big">' + (strain || creep ? LL.capped(c.creep_strain * 100, 100) : '—') + '</span>' + (strain || creep ? '<span class="sub">%</span>' : '') +
            (creep && c.creep_strain_note ? '<span class="sub warnnote" title="' + esc(c.creep_strain_note) + '">†</span>' : '') + '</td>' +
          '<td class="num wi' + (wear ? '' : ' na') + '" data-value="' + esc(c.wear_index) + '"><span class="big">' + (wear ? LL.capped(c.wear_index, c.display_ceiling) : '—') + '</span>' +
            (wear ? meter(c.wear_index, levelsOf(c, 'wear_index'), lr.wear_index) : '') + '</td>' +
          '<td class="num rem">' + (LL.num(rem) === null ? '<span class="muted">not moving</span>' :
            '<span class="big">' + LL.hours(rem) + ' h</span><span class="sub">' + LL.years(rem) + ' years</span>') + '</td>' +
          '<td class="num' + (c.unmonitored_h > 0 ? ' data' : '') + '"><span class="big">' + LL.hours(c.unmonitored_h) + '</span><span class="sub">h</span></td>' +
          ageCell(fresh[c.component]) +
          '<td class="flags">' + LL.flagChips(c.flags) + '</td>' +
          '</tr>';
      }).join('');
    }
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

    const evs = (snap.recent_events || []).filter((e) => !unit || e.unit === unit).slice(-40).reverse();
    $('events').innerHTML = evs.length ? evs.map((e) => LL.eventItem(e, true)).join('') : '<li class="muted">No alarm events yet.</li>';
  }

  // Wall-clock age of a part's stalest input: seconds, minutes or hours.
  function ageCell(f) {
    if (!f) return '<td class="num muted">—</td>';
    const s = LL.num(f.data_age_s);
    if (s === null) {
      const why = f.on_plant_clock ? 'plant clock' : 'no data yet';
      return '<td class="num data-age muted">' + why + '</td>';
    }
    const text = s < 120 ? Math.round(s) + ' s' : s < 7200 ? Math.round(s / 60) + ' min' : (s / 3600).toFixed(1) + ' h';
    return '<td class="num data-age" data-age-s="' + esc(s) + '"><span class="big">' + esc(text) + '</span></td>';
  }

  $('unit-filter').addEventListener('change', () => {
    const u = $('unit-filter').value;
    history.replaceState(null, '', u ? '#unit=' + encodeURIComponent(u) : location.pathname);
    render();
  });
  $('component-rows').addEventListener('click', (ev) => {
    // The whole row opens the component, not only its name.
    const tr = ev.target.closest('tr[data-component]');
    if (tr && !ev.target.closest('a')) location.href = '/component/' + encodeURIComponent(tr.dataset.component);
  });

  LL.poll(async () => {
    try {
      snap = await LL.api('/api/components');
      render();
    } catch (e) {
      LL.updated(e);
    }
  });
})();
