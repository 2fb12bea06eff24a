// lifeledger status page: a component's inspection records, and the form
// that enters one (POST with the engineer token; see /api/components/{name}/inspections).
'use strict';

(() => {
  const { $, esc } = LL;
  const name = decodeURIComponent(location.pathname.replace(/^\/component\//, '').replace(/\/+$/, ''));
  const base = '/api/components/' + encodeURIComponent(name);
  $('inspections-link').href = base + '/inspections';
  $('daily-link').href = base + '/history';
  $('report-link').href = '/report/' + encodeURIComponent(name);
  $('report-top-link').href = '/report/' + encodeURIComponent(name);

  function value(r) {
    if (r.kind === 'replica') return 'class ' + esc((r.detail && r.detail.class) || '?') + (r.detail && r.detail.rebase ? ' (re-base asked)' : '');
    let v = r.value == null ? '' : esc(r.value) + ' ' + esc(r.unit);
    if (r.kind === 'oxide_thickness' && r.detail && r.detail.service_h) v += ' after ' + LL.group(r.detail.service_h) + ' h';
    return v;
  }

  function effect(r) {
    const a = r.ledger || r.accepted;
    if (r.superseded_by != null) return 'superseded by #' + r.superseded_by;
    if (!a) return 'pending: the ledger applies it shortly';
    if (!a.applied) return 'accepted; applies when the ledger reaches ' + LL.shortUtc(a.effective_ms);
    const e = a.effect || {};
    const parts = [];
    if (a.effective_ms !== r.finding_ms) parts.push('entered late: applied ' + LL.shortUtc(a.effective_ms) + ', increment since the finding kept');
    if (e.not_applied) parts.push('not applied: ' + e.not_applied);
    if (e.temperature_correction_k != null) parts.push('temperature correction ' + (e.temperature_correction_k >= 0 ? '+' : '') + e.temperature_correction_k.toFixed(1) + ' K (oxide-equivalent ' + (e.oxide_temperature_k - 273.15).toFixed(1) + ' °C)');
    if (e.bounds) parts.push('life fraction bounds ' + e.bounds[0] + '–' + e.bounds[1] + (e.outside ? ': the ledger lay OUTSIDE' : ': the ledger lay inside'));
    if (e.before && e.after && r.kind !== 'wall_thickness' && r.kind !== 'oxide_thickness') {
      const k = r.kind === 'creep_strain' ? 'creep_strain' : r.kind === 'wear_depth' ? 'wear_depth_mm' : 'life_fraction';
      if (e.before[k] !== e.after[k]) parts.push('re-based ' + LL.sig(e.before[k], 4) + ' → ' + LL.sig(e.after[k], 4));
    }
    if (r.kind === 'wall_thickness' && !e.not_applied) parts.push('wall re-based; hoop stress from this date');
    return parts.length ? parts.map(esc).join('; ') : 'applied';
  }

  // The daily history: life fraction against time, with the alarm levels,
  // the level crossings and the inspection findings listed under it.
  async function loadHistory(records) {
    let h, snap;
    try {
      h = await LL.api(base + '/history');
      snap = await LL.api('/api/components');
    } catch (e) {
      $('history-chart').innerHTML = '<p class="muted">The daily history could not be read: ' + esc(e.message) + '</p>';
      return;
    }
    const pts = (h.points || []).map((p) => [p.t_ms, p.life_fraction]);
    if (pts.length < 2) {
      $('history-chart').innerHTML = '<p class="muted">The daily history holds ' + pts.length + ' day(s) so far.</p>';
      $('history-marks').textContent = '';
      return;
    }
    const comp = (snap.components || []).find((c) => c.component === name) || {};
    const lv = (comp.thresholds && comp.thresholds.life_fraction) || {};
    const levels = ['advisory', 'warning', 'critical'].filter((k) => LL.num(lv[k]) !== null).map((k) => ({ value: lv[k], label: k, cls: k }));
    const width = Math.max(320, ($('history-chart').clientWidth || 800) - 8);
    $('history-chart').innerHTML = LL.lineChart({ id: 'history-life', label: 'Life fraction, one point a day', points: pts, t0: pts[0][0], t1: pts[pts.length - 1][0], fmt: LL.frac, levels, width, height: 220, cls: 's-life' });
    LL.attachHover('history-life');
    const marks = [];
    for (const l of levels) {
      for (let i = 1; i < pts.length; i++) {
        if (pts[i - 1][1] < l.value && pts[i][1] >= l.value) marks.push(l.label + ' level ' + l.value + ' crossed on ' + LL.shortUtc(pts[i][0]));
      }
    }
    for (const r of records) marks.push('finding #' + r.id + ' (' + LL.kindLabel(r.kind) + ') on ' + LL.shortUtc(r.finding_ms));
    $('history-marks').textContent = marks.length ? 'Marks: ' + marks.join('; ') + '.' : '';
  }

  async function load() {
    let data;
    try {
      data = await LL.api(base + '/inspections');
    } catch (e) {
      $('inspections').innerHTML = '<p class="muted">Inspection records could not be read: ' + esc(e.message) + '</p>';
      return;
    }
    const rows = data.records || [];
    loadHistory(rows);
    if (!rows.length) {
      $('inspections').innerHTML = '<p class="muted">No inspection records for this component.</p>';
      return;
    }
    $('inspections').innerHTML = '<table class="grid"><thead><tr><th>#</th><th>Date of finding</th><th>Kind</th><th>Value</th><th>Method · location</th><th>Entered by</th><th>Effect on the ledger</th><th>Notes</th></tr></thead><tbody>'
      + rows.slice().reverse().map((r) => '<tr' + (r.superseded_by != null ? ' class="muted"' : '') + '><td>' + r.id + (r.supersedes != null ? ' <span class="small">(corrects #' + r.supersedes + ')</span>' : '') + '</td><td>' + esc(LL.shortUtc(r.finding_ms)) + '</td><td>' + esc(LL.kindLabel(r.kind)) + '</td><td class="num">' + value(r) + '</td><td>' + esc([r.method, r.location].filter(Boolean).join(' · ')) + '</td><td>' + esc(r.entered_by) + '</td><td>' + effect(r) + '</td><td>' + esc(r.notes) + '</td></tr>').join('')
      + '</tbody></table>';
  }

  $('inspection-form').addEventListener('submit', async (ev) => {
    ev.preventDefault();
    const f = new FormData(ev.target);
    const num = (k) => { const v = String(f.get(k) || '').trim(); return v === '' ? null : Number(v); };
    const body = {
      date: String(f.get('date') || '').trim(), entered_by: String(f.get('entered_by') || '').trim(),
      kind: f.get('kind'), value: num('value'), unit: String(f.get('unit') || 'mm').trim(),
      method: String(f.get('method') || ''), location: String(f.get('location') || ''), notes: String(f.get('notes') || ''),
      class: String(f.get('class') || '').trim() || null, rebase: !!f.get('rebase'), service_h: num('service_h'),
      supersedes: num('supersedes'),
    };
    if (!LL.token()) { LL.notice('Enter the engineer token (top bar) first.', 'bad'); return; }
    let r;
    try {
      r = await fetch(base + '/inspections', {
        method: 'POST', cache: 'no-store',
        headers: { 'Content-Type': 'application/json', Authorization: 'Bearer ' + LL.token() },
        body: JSON.stringify(body),
      });
    } catch (e) { LL.notice('The record did not reach the service: ' + e.message, 'bad'); return; }
    const text = (await r.text()).trim();
    if (r.status === 201) {
      LL.notice('Recorded: ' + JSON.parse(text).status, 'good');
      ev.target.reset();
      setTimeout(load, 1500);
    } else {
      LL.notice('Not recorded (HTTP ' + r.status + '): ' + text, 'bad');
    }
  });

  LL.poll(load, 30000);
})();
