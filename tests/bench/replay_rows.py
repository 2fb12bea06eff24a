#!/usr/bin/env python3
"""Writes the replay benchmark's input: a plant of N pressure parts, each with
one temperature and one pressure tag sampled every minute, as long-format CSV
(timestamp,tag,value,quality), plus the matching configuration.

Usage: replay_rows.py OUT_DIR ROWS [COMPONENTS]
Synthetic data for benchmarking only."""
import math, os, sys

out, rows = sys.argv[1], int(sys.argv[2])
n = int(sys.argv[3]) if len(sys.argv) > 3 else 20
os.makedirs(out, exist_ok=True)
with open(os.path.join(out, "bench.toml"), "w") as f:
    for i in range(n):
        f.write(f'''[[tag]]
name = "B.TE-{i:03d}"
unit = "degC"
[[tag]]
name = "B.PT-{i:03d}"
unit = "bar"
[[component]]
name = "BENCH-{i:03d}"
kind = "tube"
material = "2.25Cr-1Mo"
design_temperature = {{ value = 570, unit = "degC" }}
design_pressure = {{ value = 180, unit = "bar" }}
metal_temperature = "B.TE-{i:03d}"
pressure = "B.PT-{i:03d}"
[component.geometry]
outside_diameter = {{ value = 44.5, unit = "mm" }}
wall = {{ value = 6.3, unit = "mm" }}
''')
t0 = 1790812800  # 2026-10-01T00:00:00Z
per_minute = 2 * n
minutes = rows // per_minute
with open(os.path.join(out, "bench.csv"), "w") as f:
    f.write("timestamp,tag,value,quality\n")
    buf = []
    for m in range(minutes):
        ts = t0 + 60 * m
        d, r = divmod(ts, 86400)
        # epoch seconds keep the generator fast; RFC 3339 is tested elsewhere
        for i in range(n):
            t = 545.0 + 10.0 * math.sin(m / 240.0 + i)
            buf.append(f"{ts},B.TE-{i:03d},{t:.2f},good\n")
            buf.append(f"{ts},B.PT-{i:03d},{175.0 + 3.0 * math.cos(m / 90.0):.2f},good\n")
        if len(buf) > 100000:
            f.write("".join(buf)); buf.clear()
    f.write("".join(buf))
print(minutes * per_minute)
