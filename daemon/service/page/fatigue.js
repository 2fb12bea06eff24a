// lifeledger status page: the fatigue panel of one component. Figures
// (usage with the open residue as half cycles, cycles, remaining cycles),
// the creep-fatigue diagram (our own small chart: the allowable region
// under the grade's bilinear envelope, the linear sum, and where the part
// sits, full scale and near the origin) and the cycle table. Drawn from the
// component's `fatigue` object in /api/components.
'use strict';

const LLFatigue = (() => {
  const { $, esc } = LL;

  // One square diagram of D_f (x) against D_c (y) from 0 to `span`.
  function diagram(f, span, id, title) {
    const S = 220, m = { l: 56, r: 14, t: 22, b: 36 };
    const W = S + m.l + m.r, H = S + m.t + m.b;
    const X = (v) => m.l + (v / span) * S;
    const Y = (v) => m.t + S - (v / span) * S;
    const e = f.envelope || { fatigue: 0.5, creep: 0.5 };
    const df = LL.num(f.fatigue_usage) || 0, dc = LL.num(f.creep_damage) || 0;
    let s = '<svg class="cf-diagram" id="' + esc(id) + '" viewBox="0 0 ' + W + ' ' + H + '" width="' + W + '" height="' + H +
      '" role="img" aria-label="' + esc(title) + '">';
    s += '<defs><clipPath id="' + esc(id) + '-clip"><rect x="' + m.l + '" y="' + m.t + '" width="' + S + '" height="' + S + '"/></clipPath></defs>';
    s += '<text class="cf-title" x="' + m.l + '" y="14">' + esc(title) + '</text>';
    s += '<rect class="plot" x="' + m.l + '" y="' + m.t + '" width="' + S + '" height="' + S + '"/>';
    for (let k = 1; k < 4; k++) {
      const v = (span * k) / 4;
      s += '<line class="grid" x1="' + X(v) + '" x2="' + X(v) + '" y1="' + m.t + '" y2="' + (m.t + S) + '"/>';
      s += '<line class="grid" x1="' + m.l + '" x2="' + (m.l + S) + '" y1="' + Y(v) + '" y2="' + Y(v) + '"/>';
    }
    for (let k = 0; k <= 4; k += 2) {
      const v = (span * k) / 4;
      s += '<text class="tick" x="' + X(v) + '" y="' + (m.t + S + 14) + '" text-anchor="middle">' + esc(LL.sig(v, 2)) + '</text>';
      s += '<text class="tick" x="' + (m.l - 6) + '" y="' + Y(v) + '" dy="0.35em" text-anchor="end">' + esc(LL.sig(v, 2)) + '</text>';
    }
    s += '<text class="cf-axis" x="' + (m.l + S / 2) + '" y="' + (H - 4) + '" text-anchor="middle">fatigue damage D_f</text>';
    s += '<text class="cf-axis" transform="translate(12 ' + (m.t + S / 2) + ') rotate(-90)" text-anchor="middle">creep damage D_c</text>';
    s += '<g clip-path="url(#' + esc(id) + '-clip)">';
    // The allowable region under the envelope, the envelope and the linear sum.
    s += '<path class="cf-region" d="M' + X(0) + ' ' + Y(0) + 'L' + X(0) + ' ' + Y(1) + 'L' + X(e.fatigue) + ' ' + Y(e.creep) +
      'L' + X(1) + ' ' + Y(0) + 'Z"/>';
    s += '<path class="cf-envelope" d="M' + X(0) + ' ' + Y(1) + 'L' + X(e.fatigue) + ' ' + Y(e.creep) + 'L' + X(1) + ' ' + Y(0) + '"/>';
    s += '<path class="cf-linear" d="M' + X(0) + ' ' + Y(1) + 'L' + X(1) + ' ' + Y(0) + '"/>';
    // The ray from the origin through the part to the envelope: the index
    // is how far along it the part sits.
    const idx = LL.num(f.creep_fatigue_index);
    if (idx && idx > 0) {
      s += '<path class="cf-ray" d="M' + X(0) + ' ' + Y(0) + 'L' + X(df / idx) + ' ' + Y(dc / idx) + '"/>';
    }
    s += '<circle class="cf-point" cx="' + X(df).toFixed(1) + '" cy="' + Y(dc).toFixed(1) + '" r="5"><title>D_f ' +
      esc(LL.sig(df, 4)) + ', D_c ' + esc(LL.sig(dc, 4)) + '</title></circle>';
    s += '</g></svg>';
    return s;
  }

  function table(f) {
    const cells = f.cycle_table || [];
    if (!cells.length) return '<p class="muted">No closed cycles yet.</p>';
    const ranges = [...new Set(cells.map((c) => c.range_from_mpa))].sort((a, b) => b - a);
    const means = [...new Set(cells.map((c) => c.mean_from_mpa))].sort((a, b) => a - b);
    const at = new Map(cells.map((c) => [c.range_from_mpa + '/' + c.mean_from_mpa, c]));
    const step = (c) => c.range_to_mpa - c.range_from_mpa;
    const mstep = (c) => c.mean_to_mpa - c.mean_from_mpa;
    let h = '<table class="classes" id="cycle-table"><thead><tr><th>range MPa / mean MPa</th>';
    for (const mn of means) h += '<th class="num">' + esc(mn) + ' – ' + esc(mn + mstep(cells[0])) + '</th>';
    h += '</tr></thead><tbody>';
    for (const r of ranges) {
      h += '<tr><th>' + esc(r) + ' – ' + esc(r + step(cells[0])) + '</th>';
      for (const mn of means) {
        const c = at.get(r + '/' + mn);
        h += '<td class="num' + (c ? '' : ' zero') + '">' + (c ? esc(Number.isInteger(c.cycles * 2) ? String(c.cycles) : LL.sig(c.cycles, 4)) : '·') + '</td>';
      }
      h += '</tr>';
    }
    return h + '</tbody></table>';
  }

  function hoursTo(list) {
    const next = (list || []).find((x) => LL.num(x.hours) !== null && x.hours > 0);
    return next ? next.severity + ' in ' + LL.hours(next.hours) + ' h' : 'no level ahead at the recent rate';
  }

  function render(c) {
    const panel = $('fatigue-panel');
    if (!panel) return;
    const f = c && c.fatigue;
    panel.hidden = !f;
    if (!f) return;
    const lr = (c.levels_reached || {});
    $('fatigue-location').textContent = 'at ' + f.location + ' · curve ' + f.design_curve;
    const tile = (label, value, unit, sub, cls) => '<div class="tile ' + (cls || '') + '"><span class="tile-label">' + esc(label) +
      '</span><span class="tile-value">' + esc(value) + (unit ? '<small>' + esc(unit) + '</small>' : '') + '</span>' +
      (sub ? '<span class="tile-sub">' + esc(sub) + '</span>' : '') + '</div>';
    let t = '';
    t += tile('Fatigue usage', LL.frac(f.fatigue_usage), '', LL.frac(f.closed_usage) + ' closed + ' + LL.frac(f.residue_usage) +
      ' open residue (half cycles) · ' + hoursTo(f.hours_to_usage), lr.fatigue_usage || '');
    t += tile('Creep-fatigue index', LL.frac(f.creep_fatigue_index), '', '1 = on the envelope (' + f.envelope.fatigue + ', ' +
      f.envelope.creep + ') · ' + hoursTo(f.hours_to_combined), lr.creep_fatigue_index || '');
    t += tile('Cycles', LL.sig(f.cycles, 4), '', LL.sig(f.cycles_last_day, 3) + ' last day · ' + LL.sig(f.cycles_last_month, 4) +
      ' last 30 days · ' + LL.sig(f.residue_half_cycles, 3) + ' half cycles open');
    t += tile('Stress at the location', LL.sig(f.stress_mpa, 3), ' MPa', 'thermal ' + LL.sig(f.thermal_stress_mpa, 3) + ' MPa · ΔT ' +
      LL.sig(f.delta_t_k, 3) + ' K · largest range ' + LL.sig(f.largest_range_mpa, 3) + ' MPa');
    t += tile('Remaining cycles', LL.num(f.remaining_cycles) === null ? '—' : LL.sig(f.remaining_cycles, 3), '',
      'like the last 30 days, to a usage of 1');
    $('fatigue-figures').innerHTML = t;
    const df = LL.num(f.fatigue_usage) || 0, dc = LL.num(f.creep_damage) || 0;
    // A round span holding twice the larger damage, when that is under 1.
    const near = [0.01, 0.02, 0.05, 0.1, 0.2, 0.5, 1].find((v) => v >= 2 * Math.max(df, dc));
    $('fatigue-diagram').innerHTML = diagram(f, 1, 'cf-full', 'creep-fatigue diagram') +
      (near < 1 ? diagram(f, near, 'cf-near', 'near the origin (to ' + LL.sig(near, 2) + ')') : '');
    $('fatigue-source').textContent = 'Envelope: ' + f.envelope_source + '. ' + f.caution;
    $('fatigue-table').innerHTML = table(f);
  }

  return { render, diagram };
})();
