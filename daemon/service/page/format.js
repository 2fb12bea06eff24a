// lifeledger status page: how numbers, times and units are shown on every
// screen. Served in front of app.js (same file), which hands these
// formatters out under their old names (LL.sig, LL.frac, LL.hours, ...).
//
// * Numbers: engineering formats, never scientific notation. Large whole
//   numbers in thin-space thousands groups; small ones in plain decimals
//   (decimal digits grouped in threes); caps instead of absurd figures.
// * Time: one time base at a time, UTC (default) or the browser's local
//   time, chosen in the top bar and remembered in localStorage. Dates carry
//   the year when it is not the current year.
// * Units: the data stay SI (pressure and stress in MPa, temperature in
//   °C); a display choice of °C/°F and MPa/bar/psi converts on display
//   only. Factors from NIST SP 811 (2008), appendix B: 1 bar = 1e5 Pa,
//   1 psi = 6.894 757 kPa, t/°F = 1.8·t/°C + 32.
'use strict';

const LLFormat = (() => {
  const HOURS_PER_YEAR = 8766; // 365.25 d
  const PREFS_KEY = 'lifeledger.display';
  // NIST SP 811 (2008), appendix B.8 and B.9.
  const PA_PER_PSI = 6894.757;
  const PA_PER_BAR = 1e5;

  const num = (v) => (typeof v === 'number' && isFinite(v) ? v : null);

  // ---------- display preferences ----------
  function loadPrefs() {
    let p = {};
    try { p = JSON.parse(localStorage.getItem(PREFS_KEY) || '{}') || {}; } catch (e) { p = {}; }
    return {
      time: p.time === 'local' ? 'local' : 'utc',
      temperature: p.temperature === 'F' ? 'F' : 'C',
      pressure: ['bar', 'psi'].includes(p.pressure) ? p.pressure : 'MPa',
    };
  }
  // A link may carry the choice (?time=local&temperature=F&pressure=psi,
  // for a bookmark on a plant that works in US units): it is taken and
  // remembered like a click in the top bar.
  function fromQuery(p) {
    let q;
    try { q = new URLSearchParams(location.search); } catch (e) { return p; }
    const out = Object.assign({}, p);
    if (['utc', 'local'].includes(q.get('time'))) out.time = q.get('time');
    if (['C', 'F'].includes(q.get('temperature'))) out.temperature = q.get('temperature');
    if (['MPa', 'bar', 'psi'].includes(q.get('pressure'))) out.pressure = q.get('pressure');
    if (JSON.stringify(out) !== JSON.stringify(p)) {
      try { localStorage.setItem(PREFS_KEY, JSON.stringify(out)); } catch (e) { /* this page only */ }
    }
    return out;
  }
  let prefs = fromQuery(loadPrefs());
  const listeners = [];
  function setPref(key, value) {
    prefs = Object.assign({}, prefs, { [key]: value });
    try { localStorage.setItem(PREFS_KEY, JSON.stringify(prefs)); } catch (e) { /* storage off: this page only */ }
    renderPrefs();
    listeners.forEach((f) => { try { f(prefs); } catch (e) { /* a page's redraw */ } });
  }
  function onPrefs(f) { listeners.push(f); }

  // ---------- numbers ----------
  // Whole numbers in thousands groups separated by a narrow no-break space
  // (a thin space that never breaks a number across lines).
  function group(v) {
    v = num(v);
    if (v === null) return '—';
    // BigInt: whole digits even beyond 1e21, where toString() turns to exponents.
    const s = BigInt(Math.round(Math.abs(v))).toString().replace(/\B(?=(\d{3})+(?!\d))/g, '\u202f');
    return (v < 0 && Math.round(Math.abs(v)) !== 0 ? '−' : '') + s;
  }
  // `v` with `d` decimals (0..12), never in exponent form, the integer part
  // grouped, decimals grouped in threes from the point when there are more
  // than four of them.
  function plain(v, d) {
    d = Math.max(0, Math.min(12, d | 0));
    const neg = v < 0;
    let s = Math.abs(v).toFixed(d);
    if (s.includes('e')) return group(v); // from 1e21 up: whole number
    let [i, f] = s.split('.');
    i = i.replace(/\B(?=(\d{3})+(?!\d))/g, '\u202f');
    // Narrow no-break spaces: a number never breaks across lines.
    if (f && f.length > 4) f = f.replace(/(\d{3})(?=\d)/g, '$1\u202f');
    const zero = /^[0.\u202f]*$/.test(i + (f || ''));
    return (neg && !zero ? '−' : '') + i + (f ? '.' + f : '');
  }
  const SUP = { '-': '⁻', 0: '⁰', 1: '¹', 2: '²', 3: '³', 4: '⁴', 5: '⁵', 6: '⁶', 7: '⁷', 8: '⁸', 9: '⁹' };
  // About `sigd` significant digits (default 3). From 10^sigd up: whole,
  // grouped; plain decimals down to 10⁻⁶; below that (material constants,
  // rates of a quiet part) as "1.20 × 10⁻⁸", the way such figures are
  // printed in the trade, never as "1.2e-8".
  function sig(v, sigd) {
    v = num(v);
    if (v === null) return '—';
    if (v === 0) return '0';
    const n = sigd || 3;
    const a = Math.abs(v);
    let mag = Math.floor(Math.log10(a));
    if (mag < -6) {
      let m = v / Math.pow(10, mag);
      if (Math.abs(Number(m.toFixed(n - 1))) >= 10) { mag += 1; m = v / Math.pow(10, mag); }
      return plain(m, n - 1) + ' × 10' + String(mag).split('').map((ch) => SUP[ch]).join('');
    }
    if (mag >= n - 1) {
      const unit = Math.pow(10, mag - n + 1);
      return group(Math.round(v / unit) * unit);
    }
    return plain(v, n - 1 - mag);
  }
  function fixed(v, d) {
    v = num(v);
    return v === null ? '—' : plain(v, d);
  }
  // Life fraction, wear index, usage and percentages: three decimals from
  // 0.01 up, two significant digits down to 0.001, below that "< 0.001".
  function frac(v) {
    v = num(v);
    if (v === null) return '—';
    if (v === 0) return '0';
    const a = Math.abs(v);
    if (a >= 1000) return group(v);
    if (a >= 0.01) return plain(v, 3);
    if (a >= 0.001) return plain(v, 4);
    return v < 0 ? '> −0.001' : '< 0.001';
  }
  // A life fraction or wear index as reports cap it: at the ceiling it is
  // "≥ ceiling" (the ledger's sum is beyond it; the part is exhausted).
  function capped(v, ceiling) {
    v = num(v);
    if (v === null) return '—';
    return num(ceiling) !== null && v >= ceiling ? '≥ ' + ceiling : frac(v);
  }
  // Hours: one decimal under 10, whole and grouped above, capped at a
  // million ("> 1 000 000").
  function hours(v) {
    v = num(v);
    if (v === null) return '—';
    if (Math.abs(v) >= 1e6) return (v < 0 ? '< −' : '> ') + group(1e6);
    return Math.abs(v) < 10 ? plain(v, 1) : group(v);
  }
  // Years from hours: one decimal under 10, whole above, "> 100" from a
  // century up (a remaining life that long is no planning figure).
  function years(h) {
    h = num(h);
    if (h === null) return '—';
    const y = h / HOURS_PER_YEAR;
    if (y >= 100) return '> 100';
    if (y >= 10) return plain(y, 0);
    if (y > 0 && y < 0.1) return '< 0.1';
    return plain(y, 1);
  }
  // Remaining life in hours for one cell: "exhausted" at zero (the part
  // has used its life or wear allowance), "> 100 years" from a century up,
  // else hours. Returns {text, unit, sub}.
  function remaining(h, exhausted) {
    h = num(h);
    if (exhausted || (h !== null && h <= 0.05)) return { text: 'exhausted', unit: '', sub: 'at or past the end of its life' };
    if (h === null) return { text: 'not moving', unit: '', sub: '' };
    if (h / HOURS_PER_YEAR >= 100) return { text: '> 100', unit: 'years', sub: '> ' + group(100 * HOURS_PER_YEAR) + ' h' };
    return { text: hours(h), unit: 'h', sub: years(h) + ' years' };
  }
  // Axis tick labels: decimals enough to tell ticks `step` apart.
  function tick(v, step) {
    if (v === 0) return '0';
    const a = Math.max(Math.abs(v), step);
    if (a >= 1e4) return group(v);
    const d = Math.max(0, Math.ceil(-Math.log10(step) - 1e-9));
    return plain(v, Math.min(d, 12));
  }

  // ---------- time ----------
  function pad2(n) { return (n < 10 ? '0' : '') + n; }
  function parts(ms) {
    const d = new Date(ms);
    if (prefs.time === 'local') {
      return { y: d.getFullYear(), mo: d.getMonth() + 1, d: d.getDate(), h: d.getHours(), mi: d.getMinutes() };
    }
    return { y: d.getUTCFullYear(), mo: d.getUTCMonth() + 1, d: d.getUTCDate(), h: d.getUTCHours(), mi: d.getUTCMinutes() };
  }
  function currentYear() { return parts(Date.now()).y; }
  // The chosen time base as a label: "UTC" or "local, UTC+01:00".
  function timeBase() {
    if (prefs.time !== 'local') return 'UTC';
    const off = -new Date().getTimezoneOffset();
    const s = off < 0 ? '−' : '+';
    return 'local, UTC' + s + pad2(Math.floor(Math.abs(off) / 60)) + ':' + pad2(Math.abs(off) % 60);
  }
  // Hours and minutes, or with the full date (always with the year).
  function time(ms, withDate) {
    if (num(ms) === null) return '—';
    const p = parts(ms);
    const hm = pad2(p.h) + ':' + pad2(p.mi);
    if (withDate === false) return hm;
    return p.y + '-' + pad2(p.mo) + '-' + pad2(p.d) + ' ' + hm;
  }
  // Date and time for narrow columns: the year only when it is not the
  // current one ("12-03 02:01" this year, "2062-12-03 02:01" otherwise).
  function short(ms) {
    if (num(ms) === null) return '—';
    const p = parts(ms);
    const date = pad2(p.mo) + '-' + pad2(p.d);
    return (p.y === currentYear() ? '' : p.y + '-') + date + ' ' + pad2(p.h) + ':' + pad2(p.mi);
  }
  // An RFC 3339 text in the chosen base, with the base named.
  function iso(s) {
    if (!s) return '—';
    const t = Date.parse(s);
    return isNaN(t) ? String(s) : time(t) + ' ' + (prefs.time === 'local' ? 'local' : 'UTC');
  }
  // Chart time ticks: date when the step is a day or more, else time, with
  // the date at the first tick and at midnight; the year where not current.
  function timeTick(ms, step, first) {
    const p = parts(ms);
    const date = (p.y === currentYear() ? '' : p.y + '-') + pad2(p.mo) + '-' + pad2(p.d);
    if (step >= 86400e3) return date;
    const hm = pad2(p.h) + ':' + pad2(p.mi);
    return first || (p.h === 0 && p.mi === 0) ? date + ' ' + hm : hm;
  }

  // ---------- units ----------
  function temperature(c) {
    c = num(c);
    if (c === null) return null;
    return prefs.temperature === 'F' ? c * 1.8 + 32 : c;
  }
  // A temperature difference (K): K, or °F-degrees.
  function temperatureDelta(k) {
    k = num(k);
    if (k === null) return null;
    return prefs.temperature === 'F' ? k * 1.8 : k;
  }
  function pressure(mpa) {
    mpa = num(mpa);
    if (mpa === null) return null;
    if (prefs.pressure === 'bar') return (mpa * 1e6) / PA_PER_BAR;
    if (prefs.pressure === 'psi') return (mpa * 1e6) / PA_PER_PSI;
    return mpa;
  }
  // Stress follows the pressure choice where the trade does: ksi with psi,
  // MPa otherwise (stress is not quoted in bar).
  function stress(mpa) {
    mpa = num(mpa);
    if (mpa === null) return null;
    return prefs.pressure === 'psi' ? (mpa * 1e6) / PA_PER_PSI / 1000 : mpa;
  }
  const units = {
    temperature: () => (prefs.temperature === 'F' ? '°F' : '°C'),
    temperatureDelta: () => (prefs.temperature === 'F' ? '°F' : 'K'),
    pressure: () => prefs.pressure,
    stress: () => (prefs.pressure === 'psi' ? 'ksi' : 'MPa'),
  };
  // Significant digits that keep a converted figure as precise as the SI one.
  function showTemperature(c, d) {
    const v = temperature(c);
    return v === null ? '—' : plain(v, d == null ? 1 : d) + ' ' + units.temperature();
  }
  function showPressure(mpa, sigd) {
    const v = pressure(mpa);
    return v === null ? '—' : sig(v, sigd || 4) + ' ' + units.pressure();
  }
  function showStress(mpa, sigd) {
    const v = stress(mpa);
    return v === null ? '—' : sig(v, sigd || 4) + ' ' + units.stress();
  }
  // A chart or histogram whose data come in `unit` (°C, MPa): the
  // converter and the unit to show, by the display choice.
  function converterFor(unit, what) {
    if (unit === '°C') return { f: temperature, unit: units.temperature() };
    if (unit === 'MPa' && what === 'stress') return { f: stress, unit: units.stress() };
    if (unit === 'MPa') return { f: pressure, unit: units.pressure() };
    return null;
  }

  // ---------- the choice in the top bar ----------
  function seg(key, options, label) {
    return '<span class="pref" role="group" aria-label="' + label + '"><span class="pref-label">' + label + '</span>' +
      options.map(([v, text]) => '<button type="button" class="pref-opt' + (prefs[key] === v ? ' on' : '') + '" data-pref="' + key +
        '" data-value="' + v + '" aria-pressed="' + (prefs[key] === v) + '">' + text + '</button>').join('') + '</span>';
  }
  function renderPrefs() {
    // Headings that name the time base (class time-base) follow the choice.
    for (const t of document.querySelectorAll('.time-base')) t.textContent = timeBase();
    const el = document.getElementById('display-prefs');
    if (!el) return;
    el.innerHTML = seg('time', [['utc', 'UTC'], ['local', 'Local']], 'Time') +
      seg('temperature', [['C', '°C'], ['F', '°F']], 'Temp.') +
      seg('pressure', [['MPa', 'MPa'], ['bar', 'bar'], ['psi', 'psi']], 'Pressure');
  }
  document.addEventListener('DOMContentLoaded', () => {
    renderPrefs();
    const el = document.getElementById('display-prefs');
    if (el) {
      el.addEventListener('click', (ev) => {
        const b = ev.target.closest('button[data-pref]');
        if (b) setPref(b.dataset.pref, b.dataset.value);
      });
    }
  });

  return {
    HOURS_PER_YEAR, PA_PER_PSI, PA_PER_BAR, num, group, plain, sig, fixed, frac, capped, hours, years, remaining, tick,
    time, short, iso, timeTick, timeBase, pad2,
    temperature, temperatureDelta, pressure, stress, units, showTemperature, showPressure, showStress, converterFor,
    get prefs() { return prefs; }, setPref, onPrefs,
  };
})();
