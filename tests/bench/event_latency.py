#!/usr/bin/env python3
"""Commit-to-event-message latency of `lifeledger run` (see BENCHMARKS.md).

Starts mosquitto on a free loopback port and the given lifeledger binary
(no database), feeds one sample so the component has alarm records, then
alternates HTTP shelve / unshelve commands on it. The HTTP answer comes
after the commit; the figure is the time from sending the command to the
receipt of its event on `lifeledger/alarms/events` (QoS 1 subscriber).

    python3 tests/bench/event_latency.py BINARY [ROUNDS]

Needs /usr/sbin/mosquitto and the paho-mqtt package. Every wait is bounded.
"""
import json, os, socket, subprocess, sys, tempfile, threading, time, urllib.request

import paho.mqtt.client as mqtt

TOKEN = "bench-latency-token"


def free_port():
    s = socket.socket()
    s.bind(("127.0.0.1", 0))
    p = s.getsockname()[1]
    s.close()
    return p


def wait(what, probe, limit_s=60.0):
    end = time.monotonic() + limit_s
    while time.monotonic() < end:
        v = probe()
        if v:
            return v
        time.sleep(0.02)
    raise SystemExit(f"gave up waiting for {what} after {limit_s} s")


def main():
    binary = sys.argv[1]
    rounds = int(sys.argv[2]) if len(sys.argv) > 2 else 40
    d = tempfile.mkdtemp(prefix="lifeledger-latency-")
    mport, hport = free_port(), free_port()
    with open(f"{d}/mosquitto.conf", "w") as f:
        f.write(f"listener {mport} 127.0.0.1\nallow_anonymous true\npersistence false\n")
    broker = subprocess.Popen(["/usr/sbin/mosquitto", "-c", f"{d}/mosquitto.conf"], stderr=subprocess.DEVNULL)
    wait("mosquitto", lambda: socket.socket().connect_ex(("127.0.0.1", mport)) == 0)
    cfg = f"""[plant]
name = "Latency Station"
[[tag]]
name = "SENT"
unit = "degC"
valid_range = [0, 800]
[[component]]
name = "SENTINEL"
unit = "U1"
kind = "tube"
material = "2.25Cr-1Mo"
design_temperature = {{ value = 570, unit = "degC" }}
design_pressure = {{ value = 180, unit = "bar" }}
metal_temperature = "SENT"
pressure = {{ value = 160, unit = "bar" }}
[component.geometry]
outside_diameter = {{ value = 44.5, unit = "mm" }}
wall = {{ value = 5.0, unit = "mm" }}
[mqtt]
port = {mport}
client_id = "lifeledger-latency"
[[mqtt.subscription]]
topic = "plant/{{tag}}"
[store]
path = "{d}/ledger.sqlite"
[http]
listen = "127.0.0.1:{hport}"
token_env = "LATENCY_TOKEN"
"""
    with open(f"{d}/service.toml", "w") as f:
        f.write(cfg)
    env = dict(os.environ, LATENCY_TOKEN=TOKEN, RUST_LOG="warn")
    log = open(f"{d}/service.log", "w")
    svc = subprocess.Popen([binary, "run", "--config", f"{d}/service.toml", "--init-ledger"], env=env,
                           stdout=subprocess.DEVNULL, stderr=log)
    got = []
    lock = threading.Lock()

    def on_message(_c, _u, m):
        with lock:
            got.append((time.monotonic(), json.loads(m.payload)))

    sub = mqtt.Client(mqtt.CallbackAPIVersion.VERSION2, client_id="latency-listener")
    sub.on_message = on_message
    sub.connect("127.0.0.1", mport)
    sub.subscribe("lifeledger/alarms/events", qos=1)
    sub.loop_start()

    def get(path):
        try:
            with urllib.request.urlopen(f"http://127.0.0.1:{hport}{path}", timeout=5) as r:
                return json.loads(r.read())
        except Exception:
            return None

    def command(body):
        req = urllib.request.Request(f"http://127.0.0.1:{hport}/api/alarms/command", data=json.dumps(body).encode(),
                                     headers={"Authorization": f"Bearer {TOKEN}"}, method="POST")
        with urllib.request.urlopen(req, timeout=30) as r:
            return r.status

    try:
        wait("the service's snapshot", lambda: get("/api/components"))
        pub = mqtt.Client(mqtt.CallbackAPIVersion.VERSION2, client_id="latency-publisher")
        pub.connect("127.0.0.1", mport)
        pub.loop_start()
        # A good sample, then one out of range: the tag's sensor alarm
        # gives the commands something to shelve.
        pub.publish("plant/SENT", json.dumps({"value": 550.0, "timestamp": 1790812800}), qos=1).wait_for_publish(10)
        pub.publish("plant/SENT", json.dumps({"value": 900.0, "timestamp": 1790812860}), qos=1).wait_for_publish(10)
        if os.environ.get("LATENCY_DEBUG"):
            time.sleep(5)
            print(json.dumps((get("/api/components") or {}).get("alarms"))[:2000], (get("/api/components") or {}).get("engine"))
        wait("SENTINEL's alarm records", lambda: any(
            c.get("component") == "SENTINEL" and c.get("alarms") for c in (get("/api/components") or {}).get("alarms", [])))
        time.sleep(1.0)
        lat, http_ms = [], []
        for i in range(rounds):
            action = "shelve" if i % 2 == 0 else "unshelve"
            body = {"action": action, "tag": "SENT", "by": "bench"}
            if action == "shelve":
                body.update(duration_h=1, reason="latency probe")
            with lock:
                n0 = len(got)
            t0 = time.monotonic()
            status = command(body)
            t1 = time.monotonic()
            if status != 200:
                raise SystemExit(f"command {body} answered {status}")
            def arrived():
                with lock:
                    return next((t for t, v in got[n0:] if v.get("transition") in ("shelved", "unshelved")), None)
            t2 = wait(f"the event of {action} #{i}", arrived, 30)
            lat.append((t2 - t0) * 1000)
            http_ms.append((t1 - t0) * 1000)
            time.sleep(0.2)
        lat.sort()
        http_ms.sort()
        q = lambda xs, p: xs[min(len(xs) - 1, int(p * len(xs)))]
        print(f"{binary}: {rounds} commands; command to event message p50 {q(lat, .5):.1f} ms, p90 {q(lat, .9):.1f} ms, "
              f"max {lat[-1]:.1f} ms; command answered (after commit) p50 {q(http_ms, .5):.1f} ms; "
              f"load {open('/proc/loadavg').read().split()[:3]}")
    finally:
        svc.terminate()
        try:
            svc.wait(15)
        except subprocess.TimeoutExpired:
            svc.kill()
        sub.loop_stop()
        broker.terminate()
        broker.wait(10)


if __name__ == "__main__":
    main()
