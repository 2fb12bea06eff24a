#!/usr/bin/env python3
"""Write the synthetic historian export for the lifeledger demo.

INVENTED DATA, FOR THE DEMO ONLY: "Brackenmoor Demo Station" unit U2 and
all its tags are made up (see config/demo/plant.toml). Nothing here is
measured plant data.

Output: config/demo/history.csv.gz, gzip-compressed CSV in long format

    timestamp,tag,value,quality
    2026-10-01T00:00:00Z,U2.SH1.TE-112,77.2,good

one sample per tag per minute for 31 days from 2026-10-01T00:00:00Z, rows
sorted by timestamp (all tags of a minute together). Python 3 standard
library only; deterministic (fixed seed, fixed gzip header time), so the
same file comes out on every run.

Scenario (hours from 2026-10-01T00:00Z; see README.md):
  * cold start-up 1: firing Oct 1 04:00, pressure and temperature ramp up
    over ~5 h, full load by early afternoon;
  * daily load swings: full load on weekday days, ~62 % at night, lower on
    weekends; metal temperatures and pressures follow load (sliding
    pressure);
  * shutdown Oct 10 21:00, two and a half days cooling to ambient, cold
    start-up 2 Oct 13 04:00;
  * two-shift operation from Oct 26: the fire goes off every night at
    23:00 (load ramps down from 21:30) and the unit hot-starts at 05:00
    with a one-hour ramp; at each fire-off the SH2 outlet header's steam is
    quenched by the attemperator spray (about 80 K in 10 minutes), and its
    mid-wall thermocouple lags the steam by about 5 minutes, so the header's
    nozzle bore sees a stress cycle every day (U2.SH2.TE-231 steam,
    U2.SH2.TE-232 mid-wall; their noise comes from a random stream of their
    own, so every other tag's values are as before wherever the unit runs as
    before);
  * over-temperature excursion on SH3 outlet leg A (TE-311A): Oct 16
    09:00-15:00, about 25-35 K above normal;
  * failing thermocouple TE-311B (outlet leg B): drifting upwards and
    increasingly noisy from Oct 21 00:00 (with burnout spikes that are out
    of range, and some samples the historian marks "uncertain"), quality
    "bad" Oct 24 06:00 - Oct 25 06:00, no rows at all (stale) Oct 25
    06:00 - 18:00, then repaired and back to normal;
  * fretting load and slip of the SH1 support follow load; the HP control
    valve stem moves more while load changes;
  * three deliberately malformed rows on Oct 19 around 12:00 (see
    MALFORMED_ROWS below);
  * one tag, U2.UNIT.JT-001 (unit gross load, MW), is exported by the
    historian but deliberately not configured: replay counts it as an
    unknown tag.

Regenerate:  python3 config/demo/generate_history.py
"""

import gzip
import io
import math
import os
import random
from datetime import datetime, timedelta, timezone

SEED = 20261001
START = datetime(2026, 10, 1, tzinfo=timezone.utc)
DAYS = 31
MINUTES = DAYS * 24 * 60
OUT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "history.csv.gz")

AMBIENT_C = 24.0

# Events, in hours from START.
FIRE_ON = [4.0, 12 * 24 + 4.0]          # Oct 1 04:00, Oct 13 04:00
FIRE_OFF = [9 * 24 + 21.0]               # Oct 10 21:00 (load ramps down first)
TWO_SHIFT_DAYS = range(25, 31)            # Oct 26 - Oct 31: fire off 23:00, hot start 05:00
FIRE_OFF += [d * 24 + 23.0 for d in TWO_SHIFT_DAYS]
FIRE_ON += [(d + 1) * 24 + 5.0 for d in TWO_SHIFT_DAYS if d + 1 < 31]
HOT_STARTUP_RAMP_H = 1.0                 # firing to minimum load, hot start
HOT_WARMTH = 0.2                         # warmer than this at firing: a hot start
QUENCH_K = 80.0                          # SH2 header steam drop at fire-off (spray)
QUENCH_MIN = 10.0                        # ... reached in this many minutes
QUENCH_RECOVER_MIN = 60.0                # ... then recovering to the warmth model
HDR_LAG_MIN = 5.0                        # mid-wall thermocouple lag behind the steam
STARTUP_RAMP_H = 5.0                     # firing to minimum-load conditions
MIN_LOAD = 0.35
LOAD_UP_H = 2.5                          # minimum load to demand after the ramp
SHUTDOWN_RAMP_H = 1.5                    # demand to minimum load before fire-off
COOL_TAU_H = 12.0                        # metal cooling time constant, fire off
DEPRESS_TAU_H = 5.0                      # pressure decay time constant, fire off

EXCURSION = (15 * 24 + 9.0, 15 * 24 + 15.0)   # Oct 16 09:00-15:00, TE-311A
EXCURSION_K = 30.0

TC_DRIFT = (20 * 24 + 0.0, 23 * 24 + 6.0)     # Oct 21 00:00 - Oct 24 06:00
TC_BAD = (23 * 24 + 6.0, 24 * 24 + 6.0)       # Oct 24 06:00 - Oct 25 06:00
TC_SILENT = (24 * 24 + 6.0, 24 * 24 + 18.0)   # Oct 25 06:00 - 18:00, no rows
TC_DRIFT_K = 16.0
BURNOUT_C = 1372.0                            # type K upscale burnout reading

# Three deliberately malformed rows, written on Oct 19 right after the
# 12:00 minute, so that replay shows its malformed-row report (each is
# counted with its line number; none stops the replay):
#   1. a non-numeric value,
#   2. a row with the value field missing,
#   3. an impossible timestamp (hour 25).
MALFORMED_AT_MIN = (18 * 24 + 12) * 60
MALFORMED_ROWS = [
    "2026-10-19T12:00:00Z,U2.SH3.PT-301,n/a,good",
    "2026-10-19T12:00:00Z,U2.SH3.TE-321",
    "2026-10-19T25:00:00Z,U2.MS.PT-401,163.2,good",
]

BAR_PER_PSI = 0.0689475729  # 1 psi = 6894.757 Pa


def smoothstep(x):
    x = min(max(x, 0.0), 1.0)
    return x * x * (3.0 - 2.0 * x)


def c_to_f(t_c):
    return t_c * 1.8 + 32.0


def demand(h):
    """Dispatch demand (fraction of full load) at hour h from START."""
    day = int(h // 24)
    hod = h - 24 * day
    weekday = (START + timedelta(days=day)).weekday()  # 0 = Monday
    if weekday >= 5:  # weekend
        lo, hi, up0, up1, dn0, dn1 = 0.55, 0.85, 8.0, 9.5, 20.0, 21.5
    else:
        lo, hi, up0, up1, dn0, dn1 = 0.62, 1.0, 5.5, 7.0, 21.5, 23.0
    if hod < up0 or hod >= dn1:
        return lo
    if hod < up1:
        return lo + (hi - lo) * smoothstep((hod - up0) / (up1 - up0))
    if hod < dn0:
        return hi
    return hi - (hi - lo) * smoothstep((hod - dn0) / (dn1 - dn0))


class Unit:
    """Unit state per minute: load, warmth (temperature) and pressure factor."""

    def __init__(self):
        self.state = "off"
        self.since = 0.0
        self.w_off = 0.0      # warmth when the fire went off (0: cold from the start)
        self.p_off = 0.0
        self.load_off = MIN_LOAD
        self.last_load = MIN_LOAD
        self.load_start = MIN_LOAD
        self.w_on = 0.0       # warmth and pressure at firing (0: a cold start)
        self.p_on = 0.0
        self.fire_on = {round(t * 60) for t in FIRE_ON}
        self.stop = {round((t - SHUTDOWN_RAMP_H) * 60) for t in FIRE_OFF}

    def at(self, m):
        """Returns (load, warmth, pressure factor, load seen by the metal)."""
        h = m / 60.0
        if m in self.fire_on:
            u = h - self.since
            w0 = self.w_off * math.exp(-u / COOL_TAU_H) if self.state == "off" else 0.0
            p0 = self.p_off * math.exp(-u / DEPRESS_TAU_H) if self.state == "off" else 0.0
            # A cold start ramps from cold (the small warmth left after days
            # off is ignored, as it always was); a hot start from where it is.
            self.w_on, self.p_on = (w0, p0) if w0 > HOT_WARMTH else (0.0, 0.0)
            self.state, self.since = "starting", h
        if m in self.stop:
            self.state, self.since = "stopping", h
            self.load_start = self.last_load
        d = demand(h)
        if self.state == "off":
            u = h - self.since
            w = self.w_off * math.exp(-u / COOL_TAU_H)
            p = self.p_off * math.exp(-u / DEPRESS_TAU_H)
            return 0.0, w, p, self.load_off
        if self.state == "starting":
            u = h - self.since
            ramp = HOT_STARTUP_RAMP_H if self.w_on > 0.0 else STARTUP_RAMP_H
            if u < ramp:
                x = u / ramp
                # Temperatures lead pressure on a cold start.
                w = self.w_on + (1.0 - self.w_on) * smoothstep(x) ** 0.8
                p = self.p_on + (1.0 - self.p_on) * smoothstep(x) ** 1.6
                return MIN_LOAD * x, w, p, MIN_LOAD
            v = u - ramp
            load = min(d, MIN_LOAD + (1.0 - MIN_LOAD) * v / LOAD_UP_H)
            if load >= d:
                self.state = "running"
            self.last_load = load
            return load, 1.0, 1.0, max(load, MIN_LOAD)
        if self.state == "stopping":
            u = h - self.since
            if u < SHUTDOWN_RAMP_H:
                load = self.load_start + (MIN_LOAD - self.load_start) * (u / SHUTDOWN_RAMP_H)
                self.last_load = load
                return load, 1.0, 1.0, load
            # Fire off: metal cools and the boiler depressurises.
            self.state, self.since = "off", h
            self.w_off, self.p_off, self.load_off = 1.0, 1.0, MIN_LOAD
            return self.at(m)
        # running
        self.last_load = d
        return d, 1.0, 1.0, d


class AR1:
    """First-order autoregressive noise with standard deviation sigma and
    correlation time tau (minutes)."""

    def __init__(self, rng, sigma, tau_min):
        self.rng, self.sigma = rng, sigma
        self.a = math.exp(-1.0 / tau_min)
        self.b = sigma * math.sqrt(1.0 - self.a * self.a)
        self.x = 0.0

    def step(self):
        self.x = self.a * self.x + self.b * self.rng.gauss(0.0, 1.0)
        return self.x


def metal(t_full, slope, lx, w):
    """Metal temperature, degC: full-load value minus slope per unit load
    below full, scaled by warmth between ambient and hot."""
    hot = t_full - slope * (1.0 - lx)
    return AMBIENT_C + w * (hot - AMBIENT_C)


def main():
    rng = random.Random(SEED)
    unit = Unit()
    gas = AR1(rng, 1.5, 40.0)        # common fireside disturbance, SH temps
    exc_wander = AR1(rng, 2.5, 20.0)  # wander of the excursion
    casing = None                     # HP casing lags main steam
    hdr_rng = random.Random(SEED + 2)  # the SH2 header's own noise stream
    hdr_wall = None                   # SH2 header mid-wall temperature
    fire_off_min = None               # minute of the newest fire-off
    prev_load = 0.0
    out = io.StringIO()
    out.write("timestamp,tag,value,quality\n")
    rows = 0
    for m in range(MINUTES):
        h = m / 60.0
        ts = (START + timedelta(minutes=m)).strftime("%Y-%m-%dT%H:%M:%SZ")
        load, w, pf, lx = unit.at(m)
        firing = load > 0.0
        g = gas.step() * w
        n = rng.gauss

        # Pressures, bar gauge. Sliding pressure: SH outlet 166 bar at full
        # load, lower at part load; the drum sits above it by the SH
        # pressure drop; the turbine inlet below it by the line drop.
        p_out_hot = 166.0 * (0.55 + 0.45 * lx)
        p_out = pf * p_out_hot
        p_drum = p_out + pf * (12.0 * lx * lx + 2.0)
        p_ms = max(p_out - pf * 6.0 * lx * lx, 0.0)

        t_sh1 = metal(492.0, 30.0, lx, w) + 0.6 * g
        t_sh2 = metal(618.0, 35.0, lx, w) + g
        t_a = metal(561.0, 25.0, lx, w) + g
        t_b = metal(556.0, 25.0, lx, w) + 0.9 * g
        t_hdr = metal(558.0, 18.0, lx, w) + 0.5 * g
        t_ms = metal(538.0, 14.0, lx, w) + 0.3 * g
        target_cas = metal(528.0, 20.0, lx, w)
        casing = target_cas if casing is None else casing + (target_cas - casing) / 90.0
        t_cas = casing

        # SH2 outlet header (thick-walled, two-shift): steam temperature with
        # the spray quench at each fire-off, and the mid-wall lagging it.
        if unit.state == "off" and prev_load > 0.0:
            fire_off_min = m
        t_steam = metal(505.0, 20.0, lx, w)
        if fire_off_min is not None and unit.state == "off":
            k = m - fire_off_min
            dip = min(k / QUENCH_MIN, 1.0) * (1.0 if k < QUENCH_MIN else math.exp(-(k - QUENCH_MIN) / QUENCH_RECOVER_MIN))
            t_steam -= QUENCH_K * dip
        hdr_wall = t_steam if hdr_wall is None else hdr_wall + (t_steam - hdr_wall) * (1.0 - math.exp(-1.0 / HDR_LAG_MIN))

        # Over-temperature excursion on leg A: 15-minute rise, 20-minute fall.
        e0, e1 = EXCURSION
        if e0 <= h < e1:
            up = smoothstep((h - e0) / 0.25)
            down = smoothstep((e1 - h) / 0.33)
            t_a += min(up, down) * (EXCURSION_K + exc_wander.step())

        # Fretting at the SH1 support: flow-induced vibration grows with
        # flue-gas flow (about load squared); contact load with thermal
        # growth and load.
        slip = max(48.0 * load * load + n(0.0, 1.2) * (1.0 if firing else 0.2), 0.0)
        f_n = max(35.0 + 65.0 * load * w + n(0.0, 2.0), 0.0)

        # HP control valve stem speed: small dither in service, more while
        # the load changes; still when the unit is off.
        dl = abs(load - prev_load) * 60.0  # load fraction per hour
        prev_load = load
        stem = 0.0
        if firing:
            stem = max(0.06 + 2.0 * dl + abs(n(0.0, 0.02)), 0.0)

        unit_mw = 48.0 * load + (n(0.0, 0.15) if firing else 0.0)

        # Thermocouple TE-311B: drift, then bad, then silent, then repaired.
        q_b = "good"
        v_b = t_b + n(0.0, 0.4)
        write_b = True
        d0, d1 = TC_DRIFT
        if d0 <= h < d1:
            x = (h - d0) / (d1 - d0)
            v_b += TC_DRIFT_K * x + n(0.0, 0.6 + 6.0 * x * x)
            if x > 0.5 and rng.random() < 0.006:
                v_b = BURNOUT_C            # burnout spike: out of range
            elif x > 0.6 and rng.random() < 0.3 * x:
                q_b = "uncertain"
        elif TC_BAD[0] <= h < TC_BAD[1]:
            v_b = BURNOUT_C if rng.random() < 0.8 else 300.0 + 400.0 * rng.random()
            q_b = "bad"
        elif TC_SILENT[0] <= h < TC_SILENT[1]:
            write_b = False

        values = [
            ("U2.UNIT.JT-001", f"{unit_mw:.2f}", "good"),
            ("U2.SH1.TE-112", f"{c_to_f(t_sh1 + n(0.0, 0.5)):.1f}", "good"),
            ("U2.DRUM.PT-101", f"{(p_drum + n(0.0, 0.3) * pf) / BAR_PER_PSI:.1f}", "good"),
            ("U2.SH2.TE-221", f"{t_sh2 + n(0.0, 0.6):.1f}", "good"),
            ("U2.SH3.TE-311A", f"{t_a + n(0.0, 0.5):.1f}", "good"),
        ]
        if write_b:
            values.append(("U2.SH3.TE-311B", f"{v_b:.1f}", q_b))
        values += [
            ("U2.SH3.TE-321", f"{t_hdr + n(0.0, 0.3):.1f}", "good"),
            ("U2.SH3.PT-301", f"{(p_out + n(0.0, 0.25) * pf) / 10.0:.3f}", "good"),
            ("U2.MS.TE-401", f"{c_to_f(t_ms + n(0.0, 0.3)):.1f}", "good"),
            ("U2.MS.PT-401", f"{p_ms + n(0.0, 0.25) * pf:.2f}", "good"),
            ("U2.HPT.TE-501", f"{t_cas + n(0.0, 0.3):.1f}", "good"),
            ("U2.SH1.WT-171", f"{f_n:.1f}", "good"),
            ("U2.SH1.ZT-172", f"{slip:.1f}", "good"),
            ("U2.HPCV1.ST-511", f"{stem:.3f}", "good"),
            ("U2.SH2.TE-231", f"{t_steam + hdr_rng.gauss(0.0, 0.3):.1f}", "good"),
            ("U2.SH2.TE-232", f"{hdr_wall + hdr_rng.gauss(0.0, 0.2):.1f}", "good"),
        ]
        for tag, v, q in values:
            out.write(f"{ts},{tag},{v},{q}\n")
            rows += 1
        if m == MALFORMED_AT_MIN:
            for r in MALFORMED_ROWS:  # deliberately malformed, see above
                out.write(r + "\n")
                rows += 1

    data = out.getvalue().encode("ascii")
    with open(OUT, "wb") as f:
        # mtime=0 and no file name in the header: byte-identical output.
        with gzip.GzipFile(filename="", mode="wb", fileobj=f, compresslevel=9, mtime=0) as gz:
            gz.write(data)
    print(f"wrote {OUT}: {rows} rows, {len(data) / 1e6:.1f} MB raw, "
          f"{os.path.getsize(OUT) / 1e6:.1f} MB gzip")


if __name__ == "__main__":
    main()
