#!/usr/bin/env python3
"""Records every public and admin response of a hodos binary, so two builds
can be compared byte for byte (a refactor that claims "no change of
behaviour" is run before and after over the same requests).

Usage:

    python3 tests/py/record_responses.py --hodos BIN --out FILE.json
        [--nodes 400] [--seed 7] [--model FILE] [--keep]
    python3 tests/py/record_responses.py --compare A.json B.json

Recording makes a temp dir, builds a synthetic city with `BIN build
--synthetic N --seed S`, lists its segments (`BIN segments`, CSV and
GeoJSON), writes speed tables, live batches and completed trips from them
(deterministically: fixed departures, a fixed-seed generator), trains a
correction model with `BIN train` (unless --model gives one), writes a
config (two regions: `testcity` serving the city, `nomap` whose artifact
does not exist; listeners on 127.0.0.1 port 0, the bound ports read from
the log; a state_dir per region; an admin token; short body timeouts so a
stalled body answers 408 quickly), starts `BIN serve`, waits for /readyz,
then sends a fixed list of requests in phases (probes, documents, answers
and refusals with no live data; live batches; historical tables; a
correction model; completed trips; reloads; stalled bodies), one
connection per request. It then stops the server and starts it again on
the same state dirs with `ready_when = "all_regions"` (what was
acknowledged must still serve; /readyz is 503 while `nomap` has no graph)
and sends a last phase. Every response is written: status, the headers that
matter (content-type, content-encoding, vary, allow, www-authenticate,
cache-control, retry-after) and the body (JSON parsed, gzip bodies
decompressed first, with the SHA-256 of the bytes beside it whenever
nothing in it was normalised, so number formatting and spacing count too;
text as text; other encodings and large static assets
as length and SHA-256; /metrics as the sorted set of series names with
their label keys, plus the TYPE and HELP lines, never values). Both
OpenAPI documents are recorded whole, and the script checks that every
operation they list was sent at least once (the `coverage` entry; an
uncovered operation makes the recording exit 2).

The server is stopped by its PID (SIGTERM, then SIGKILL after 15 s), and
every wait is bounded: 60 s for the listeners' log line, 120 s for
readiness, 30 s for a live batch to serve, 60 s per request, 15 minutes
for training. Before the first request to each server the script waits
(at most 10 s, then goes on) until /metrics shows the region's data-age
gauges, which the live loop sets on its first tick: whether the first
scrape saw them would otherwise depend on timing.

Normalised, and why (everything else is recorded as the service sent it):

- Timestamps: the JSON keys `at`, `trained_at` and `at_ms`, and any
  date-time inside a string that lies within 7 days of the run (fixed
  departures of the requests are in 2025 and stay as they are): they are
  the wall clock of the run.
- Ages: `speeds_age_s`, `historical_age_s`, `live_newest_age_s` and the
  dashboard's `live_age_s` / `historical_age_s` maps (values only): seconds
  since a table was written or an observation stamped, i.e. wall clock.
  A null stays null.
- Durations: `build_s` (profile customization time), the dashboard's
  latency `sum_s` and its cumulative bucket counts (which bucket a request
  falls in is its elapsed time; the total `count` is kept), and "N s in
  the future" in a refused observation's message (measured against the
  server's clock).
- Generation counters, from the first live batch on only: the live layer
  is re-blended and republished every 20 x `live.recustomize_ms` while it
  holds fresh observations, so how many generations pass depends on time
  (`generation`, `serving_generation`). Before the first live batch every
  generation is recorded as sent.
- `hour_of_week` of answers leaving now: replaced by `<now>` when it is
  the current hour of week in the region's zone at the time of the request
  (any other value is kept, and shows as a difference).
- The two CRC-32 values in the message refusing a bit-flipped model
  (`stored ..., computed ...`): the model file holds its training time, so
  its checksum differs on every run that trains one.
- Temp paths (the run's temp dir becomes `<tmp>`) and the two bound ports
  (`<public-port>`, `<admin-port>`).
- Request bodies are recorded as their length and SHA-256 after the same
  normalisation (live batches carry observation times near now); model
  uploads by their length only (the file holds its training time).
- The build commit in `hodos_build_info`: /metrics is recorded without
  label values at all, so it never appears.

Determinism by design rather than normalisation: live observations are
stamped 600 s in the future (the config allows 900 s of skew), so their
blend weight is exactly 1 and answers on live edges do not depend on how
old the batch is; answers leaving now are asked only while the serving
historical table is the same in every hour of the week; every other
departure is a fixed instant; budgets are never small enough to be missed.

Comparing prints every difference, case by case and path by path, and
exits 1 when there is one (0 when the recordings are identical apart from
their `meta` entry, which names the binary and is printed, not compared).
"""

import argparse
import datetime as dt
import gzip
import hashlib
import http.client
import json
import math
import os
import re
import shutil
import signal
import subprocess
import sys
import tempfile
import time
import zoneinfo

REGION = "testcity"
BROKEN = "nomap"
ZONE = "America/New_York"
TOKEN = "record-responses-token"
# Observations this far in the future count as age 0 (weight 1); the
# config's max_future_skew_s must allow it.
LIVE_AHEAD_S = 600
FUTURE_SKEW_S = 900.0
# Departures of the requests: fixed instants, several hours of the week
# in several offsets, across both changes of the region's clocks in 2025.
DEPARTURES = [
    ("mon-0815-est", "2025-11-03T08:15:00-05:00"),
    ("mon-0815-utc", "2025-11-03T13:15:00Z"),
    ("wed-1730", "2025-11-05T17:30:00-05:00"),
    ("thu-1200", "2025-11-06T12:00:00-05:00"),
    ("sat-0300", "2025-11-08T03:00:00-05:00"),
    ("sun-0800-cet", "2025-11-09T14:00:00+01:00"),
    ("spring-gap", "2025-03-09T07:30:00Z"),
    ("fall-back", "2025-11-02T01:30:00-04:00"),
]
KEEP_HEADERS = (
    "content-type",
    "content-encoding",
    "vary",
    "allow",
    "www-authenticate",
    "cache-control",
    "retry-after",
)
# Bodies longer than this that are not JSON are recorded by hash.
MAX_TEXT = 16384
REQUEST_TIMEOUT_S = 60.0


# --------------------------------------------------------------------------
# Small deterministic helpers


class SplitMix:
    """SplitMix64 (Steele, Lea & Flood, 2014): a fixed-seed generator whose
    output is the same on every machine and Python version."""

    def __init__(self, seed):
        self.s = seed & 0xFFFFFFFFFFFFFFFF

    def next(self):
        self.s = (self.s + 0x9E3779B97F4A7C15) & 0xFFFFFFFFFFFFFFFF
        z = self.s
        z = ((z ^ (z >> 30)) * 0xBF58476D1CE4E5B9) & 0xFFFFFFFFFFFFFFFF
        z = ((z ^ (z >> 27)) * 0x94D049BB133111EB) & 0xFFFFFFFFFFFFFFFF
        return z ^ (z >> 31)

    def unit(self):
        return (self.next() >> 11) / float(1 << 53)

    def below(self, n):
        return self.next() % n


def haversine_m(a, b):
    """Great-circle distance on a sphere of radius 6,371 km."""
    (lat1, lon1), (lat2, lon2) = a, b
    p1, p2 = math.radians(lat1), math.radians(lat2)
    dp, dl = p2 - p1, math.radians(lon2 - lon1)
    h = math.sin(dp / 2) ** 2 + math.cos(p1) * math.cos(p2) * math.sin(dl / 2) ** 2
    return 2 * 6371000.0 * math.asin(math.sqrt(h))


def iso(t):
    """RFC 3339 in UTC with milliseconds."""
    return t.astimezone(dt.timezone.utc).strftime("%Y-%m-%dT%H:%M:%S.%f")[:-3] + "Z"


def now_hour_of_week():
    t = dt.datetime.now(zoneinfo.ZoneInfo(ZONE))
    return t.weekday() * 24 + t.hour


def sha256(b):
    return hashlib.sha256(b).hexdigest()


def run(cmd, log, timeout=600):
    """Runs a command of the binary, its output appended to `log`."""
    with open(log, "ab") as f:
        f.write(("$ " + " ".join(cmd) + "\n").encode())
        f.flush()
        p = subprocess.run(cmd, stdout=f, stderr=subprocess.STDOUT, timeout=timeout)
    if p.returncode != 0:
        raise SystemExit(f"failed ({p.returncode}): {' '.join(cmd)}; see {log}")


# --------------------------------------------------------------------------
# The city and the files made from it


class City:
    def __init__(self, geojson_path):
        with open(geojson_path) as f:
            doc = json.load(f)
        self.segments = []
        nodes = {}
        for feat in doc["features"]:
            p = feat["properties"]
            coords = feat["geometry"]["coordinates"]
            seg = {
                "segment": p["segment"],
                "way": p.get("way"),
                "tail": p["tail"],
                "head": p["head"],
                "kmh": float(p["kmh"]),
                "length_m": float(p["length_m"]),
            }
            self.segments.append(seg)
            nodes[p["tail"]] = (coords[0][1], coords[0][0])
            nodes[p["head"]] = (coords[-1][1], coords[-1][0])
        self.segments.sort(key=lambda s: s["segment"])
        self.nodes = [nodes[k] for k in sorted(nodes)]
        lats = [p[0] for p in self.nodes]
        lons = [p[1] for p in self.nodes]
        self.extent = (min(lats), min(lons), max(lats), max(lons))

    def point(self, i, dlat=0.0, dlon=0.0):
        lat, lon = self.nodes[i % len(self.nodes)]
        return {"lat": round(lat + dlat, 6), "lon": round(lon + dlon, 6)}

    def coverage(self):
        """The extent and 0.05 degrees around it: points in the margin are
        covered but off the network."""
        a, b, c, d = self.extent
        return [round(a - 0.05, 4), round(b - 0.05, 4), round(c + 0.05, 4), round(d + 0.05, 4)]

    def off_network(self):
        a, b, c, d = self.extent
        return {"lat": round(a - 0.03, 6), "lon": round((b + d) / 2, 6)}


def hour_factor(h):
    """Six distinct hour classes, so the table needs k-means (4 profiles)."""
    day, hod = divmod(h, 24)
    if day < 5:
        if 7 <= hod <= 9:
            return 0.55
        if 16 <= hod <= 18:
            return 0.6
        if 10 <= hod <= 15:
            return 0.85
        if 19 <= hod <= 22:
            return 0.9
        return 1.0
    return 0.8 if 10 <= hod <= 20 else 1.0


def seg_spread(s):
    return 0.9 + 0.02 * ((s["segment"] * 37) % 11)


def key_cells(s):
    """The segment key of a row, in varied forms: `segment`; `tail,head`;
    `way,tail,head`; `segment` with its own way (must agree)."""
    k = s["segment"] % 10
    way = "" if s["way"] is None else str(s["way"])
    if k == 4:
        return ["", "", str(s["tail"]), str(s["head"])]
    if k == 6 and way:
        return ["", way, str(s["tail"]), str(s["head"])]
    if k == 8 and way:
        return [str(s["segment"]), way, "", ""]
    return [str(s["segment"]), "", "", ""]


def flat_table(city):
    """The configured table: the same speed in every hour (so an answer
    leaving now does not depend on the hour it is asked in)."""
    rows = ["segment,way,tail,head,hour_of_week,kmh"]
    for s in city.segments:
        if s["segment"] % 3 != 0:
            continue
        kmh = round(s["kmh"] * 0.8 * seg_spread(s), 1)
        for h in range(168):
            rows.append(",".join(key_cells(s) + [str(h), str(kmh)]))
    return "\n".join(rows) + "\n"


def varied_table(city, bad_rows=True):
    rows = ["segment,way,tail,head,hour_of_week,kmh"]
    for s in city.segments:
        if s["segment"] % 2 != 0:
            continue
        for h in range(168):
            kmh = round(s["kmh"] * hour_factor(h) * seg_spread(s), 1)
            rows.append(",".join(key_cells(s) + [str(h), str(kmh)]))
    if bad_rows:
        s0, s1 = city.segments[0], city.segments[1]
        rows += [
            "999999,,,,8,30",  # unknown_edge
            f"{s0['segment']},,{s1['tail']},{s1['head']},8,30",  # segment_mismatch
            f"{s0['segment']},,,,8,0",  # nonpositive_speed
            f"{s0['segment']},,,,8,NaN",  # not_a_number
            f"{s0['segment']},,,,8,250",  # over_max_speed
            f"{s0['segment']},,,,168,30",  # bad_hour
            f"{s0['segment']},,,,8",  # malformed_row
            ",,,,8,30",  # no key
        ]
    return "\n".join(rows) + "\n"


def mostly_bad_table(city):
    rows = ["segment,way,tail,head,hour_of_week,kmh"]
    for i, s in enumerate(city.segments[:40]):
        rows.append(f"{s['segment']},,,,{i % 168},{'-3' if i % 2 else '30'}")
    return "\n".join(rows) + "\n"


def live_json(city, at, which):
    obs = []
    for s in city.segments:
        if s["segment"] % 5 != which:
            continue
        if s["segment"] % 10 >= 5:
            key = {"tail": s["tail"], "head": s["head"]}
        else:
            key = {"segment": s["segment"]}
        obs.append(dict(key, kmh=round(s["kmh"] * 0.5, 1), observed_at=at,
                        samples=1 + s["segment"] % 4))
    return obs


def live_csv(city, at, which):
    rows = ["segment,way,tail,head,kmh,observed_at,samples"]
    for s in city.segments:
        if s["segment"] % 5 != which:
            continue
        rows.append(",".join(key_cells(s) + [str(round(s["kmh"] * 0.45, 1)), at, "2"]))
    return rows


def trips_csv(city, n, seed, start, bad_rows=False):
    """Completed trips: node pairs and departures from a fixed-seed
    generator, durations from the great-circle distance, a circuity, the
    hour's factor and noise."""
    g = SplitMix(seed)
    zone = zoneinfo.ZoneInfo(ZONE)
    rows = [
        "id,from_lat,from_lon,to_lat,to_lon,leaving,duration_s,distance_m,"
        "vehicle,served_eta_s,served_tier,served_snapshot"
    ]
    for i in range(n):
        a = city.nodes[g.below(len(city.nodes))]
        b = city.nodes[g.below(len(city.nodes))]
        leave = start + dt.timedelta(minutes=int(g.below(28 * 24 * 60)))
        local = leave.astimezone(zone)
        h = local.weekday() * 24 + local.hour
        d = haversine_m(a, b)
        secs = max(60.0, d * 1.35 / (40.0 / 3.6 * hour_factor(h)) * (0.85 + 0.4 * g.unit()))
        served = ["", "", ""]
        if i % 3 == 0:
            tier = ["historical", "free_flow", "heuristic"][(i // 3) % 3]
            served = [f"{secs * 0.9:.1f}", tier, "3"]
        rows.append(
            ",".join(
                [
                    f"t{i}",
                    f"{a[0]:.6f}",
                    f"{a[1]:.6f}",
                    f"{b[0]:.6f}",
                    f"{b[1]:.6f}",
                    local.isoformat(),
                    f"{secs:.1f}",
                    f"{d * 1.3:.1f}",
                    "car",
                ]
                + served
            )
        )
    if bad_rows:
        a = city.nodes[0]
        rows += [
            f"b1,{a[0]},{a[1]},{a[0]},{a[1]},2025-11-03T08:00:00-05:00,-5,,car,,,",
            "b2,0,0,0,0,2025-11-03T08:00:00-05:00,600,,car,,,",
            f"b3,{a[0]},{a[1]},{a[0]},{a[1]},2025-11-03T08:00:00-05:00,600,,car,500,fast,",
            f"b4,{a[0]},{a[1]},{a[0]},{a[1]},2025-11-03 08:00:00,600,,car,,,",
            f"b5,{a[0]},{a[1]}",
            f"b6,{a[0]},{a[1]},{a[0]},{a[1]},2025-11-03T08:00:00-05:00,99999,,car,,,",
            f"b7,{a[0]},{a[1]},{a[0]},{a[1]},2025-11-03T08:00:00-05:00,600,-1,car,,,",
        ]
    return "\n".join(rows) + "\n"


def trips_jsonl(city, n, seed, start):
    lines = []
    for line in trips_csv(city, n, seed, start).splitlines()[1:]:
        c = line.split(",")
        t = {
            "id": c[0],
            "from": {"lat": float(c[1]), "lon": float(c[2])},
            "to": {"lat": float(c[3]), "lon": float(c[4])},
            "leaving": c[5],
            "duration_s": float(c[6]),
            "distance_m": float(c[7]),
        }
        if c[9]:
            t["served"] = {"eta_s": float(c[9]), "tier": c[10], "snapshot": int(c[11])}
        lines.append(json.dumps(t))
    lines.append('{"from": {"lat": 1, "lon": 2}}')
    lines.append("not json")
    lines.append('{"id":"u","from":{"lat":45,"lon":-30},"to":{"lat":45,"lon":-30},'
                 '"leaving":"2025-11-03T08:00:00Z","duration_s":60,"colour":"red"}')
    return "\n".join(lines) + "\n"


# --------------------------------------------------------------------------
# Normalisation


TS_RE = re.compile(
    r"\d{4}-\d\d-\d\d[T ]\d\d:\d\d:\d\d(?:\.\d+)?(?:Z|[+-]\d\d:?\d\d| UTC)?"
)
FUTURE_RE = re.compile(r"is -?\d+(?:\.\d+)? s in the future")
CRC_RE = re.compile(r"\(stored [0-9a-f]{8}, computed [0-9a-f]{8}\)")
AGE_KEYS = {"speeds_age_s", "historical_age_s", "live_newest_age_s", "live_age_s"}
TIMESTAMP_KEYS = {"at", "trained_at", "at_ms"}
DURATION_KEYS = {"build_s"}
GENERATION_KEYS = {"generation", "serving_generation"}


class Normaliser:
    def __init__(self, tmp, started):
        self.tmp = tmp
        self.real_tmp = os.path.realpath(tmp)
        self.started = started
        self.ports = {}
        self.generations_vary = False

    def _ts(self, m):
        s = m.group(0)
        t = s.replace(" UTC", "+00:00").replace(" ", "T").replace("Z", "+00:00")
        try:
            when = dt.datetime.fromisoformat(t)
        except ValueError:
            return s
        if when.tzinfo is None:
            when = when.replace(tzinfo=dt.timezone.utc)
        if abs((when - self.started).total_seconds()) <= 7 * 86400:
            return "<timestamp>"
        return s

    def text(self, s):
        for p in (self.real_tmp, self.tmp):
            s = s.replace(p, "<tmp>")
        for name, port in self.ports.items():
            s = s.replace(f"127.0.0.1:{port}", f"127.0.0.1:<{name}-port>")
        s = TS_RE.sub(self._ts, s)
        s = FUTURE_RE.sub("is <seconds> s in the future", s)
        s = CRC_RE.sub("(stored <crc>, computed <crc>)", s)
        return s

    def value(self, v, now_answer=False, hours=()):
        if isinstance(v, dict):
            out = {}
            for k, x in v.items():
                if x is None:
                    out[k] = None
                elif k in TIMESTAMP_KEYS:
                    out[k] = "<timestamp>"
                elif k in AGE_KEYS:
                    if isinstance(x, dict):
                        out[k] = {kk: (None if xx is None else "<age>") for kk, xx in x.items()}
                    else:
                        out[k] = "<age>"
                elif k in DURATION_KEYS:
                    out[k] = "<duration>"
                elif k in GENERATION_KEYS and self.generations_vary and isinstance(x, int):
                    out[k] = "<generation>"
                elif k == "hour_of_week" and now_answer and isinstance(x, int):
                    out[k] = "<now>" if x in hours else x
                else:
                    out[k] = self.value(x, now_answer, hours)
            return out
        if isinstance(v, list):
            return [self.value(x, now_answer, hours) for x in v]
        if isinstance(v, str):
            return self.text(v)
        return v

    def dashboard(self, d):
        d = self.value(d)
        lat = d.get("latency")
        if isinstance(lat, dict):
            if lat.get("sum_s") is not None:
                lat["sum_s"] = "<duration>"
            if isinstance(lat.get("buckets"), list):
                lat["buckets"] = [[b[0], "<count>"] for b in lat["buckets"]]
        return d


def metrics_summary(text):
    """The sorted set of series (name and label keys), with TYPE and HELP."""
    series, types, helps = set(), {}, {}
    for line in text.splitlines():
        if not line.strip():
            continue
        if line.startswith("# TYPE "):
            parts = line[7:].split(" ", 1)
            types[parts[0]] = parts[1] if len(parts) > 1 else ""
            continue
        if line.startswith("# HELP "):
            parts = line[7:].split(" ", 1)
            helps[parts[0]] = parts[1] if len(parts) > 1 else ""
            continue
        if line.startswith("#"):
            continue
        brace = line.find("{")
        space = line.find(" ")
        if brace == -1 or (space != -1 and space < brace):
            series.add(line[:space] if space != -1 else line)
            continue
        name, rest = line[:brace], line[brace + 1:]
        keys, i = [], 0
        while i < len(rest) and rest[i] != "}":
            eq = rest.index("=", i)
            keys.append(rest[i:eq].strip().lstrip(","))
            j = eq + 2  # past ="
            while rest[j] != '"':
                j += 2 if rest[j] == "\\" else 1
            i = j + 1
            if i < len(rest) and rest[i] == ",":
                i += 1
        series.add(f"{name}{{{','.join(sorted(keys))}}}")
    return {"series": sorted(series), "types": dict(sorted(types.items())),
            "help": dict(sorted(helps.items()))}


# --------------------------------------------------------------------------
# HTTP


def send(port, method, path, headers=None, body=None, declared_length=None, stall_s=None):
    """One request on its own connection. `declared_length` sends that
    Content-Length and only `body`, then waits for the answer (a lie about
    the size, or a body that stops coming)."""
    conn = http.client.HTTPConnection("127.0.0.1", port, timeout=REQUEST_TIMEOUT_S)
    try:
        conn.putrequest(method, path, skip_accept_encoding=True)
        hdrs = dict(headers or {})
        hdrs.setdefault("Connection", "close")
        if body is not None or declared_length is not None:
            n = declared_length if declared_length is not None else len(body)
            hdrs["Content-Length"] = str(n)
        for k, v in hdrs.items():
            conn.putheader(k, v)
        conn.endheaders()
        if body:
            conn.send(body)
        resp = conn.getresponse()
        data = resp.read()
        return resp.status, {k.lower(): v for k, v in resp.getheaders()}, data
    finally:
        conn.close()


class Recorder:
    def __init__(self, norm, public, admin):
        self.norm = norm
        self.ports = {"public": public, "admin": admin}
        self.cases = []
        self.names = set()

    def call(self, name, listener, method, path, body=None, headers=None, token=True,
             now_answer=False, kind=None, volatile_body=False, **kw):
        assert name not in self.names, name
        self.names.add(name)
        headers = dict(headers or {})
        if listener == "admin" and token and "Authorization" not in headers:
            headers["Authorization"] = f"Bearer {TOKEN}"
        if isinstance(body, (dict, list)):
            body = json.dumps(body).encode()
            headers.setdefault("Content-Type", "application/json")
        elif isinstance(body, str):
            body = body.encode()
        hours = {now_hour_of_week()}
        status, hdrs, data = send(self.ports[listener], method, path, headers, body, **kw)
        hours.add(now_hour_of_week())
        rec_headers = {k: self.norm.text(hdrs[k]) for k in KEEP_HEADERS if k in hdrs}
        shown_req = {k: v for k, v in headers.items() if k.lower() != "connection"}
        if "Authorization" in shown_req and shown_req["Authorization"].endswith(TOKEN):
            shown_req["Authorization"] = shown_req["Authorization"][: -len(TOKEN)] + "<token>"
        req = {"listener": listener, "method": method, "path": self.norm.text(path),
               "headers": shown_req}
        if body is not None and volatile_body:
            # A model file holds its training time (and a CRC over it).
            req["body"] = {"bytes": len(body)}
        elif body is not None:
            nb = self.norm.text(body.decode("utf-8", "replace")).encode()
            req["body"] = {"bytes": len(nb), "sha256": sha256(nb)}
        if "declared_length" in kw:
            req["declared_length"] = kw["declared_length"]
        rec = {"name": name, "request": req, "status": status, "headers": rec_headers}
        rec["body"] = self.body(path, hdrs, data, now_answer, hours, kind)
        self.cases.append(rec)
        return status, rec, data

    def body(self, path, hdrs, data, now_answer, hours, kind):
        enc = hdrs.get("content-encoding", "")
        if enc == "gzip":
            raw = data
            data = gzip.decompress(data)
            # The compressed size of a body holding values that vary
            # (metrics, the dashboard's snapshot) varies with them.
            note = {} if kind else {"gzip_bytes": len(raw)}
        elif enc:
            return {"encoded": enc, "bytes": len(data), "sha256": sha256(data)}
        else:
            note = {}
        ct = hdrs.get("content-type", "")
        if kind == "metrics":
            return dict(metrics_summary(data.decode()), **({"gzip": True} if enc else {}))
        if "json" in ct and data:
            try:
                v = json.loads(data)
            except ValueError:
                return {"invalid_json": self.norm.text(data.decode("utf-8", "replace"))}
            if kind == "dashboard":
                n = self.norm.dashboard(v)
            else:
                n = self.norm.value(v, now_answer, hours)
            if n == v:
                # Nothing normalised: the bytes themselves are fixed, so
                # number formatting and spacing are compared too.
                note = dict(note, sha256=sha256(data))
            return dict(note, json=n) if note else n
        if len(data) > MAX_TEXT or not ct.startswith("text/"):
            if not data:
                return ""
            return {"bytes": len(data), "sha256": sha256(data)}
        return self.norm.text(data.decode("utf-8", "replace"))

    def coverage(self, public_doc, admin_doc):
        """Operations of both documents and how many cases sent each."""
        out, missing = {}, []
        for listener, doc in (("public", public_doc), ("admin", admin_doc)):
            for tmpl, item in sorted(doc.get("paths", {}).items()):
                rx = re.compile("^" + re.sub(r"\\\{[^/]+\\\}", "[^/]+", re.escape(tmpl)) + "$")
                for method in sorted(item):
                    if method not in ("get", "put", "post", "delete", "patch", "head", "options"):
                        continue
                    n = sum(
                        1
                        for c in self.cases
                        if c["request"]["listener"] == listener
                        and c["request"]["method"] == method.upper()
                        and rx.match(c["request"]["path"].split("?")[0])
                    )
                    key = f"{listener} {method.upper()} {tmpl}"
                    out[key] = n
                    if n == 0:
                        missing.append(key)
        return out, missing


# --------------------------------------------------------------------------
# The server


class Server:
    def __init__(self, binary, config, log):
        env = {k: v for k, v in os.environ.items() if k != "HODOS_ADMIN_TOKEN"}
        env.setdefault("RUST_LOG", "info")
        env["NO_COLOR"] = "1"
        self.log = log
        self.logf = open(log, "ab")
        self.proc = subprocess.Popen(
            [binary, "serve", "--config", config],
            stdout=self.logf, stderr=subprocess.STDOUT, env=env,
        )

    def ports(self, timeout=60):
        deadline = time.monotonic() + timeout
        ansi = re.compile(r"\x1b\[[0-9;]*m")
        while time.monotonic() < deadline:
            if self.proc.poll() is not None:
                raise SystemExit(f"hodos serve exited ({self.proc.returncode}); see {self.log}")
            with open(self.log, "rb") as f:
                text = ansi.sub("", f.read().decode("utf-8", "replace"))
            pub = re.search(r"public=127\.0\.0\.1:(\d+)", text)
            adm = re.search(r"admin=127\.0\.0\.1:(\d+)", text)
            if pub and adm:
                return int(pub.group(1)), int(adm.group(1))
            time.sleep(0.1)
        raise SystemExit(f"no 'serving' line with both ports in {timeout} s; see {self.log}")

    def wait_ready(self, port, timeout=120):
        deadline = time.monotonic() + timeout
        while time.monotonic() < deadline:
            if self.proc.poll() is not None:
                raise SystemExit(f"hodos serve exited ({self.proc.returncode}); see {self.log}")
            try:
                status, _, _ = send(port, "GET", "/readyz")
                if status == 200:
                    return
            except OSError:
                pass
            time.sleep(0.2)
        raise SystemExit(f"/readyz not 200 within {timeout} s; see {self.log}")

    def wait_states(self, port, timeout=120):
        """Waits until no region is loading and `testcity` serves (for a
        config whose /readyz stays 503)."""
        deadline = time.monotonic() + timeout
        while time.monotonic() < deadline:
            if self.proc.poll() is not None:
                raise SystemExit(f"hodos serve exited ({self.proc.returncode}); see {self.log}")
            try:
                _, _, data = send(port, "GET", "/readyz")
                states = {x["region"]: x["state"] for x in json.loads(data)["regions"]}
                if states.get(REGION) == "serving" and "loading" not in states.values():
                    return
            except (OSError, ValueError, KeyError):
                pass
            time.sleep(0.2)
        raise SystemExit(f"{REGION} not serving within {timeout} s; see {self.log}")

    def stop(self):
        if self.proc.poll() is None:
            os.kill(self.proc.pid, signal.SIGTERM)
            try:
                self.proc.wait(timeout=15)
            except subprocess.TimeoutExpired:
                os.kill(self.proc.pid, signal.SIGKILL)
                self.proc.wait(timeout=15)
        self.logf.close()


def settle_gauges(public_port, names, timeout=10):
    """Waits (at most `timeout` s, then goes on) until /metrics shows each
    gauge of `names` for the region: the live loop sets the data-age gauges
    on its first tick after the load, so whether the first scrape sees them
    would otherwise depend on timing. A gauge that never comes shows up in
    the recording as missing."""
    deadline = time.monotonic() + timeout
    want = [f'{n}{{region="{REGION}"}}' for n in names]
    while time.monotonic() < deadline:
        text = send(public_port, "GET", "/metrics")[2].decode("utf-8", "replace")
        if all(w in text for w in want):
            return True
        time.sleep(0.1)
    return False


def region_status(admin_port):
    status, _, data = send(admin_port, "GET", "/admin/status",
                           {"Authorization": f"Bearer {TOKEN}"})
    if status != 200:
        raise SystemExit(f"/admin/status answered {status}")
    for r in json.loads(data)["regions"]:
        if r["region"] == REGION:
            return r
    raise SystemExit(f"no region {REGION} in /admin/status")


def wait_live_applied(admin_port, before, timeout=30):
    """Waits until the region serves a blend that holds a live batch just
    accepted: a newer generation than `before` (a status) and more live
    edges than it had; then a little longer than one re-customization
    interval, so a blend in progress lands before the next request."""
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        st = region_status(admin_port)
        if st["generation"] > before["generation"] and st["live_edges"] > before["live_edges"]:
            time.sleep(0.6)
            return region_status(admin_port)
        time.sleep(0.05)
    raise SystemExit(f"live batch not serving within {timeout} s (status before: "
                     f"generation {before['generation']}, {before['live_edges']} live edges)")


# --------------------------------------------------------------------------
# The requests


def record(args):
    started = dt.datetime.now(dt.timezone.utc)
    tmp = tempfile.mkdtemp(prefix="hodos-record-")
    log = os.path.join(tmp, "commands.log")
    binary = os.path.abspath(args.hodos)
    server = None
    try:
        version = subprocess.run([binary, "--version"], capture_output=True, text=True,
                                 timeout=30).stdout.strip()
        artifact = os.path.join(tmp, "city.hodos")
        run([binary, "build", "--synthetic", str(args.nodes), "--seed", str(args.seed),
             "--out", artifact], log)
        run([binary, "segments", artifact, "--out", os.path.join(tmp, "segments.csv")], log)
        run([binary, "segments", artifact, "--out", os.path.join(tmp, "segments.geojson")], log)
        city = City(os.path.join(tmp, "segments.geojson"))
        with open(os.path.join(tmp, "segments.csv")) as f:
            segments_csv = f.read()

        flat = os.path.join(tmp, "flat.csv")
        with open(flat, "w") as f:
            f.write(flat_table(city))
        varied = varied_table(city)
        varied_path = os.path.join(tmp, "varied.csv")
        with open(varied_path, "w") as f:
            f.write(varied_table(city, bad_rows=False))
        trips_path = os.path.join(tmp, "trips.csv")
        with open(trips_path, "w") as f:
            first = dt.datetime(2025, 10, 6, 4, 0, tzinfo=dt.timezone.utc)
            f.write(trips_csv(city, 600, 11, first))
        model = os.path.join(tmp, "city.model")
        if args.model:
            shutil.copyfile(args.model, model)
        else:
            run([binary, "train", "--trips", trips_path, "--artifact", artifact,
                 "--historical", varied_path, "--zone", ZONE, "--out", model,
                 "--model-version", "7"], log, timeout=900)
        with open(model, "rb") as f:
            model_bytes = f.read()

        config = os.path.join(tmp, "hodos.toml")
        cov = city.coverage()
        with open(config, "w") as f:
            f.write(f"""[server]
listen = "127.0.0.1:0"
ready_when = "any_region"
body_timeout_ms = 1500
[admin]
listen = "127.0.0.1:0"
token = "{TOKEN}"
body_timeout_ms = 5000
[live]
max_future_skew_s = {FUTURE_SKEW_S}
[[region]]
name = "{REGION}"
artifact = "{artifact}"
time_zone = "{ZONE}"
coverage = {{ bbox = [{cov[0]}, {cov[1]}, {cov[2]}, {cov[3]}] }}
historical = "{flat}"
state_dir = "{os.path.join(tmp, 'state-' + REGION)}"
[[region]]
name = "{BROKEN}"
artifact = "{os.path.join(tmp, 'missing.hodos')}"
time_zone = "UTC"
coverage = {{ bbox = [10.0, 10.0, 10.5, 10.5] }}
state_dir = "{os.path.join(tmp, 'state-' + BROKEN)}"
""")
        server = Server(binary, config, os.path.join(tmp, "serve.log"))
        public, admin = server.ports()
        server.wait_ready(public)
        settle_gauges(public, ["hodos_historical_data_age_seconds"])
        norm = Normaliser(tmp, started)
        norm.ports = {"public": public, "admin": admin}
        r = Recorder(norm, public, admin)
        cases(r, city, admin, varied, model_bytes, segments_csv, flat)
        public_doc = json.loads(send(public, "GET", "/openapi.json")[2])
        admin_doc = json.loads(send(admin, "GET", "/admin/openapi.json",
                                    {"Authorization": f"Bearer {TOKEN}"})[2])
        server.stop()
        server = None

        # The same state dirs again: what was acknowledged must be kept
        # (upload, model, live layer); readiness over all regions is 503
        # while `nomap` has no graph.
        config2 = os.path.join(tmp, "hodos-restart.toml")
        with open(config) as f:
            text = f.read().replace('ready_when = "any_region"', 'ready_when = "all_regions"')
        with open(config2, "w") as f:
            f.write(text)
        server = Server(binary, config2, os.path.join(tmp, "serve-restart.log"))
        public, admin = server.ports()
        server.wait_states(public)
        settle_gauges(public, ["hodos_historical_data_age_seconds", "hodos_live_data_age_seconds"])
        norm.ports = {"public": public, "admin": admin}
        r.ports = {"public": public, "admin": admin}
        restart_cases(r, city)
        cov_map, missing = r.coverage(public_doc, admin_doc)
        out = {
            "meta": {"binary": binary, "version": version, "started": started.isoformat()},
            "coverage": cov_map,
            "uncovered": missing,
            "cases": r.cases,
        }
        with open(args.out, "w") as f:
            json.dump(out, f, indent=1, sort_keys=False)
            f.write("\n")
        ops = len(cov_map)
        print(f"recorded {len(r.cases)} cases over {ops} operations to {args.out}")
        if missing:
            print("uncovered operations: " + ", ".join(missing), file=sys.stderr)
            return 2
        return 0
    finally:
        if server is not None:
            server.stop()
        if args.keep:
            print(f"kept {tmp}")
        else:
            shutil.rmtree(tmp, ignore_errors=True)


def cases(r, city, admin_port, varied, model_bytes, segments_csv, flat_path):
    P = city.point
    a, b, c, d = P(0), P(200), P(57, 0.0004, -0.0003), P(333)
    e, f = P(120), P(260, -0.0002, 0.0005)
    outside = {"lat": 40.0, "lon": 20.0}
    outside2 = {"lat": -33.9, "lon": 151.2}
    broken = {"lat": 10.2, "lon": 10.2}
    broken2 = {"lat": 10.3, "lon": 10.1}
    off = city.off_network()
    q = lambda p: f"{p['lat']},{p['lon']}"  # noqa: E731
    fixed = DEPARTURES[0][1]

    # ---- Phase 1: probes and documents, no live data, the flat table.
    r.call("healthz", "public", "GET", "/healthz")
    r.call("readyz", "public", "GET", "/readyz")
    r.call("openapi", "public", "GET", "/openapi.json")
    r.call("metrics-start", "public", "GET", "/metrics", kind="metrics")
    r.call("dashboard", "public", "GET", "/dashboard")
    r.call("dashboard-data-start", "public", "GET", "/dashboard/data", kind="dashboard")
    r.call("uplot-js", "public", "GET", "/dashboard/uplot.js")
    r.call("uplot-css", "public", "GET", "/dashboard/uplot.css")
    r.call("admin-openapi", "admin", "GET", "/admin/openapi.json")
    r.call("admin-status-start", "admin", "GET", "/admin/status")

    # Good ETAs, leaving now (the flat table serves: no hour dependence).
    r.call("eta-get-now", "public", "GET", f"/v1/eta?from={q(a)}&to={q(b)}", now_answer=True)
    r.call("eta-post-now", "public", "POST", "/v1/eta", {"from": a, "to": b}, now_answer=True)
    r.call("eta-post-now-2", "public", "POST", "/v1/eta", {"from": c, "to": d, "budget_ms": 500},
           now_answer=True)
    r.call("eta-post-now-same-point", "public", "POST", "/v1/eta", {"from": e, "to": e},
           now_answer=True)
    r.call("eta-post-now-no-content-type", "public", "POST", "/v1/eta",
           json.dumps({"from": e, "to": f}), now_answer=True)
    r.call("eta-post-now-json-charset", "public", "POST", "/v1/eta",
           json.dumps({"from": f, "to": e}),
           {"Content-Type": "application/json; charset=utf-8"}, now_answer=True)
    r.call("eta-post-now-off-network", "public", "POST", "/v1/eta", {"from": off, "to": a},
           now_answer=True)
    r.call("eta-post-now-outside", "public", "POST", "/v1/eta",
           {"from": outside, "to": outside2}, now_answer=True)
    r.call("eta-post-now-one-end-outside", "public", "POST", "/v1/eta",
           {"from": a, "to": outside}, now_answer=True)
    r.call("eta-post-now-broken-region", "public", "POST", "/v1/eta",
           {"from": broken, "to": broken2}, now_answer=True)
    r.call("eta-post-now-across-regions", "public", "POST", "/v1/eta",
           {"from": a, "to": broken}, now_answer=True)
    r.call("route-now", "public", "POST", "/v1/route", {"from": a, "to": b}, now_answer=True)
    r.call("route-now-outside", "public", "POST", "/v1/route",
           {"from": outside, "to": outside2}, now_answer=True)
    r.call("matrix-now", "public", "POST", "/v1/eta/matrix",
           {"from": [a, c], "to": [b, d, e]}, now_answer=True)
    r.call("matrix-now-mixed", "public", "POST", "/v1/eta/matrix",
           {"from": [a, outside, broken], "to": [b, off]}, now_answer=True)
    for name, t in DEPARTURES[:3]:
        r.call(f"eta-flat-{name}", "public", "POST", "/v1/eta", {"from": a, "to": b, "leaving": t})

    # Compression (public listener).
    r.call("eta-gzip", "public", "GET", f"/v1/eta?from={q(a)}&to={q(b)}&leaving={fixed}",
           headers={"Accept-Encoding": "gzip"})
    r.call("eta-br", "public", "GET", f"/v1/eta?from={q(a)}&to={q(b)}&leaving={fixed}",
           headers={"Accept-Encoding": "br"})
    r.call("eta-identity", "public", "GET", f"/v1/eta?from={q(a)}&to={q(b)}&leaving={fixed}",
           headers={"Accept-Encoding": "identity"})
    r.call("matrix-gzip", "public", "POST", "/v1/eta/matrix",
           {"from": [a, c, e], "to": [b, d, f], "leaving": fixed},
           headers={"Accept-Encoding": "gzip, br"})
    r.call("openapi-gzip", "public", "GET", "/openapi.json", headers={"Accept-Encoding": "gzip"})
    r.call("eta-bad-gzip", "public", "POST", "/v1/eta", {"from": a},
           headers={"Accept-Encoding": "gzip"})
    r.call("metrics-gzip", "public", "GET", "/metrics", headers={"Accept-Encoding": "gzip"},
           kind="metrics")

    # Bad ETA bodies.
    bad_bodies = [
        ("malformed-json", '{"from":'),
        ("trailing-garbage", json.dumps({"from": a, "to": b}) + " x"),
        ("empty-body", ""),
        ("array-body", "[1, 2]"),
        ("string-body", '"hello"'),
        ("from-array", json.dumps({"from": [a["lat"], a["lon"]], "to": b})),
        ("from-string", json.dumps({"from": "45,-30", "to": b})),
        ("from-number", json.dumps({"from": 45, "to": b})),
        ("from-null", json.dumps({"from": None, "to": b})),
        ("from-empty-object", json.dumps({"from": {}, "to": b})),
        ("from-extra-key", json.dumps({"from": dict(a, alt=3), "to": b})),
        ("lat-string", json.dumps({"from": {"lat": "45.0", "lon": a["lon"]}, "to": b})),
        ("lat-91", json.dumps({"from": {"lat": 91, "lon": 0}, "to": b})),
        ("lat-minus-90.5", json.dumps({"from": {"lat": -90.5, "lon": 0}, "to": b})),
        ("lon-181", json.dumps({"from": a, "to": {"lat": 0, "lon": 181}})),
        ("lat-huge", '{"from":{"lat":1e999,"lon":0},"to":' + json.dumps(b) + "}"),
        ("missing-to", json.dumps({"from": a})),
        ("missing-lon", json.dumps({"from": {"lat": 1}, "to": b})),
        ("unknown-field", json.dumps({"from": a, "to": b, "foo": 1})),
        ("depart-at", json.dumps({"from": a, "to": b, "depart_at": fixed})),
        ("leaving-null", json.dumps({"from": a, "to": b, "leaving": None})),
        ("leaving-words", json.dumps({"from": a, "to": b, "leaving": "tomorrow"})),
        ("leaving-number", json.dumps({"from": a, "to": b, "leaving": 1762175700})),
        ("leaving-no-offset", json.dumps({"from": a, "to": b, "leaving": "2025-11-03T08:15:00"})),
        ("leaving-object", json.dumps({"from": a, "to": b, "leaving": {}})),
        ("budget-0", json.dumps({"from": a, "to": b, "budget_ms": 0})),
        ("budget-fraction", json.dumps({"from": a, "to": b, "budget_ms": 1.5})),
        ("budget-string", json.dumps({"from": a, "to": b, "budget_ms": "100"})),
        ("budget-null", json.dumps({"from": a, "to": b, "budget_ms": None})),
        ("budget-negative", json.dumps({"from": a, "to": b, "budget_ms": -1})),
        ("budget-2-53", json.dumps({"from": a, "to": b, "budget_ms": 2 ** 53})),
        ("budget-true", json.dumps({"from": a, "to": b, "budget_ms": True})),
    ]
    for name, body in bad_bodies:
        r.call(f"eta-bad-{name}", "public", "POST", "/v1/eta", body,
               {"Content-Type": "application/json"})
        r.call(f"route-bad-{name}", "public", "POST", "/v1/route", body,
               {"Content-Type": "application/json"})
    r.call("eta-budget-integral-float", "public", "POST", "/v1/eta",
           {"from": a, "to": b, "leaving": fixed, "budget_ms": 147700.0})
    r.call("eta-budget-max", "public", "POST", "/v1/eta",
           {"from": a, "to": b, "leaving": fixed, "budget_ms": 2 ** 53 - 1})
    r.call("eta-bad-content-type", "public", "POST", "/v1/eta",
           json.dumps({"from": a, "to": b}), {"Content-Type": "text/plain"})
    r.call("eta-bad-form-content-type", "public", "POST", "/v1/eta", "from=1,2&to=3,4",
           {"Content-Type": "application/x-www-form-urlencoded"})
    big = json.dumps({"from": a, "to": b, "pad": "x" * 300000})
    r.call("eta-body-too-large", "public", "POST", "/v1/eta", big,
           {"Content-Type": "application/json"})
    r.call("eta-body-declared-too-large", "public", "POST", "/v1/eta", b"",
           {"Content-Type": "application/json"}, declared_length=10_000_000)
    r.call("matrix-body-too-large", "public", "POST", "/v1/eta/matrix", big,
           {"Content-Type": "application/json"})

    # Bad GET /v1/eta query strings.
    bad_queries = [
        ("no-query", ""),
        ("missing-to", f"?from={q(a)}"),
        ("missing-from", f"?to={q(b)}"),
        ("from-words", f"?from=abc&to={q(b)}"),
        ("from-one-number", f"?from=45.0&to={q(b)}"),
        ("from-exponent", f"?from=1e1,2&to={q(b)}"),
        ("from-space", f"?from=45.0,%20-30.0&to={q(b)}"),
        ("from-lat-91", f"?from=91,0&to={q(b)}"),
        ("to-lon-181", f"?from={q(a)}&to=0,181"),
        ("from-plus-sign", f"?from=%2B45.0,-30.0&to={q(b)}"),
        ("unknown-param", f"?from={q(a)}&to={q(b)}&x=1"),
        ("depart-at", f"?from={q(a)}&to={q(b)}&depart_at={fixed}"),
        ("duplicate-from", f"?from={q(a)}&from={q(a)}&to={q(b)}"),
        ("leaving-bad", f"?from={q(a)}&to={q(b)}&leaving=soon"),
        ("leaving-raw-plus", f"?from={q(a)}&to={q(b)}&leaving=2025-11-03T14:15:00+01:00"),
        ("budget-words", f"?from={q(a)}&to={q(b)}&budget_ms=abc"),
        ("budget-0", f"?from={q(a)}&to={q(b)}&budget_ms=0"),
        ("budget-fraction", f"?from={q(a)}&to={q(b)}&budget_ms=1.5"),
        ("empty-values", "?from=&to="),
        ("bad-percent", f"?from={q(a)}&to={q(b)}&leaving=%ZZ"),
    ]
    for name, qs in bad_queries:
        r.call(f"eta-get-bad-{name}", "public", "GET", f"/v1/eta{qs}")
    r.call("eta-get-leaving-encoded-plus", "public", "GET",
           f"/v1/eta?from={q(a)}&to={q(b)}&leaving=2025-11-03T14:15:00%2B01:00&budget_ms=800")
    r.call("eta-get-lowercase-z", "public", "GET",
           f"/v1/eta?from={q(c)}&to={q(d)}&leaving=2025-11-03t13:15:00z")

    # Bad matrices.
    bad_matrices = [
        ("empty-from", {"from": [], "to": [b]}),
        ("empty-to", {"from": [a], "to": []}),
        ("from-object", {"from": a, "to": [b]}),
        ("cell-array", {"from": [[1, 2]], "to": [b]}),
        ("cell-lat-95", {"from": [a], "to": [b, {"lat": 95, "lon": 0}]}),
        ("cell-lon-200", {"from": [a, {"lat": 0, "lon": 200}], "to": [b]}),
        ("missing-to", {"from": [a]}),
        ("leaving-bad", {"from": [a], "to": [b], "leaving": "x"}),
        ("budget-0", {"from": [a], "to": [b], "budget_ms": 0}),
        ("unknown-field", {"from": [a], "to": [b], "cells": 1}),
        ("depart-at", {"from": [a], "to": [b], "depart_at": fixed}),
        ("over-cell-limit", {"from": [a] * 501, "to": [b] * 500}),
    ]
    for name, body in bad_matrices:
        r.call(f"matrix-bad-{name}", "public", "POST", "/v1/eta/matrix", body)
    r.call("matrix-bad-malformed", "public", "POST", "/v1/eta/matrix", '{"from": [',
           {"Content-Type": "application/json"})
    r.call("matrix-bad-array-body", "public", "POST", "/v1/eta/matrix", "[]",
           {"Content-Type": "application/json"})
    r.call("matrix-bad-content-type", "public", "POST", "/v1/eta/matrix", "{}",
           {"Content-Type": "text/csv"})

    # Unknown paths, wrong methods, on both listeners.
    for name, method, path in [
        ("root", "GET", "/"),
        ("v1", "GET", "/v1"),
        ("v2-eta", "GET", "/v2/eta"),
        ("eta-trailing-slash", "GET", f"/v1/eta/?from={q(a)}&to={q(b)}"),
        ("eta-case", "GET", "/V1/ETA"),
        ("openapi-yaml", "GET", "/openapi.yaml"),
        ("admin-on-public", "GET", "/admin/status"),
        ("admin-openapi-on-public", "GET", "/admin/openapi.json"),
        ("dashboard-other", "GET", "/dashboard/other.js"),
        ("healthz-query", "GET", "/healthz?verbose=1"),
    ]:
        r.call(f"public-{name}", "public", method, path)
    for name, method, path in [
        ("delete-eta", "DELETE", "/v1/eta"),
        ("put-eta", "PUT", "/v1/eta"),
        ("patch-eta", "PATCH", "/v1/eta"),
        ("get-route", "GET", "/v1/route"),
        ("get-matrix", "GET", "/v1/eta/matrix"),
        ("post-healthz", "POST", "/healthz"),
        ("post-readyz", "POST", "/readyz"),
        ("put-metrics", "PUT", "/metrics"),
        ("post-openapi", "POST", "/openapi.json"),
        ("post-dashboard", "POST", "/dashboard"),
        ("post-dashboard-data", "POST", "/dashboard/data"),
        ("delete-uplot-js", "DELETE", "/dashboard/uplot.js"),
        ("post-uplot-css", "POST", "/dashboard/uplot.css"),
        ("options-eta", "OPTIONS", "/v1/eta"),
        ("trace-eta", "TRACE", "/v1/eta"),
    ]:
        r.call(f"public-{name}", "public", method, path)
    r.call("public-head-healthz", "public", "HEAD", "/healthz")
    r.call("public-head-eta", "public", "HEAD", f"/v1/eta?from={q(a)}&to={q(b)}&leaving={fixed}")

    # Admin: authorization, unknown paths, wrong methods.
    admin_ops = [
        ("status", "GET", "/admin/status"),
        ("openapi", "GET", "/admin/openapi.json"),
        ("trips", "POST", "/admin/trips"),
        ("historical", "PUT", f"/admin/regions/{REGION}/historical"),
        ("live", "POST", f"/admin/regions/{REGION}/live"),
        ("model", "PUT", f"/admin/regions/{REGION}/model"),
        ("reload", "POST", f"/admin/regions/{REGION}/reload"),
    ]
    for name, method, path in admin_ops:
        r.call(f"admin-{name}-no-token", "admin", method, path, token=False)
        r.call(f"admin-{name}-wrong-token", "admin", method, path,
               headers={"Authorization": "Bearer not-the-token"})
    for name, value in [
        ("basic-scheme", f"Basic {TOKEN}"),
        ("scheme-only", "Bearer"),
        ("scheme-no-space", f"Bearer{TOKEN}"),
        ("trailing-space", f"Bearer {TOKEN} "),
        ("token-prefix", f"Bearer {TOKEN[:-1]}"),
        ("token-only", TOKEN),
        ("empty", ""),
    ]:
        r.call(f"admin-status-auth-{name}", "admin", "GET", "/admin/status",
               headers={"Authorization": value})
    for name, value in [
        ("lowercase-scheme", f"bearer {TOKEN}"),
        ("uppercase-scheme", f"BEARER {TOKEN}"),
        ("two-spaces", f"Bearer  {TOKEN}"),
    ]:
        r.call(f"admin-status-auth-{name}", "admin", "GET", "/admin/status",
               headers={"Authorization": value})
    r.call("admin-unknown-no-token", "admin", "GET", "/admin/nope", token=False)
    for name, method, path in [
        ("unknown", "GET", "/admin/nope"),
        ("root", "GET", "/"),
        ("healthz-on-admin", "GET", "/healthz"),
        ("eta-on-admin", "GET", f"/v1/eta?from={q(a)}&to={q(b)}"),
        ("region-bare", "GET", f"/admin/regions/{REGION}"),
        ("region-unknown-action", "POST", f"/admin/regions/{REGION}/compact"),
        ("regions", "GET", "/admin/regions"),
        ("get-reload", "GET", f"/admin/regions/{REGION}/reload"),
        ("post-status", "POST", "/admin/status"),
        ("get-historical", "GET", f"/admin/regions/{REGION}/historical"),
        ("post-historical", "POST", f"/admin/regions/{REGION}/historical"),
        ("delete-model", "DELETE", f"/admin/regions/{REGION}/model"),
        ("get-trips", "GET", "/admin/trips"),
        ("put-live", "PUT", f"/admin/regions/{REGION}/live"),
        ("put-openapi", "PUT", "/admin/openapi.json"),
        ("reload-unknown-region", "POST", "/admin/regions/atlantis/reload"),
        ("reload-encoded-name", "POST", "/admin/regions/test%20city/reload"),
    ]:
        r.call(f"admin-{name}", "admin", method, path)

    # ---- Phase 2: live batches (stamped in the future: weight 1).
    st = region_status(admin_port)
    at = iso(dt.datetime.now(dt.timezone.utc) + dt.timedelta(seconds=LIVE_AHEAD_S))
    old = iso(dt.datetime.now(dt.timezone.utc) - dt.timedelta(hours=2))
    too_far = iso(dt.datetime.now(dt.timezone.utc) + dt.timedelta(hours=2))
    s0, s1 = city.segments[0], city.segments[1]
    batch = live_json(city, at, 0) + [
        {"segment": 999999, "kmh": 30, "observed_at": at, "samples": 1},
        {"segment": s0["segment"], "tail": s1["tail"], "head": s1["head"], "kmh": 30,
         "observed_at": at, "samples": 1},
        {"segment": s1["segment"], "kmh": -5, "observed_at": at, "samples": 1},
        {"segment": s1["segment"], "kmh": 500, "observed_at": at, "samples": 1},
        {"segment": s1["segment"], "kmh": 30, "observed_at": "yesterday", "samples": 1},
        {"segment": s1["segment"], "kmh": 30, "observed_at": too_far, "samples": 1},
        {"segment": s1["segment"], "kmh": 30, "observed_at": at, "samples": 0},
        {"segment": s1["segment"], "kmh": 30, "observed_at": old, "samples": 1},
        17,
        {"segment": s1["segment"], "observed_at": at, "samples": 1},
    ]
    r.norm.generations_vary = True
    r.call("live-json", "admin", "POST", f"/admin/regions/{REGION}/live", batch)
    st = wait_live_applied(admin_port, st)
    rows = live_csv(city, at, 1) + [
        "999999,,,,30," + at + ",1",
        f"{s1['segment']},,,,abc,{at},1",
        f"{s1['segment']},,,,30,{at}",
    ]
    r.call("live-csv", "admin", "POST", f"/admin/regions/{REGION}/live",
           "\r\n".join(rows) + "\r\n", {"Content-Type": "text/csv"})
    wait_live_applied(admin_port, st)
    r.call("admin-status-live", "admin", "GET", "/admin/status")
    r.call("readyz-live", "public", "GET", "/readyz")
    r.call("eta-get-now-live", "public", "GET", f"/v1/eta?from={q(a)}&to={q(b)}",
           now_answer=True)
    r.call("eta-post-now-live", "public", "POST", "/v1/eta", {"from": a, "to": b},
           now_answer=True)
    r.call("eta-post-now-live-2", "public", "POST", "/v1/eta", {"from": c, "to": d},
           now_answer=True)
    r.call("eta-post-now-live-3", "public", "POST", "/v1/eta", {"from": e, "to": f},
           now_answer=True)
    r.call("eta-post-now-live-4", "public", "POST", "/v1/eta", {"from": f, "to": c},
           now_answer=True)
    r.call("eta-post-now-live-off-network", "public", "POST", "/v1/eta",
           {"from": off, "to": b}, now_answer=True)
    r.call("eta-post-now-live-outside", "public", "POST", "/v1/eta",
           {"from": outside, "to": b}, now_answer=True)
    r.call("route-now-live", "public", "POST", "/v1/route", {"from": c, "to": d},
           now_answer=True)
    r.call("matrix-now-live", "public", "POST", "/v1/eta/matrix",
           {"from": [a, c, e], "to": [b, d, f, outside]}, now_answer=True)
    r.call("eta-fixed-while-live", "public", "POST", "/v1/eta",
           {"from": a, "to": b, "leaving": fixed})
    r.call("live-empty-json", "admin", "POST", f"/admin/regions/{REGION}/live", [])
    r.call("live-empty-csv", "admin", "POST", f"/admin/regions/{REGION}/live",
           "segment,kmh,observed_at,samples\n", {"Content-Type": "text/csv"})
    r.call("live-header-only-no-newline", "admin", "POST", f"/admin/regions/{REGION}/live",
           "segment,kmh,observed_at,samples", {"Content-Type": "text/csv"})
    r.call("live-bad-object", "admin", "POST", f"/admin/regions/{REGION}/live",
           {"segment": 1, "kmh": 3})
    r.call("live-bad-json", "admin", "POST", f"/admin/regions/{REGION}/live", "[{",
           {"Content-Type": "application/json"})
    r.call("live-bad-csv-header", "admin", "POST", f"/admin/regions/{REGION}/live",
           "seg,speed\n1,2\n", {"Content-Type": "text/csv"})
    r.call("live-mostly-bad", "admin", "POST", f"/admin/regions/{REGION}/live",
           [{"segment": s["segment"], "kmh": -1, "observed_at": at, "samples": 1}
            for s in city.segments[:20]])
    r.call("live-empty-body", "admin", "POST", f"/admin/regions/{REGION}/live", "",
           {"Content-Type": "application/json"})
    r.call("live-unknown-region", "admin", "POST", "/admin/regions/atlantis/live", [])
    r.call("live-broken-region", "admin", "POST", f"/admin/regions/{BROKEN}/live",
           [{"segment": 1, "kmh": 30, "observed_at": at, "samples": 1}])
    r.call("live-declared-too-large", "admin", "POST", f"/admin/regions/{REGION}/live", b"",
           {"Content-Type": "application/json"}, declared_length=200 * 1024 * 1024)
    r.call("metrics-live", "public", "GET", "/metrics", kind="metrics")
    r.call("dashboard-data-live", "public", "GET", "/dashboard/data", kind="dashboard")

    # ---- Phase 3: historical tables. Answers leaving now are not asked
    # from here on (the uploaded table differs by hour).
    hist = f"/admin/regions/{REGION}/historical"
    r.call("historical-bad-header", "admin", "PUT", hist, "segment,kmh\n1,30\n",
           {"Content-Type": "text/csv"})
    r.call("historical-live-columns", "admin", "PUT", hist,
           "segment,kmh,observed_at,samples\n1,30,2025-11-03T08:00:00Z,1\n",
           {"Content-Type": "text/csv"})
    r.call("historical-mostly-bad", "admin", "PUT", hist, mostly_bad_table(city),
           {"Content-Type": "text/csv"})
    r.call("historical-empty", "admin", "PUT", hist, "", {"Content-Type": "text/csv"})
    r.call("historical-header-only", "admin", "PUT", hist,
           "segment,way,tail,head,hour_of_week,kmh\n", {"Content-Type": "text/csv"})
    r.call("historical-segments-listing", "admin", "PUT", hist, segments_csv,
           {"Content-Type": "text/csv"})
    r.call("historical-unknown-region", "admin", "PUT", "/admin/regions/atlantis/historical",
           "segment,hour_of_week,kmh\n1,0,30\n", {"Content-Type": "text/csv"})
    r.call("historical-broken-region", "admin", "PUT", f"/admin/regions/{BROKEN}/historical",
           "segment,hour_of_week,kmh\n1,0,30\n", {"Content-Type": "text/csv"})
    r.call("historical-declared-too-large", "admin", "PUT", hist, b"",
           {"Content-Type": "text/csv"}, declared_length=600 * 1024 * 1024)
    r.call("admin-status-after-refusals", "admin", "GET", "/admin/status")
    r.call("historical-upload", "admin", "PUT", hist, varied, {"Content-Type": "text/csv"})
    r.call("admin-status-uploaded", "admin", "GET", "/admin/status")
    r.call("readyz-uploaded", "public", "GET", "/readyz")
    pairs = [("ab", a, b), ("cd", c, d), ("fe", f, e)]
    for name, t in DEPARTURES:
        for pn, x, y in pairs:
            r.call(f"eta-{name}-{pn}", "public", "POST", "/v1/eta",
                   {"from": x, "to": y, "leaving": t})
        r.call(f"eta-get-{name}", "public", "GET",
               f"/v1/eta?from={q(a)}&to={q(b)}&leaving={t.replace('+', '%2B')}")
        r.call(f"eta-{name}-off-network", "public", "POST", "/v1/eta",
               {"from": off, "to": b, "leaving": t})
        r.call(f"eta-{name}-outside", "public", "POST", "/v1/eta",
               {"from": outside, "to": outside2, "leaving": t})
        r.call(f"eta-{name}-broken-region", "public", "POST", "/v1/eta",
               {"from": broken, "to": broken2, "leaving": t})
        r.call(f"route-{name}", "public", "POST", "/v1/route",
               {"from": c, "to": d, "leaving": t})
        r.call(f"matrix-{name}", "public", "POST", "/v1/eta/matrix",
               {"from": [a, c, e, off], "to": [b, d, f, outside, broken], "leaving": t})
    grid = [P(i * 61) for i in range(6)]
    r.call("matrix-6x6", "public", "POST", "/v1/eta/matrix",
           {"from": grid, "to": grid[::-1], "leaving": DEPARTURES[3][1]})
    r.call("matrix-1x1", "public", "POST", "/v1/eta/matrix",
           {"from": [a], "to": [b], "leaving": DEPARTURES[2][1]})
    r.call("matrix-6x6-gzip", "public", "POST", "/v1/eta/matrix",
           {"from": grid, "to": grid, "leaving": DEPARTURES[1][1]},
           headers={"Accept-Encoding": "gzip"})
    r.call("metrics-uploaded", "public", "GET", "/metrics", kind="metrics")
    r.call("dashboard-data-uploaded", "public", "GET", "/dashboard/data", kind="dashboard")

    # ---- Phase 4: a correction model.
    model = f"/admin/regions/{REGION}/model"
    octet = {"Content-Type": "application/octet-stream"}
    r.call("model-garbage", "admin", "PUT", model, b"not a model at all", octet)
    r.call("model-empty", "admin", "PUT", model, b"", octet)
    r.call("model-truncated", "admin", "PUT", model, model_bytes[: len(model_bytes) // 2], octet,
           volatile_body=True)
    flipped = bytearray(model_bytes)
    flipped[len(flipped) // 3] ^= 0x40
    r.call("model-bit-flipped", "admin", "PUT", model, bytes(flipped), octet, volatile_body=True)
    r.call("admin-status-model-refused", "admin", "GET", "/admin/status")
    r.call("model-unknown-region", "admin", "PUT", "/admin/regions/atlantis/model",
           model_bytes, octet, volatile_body=True)
    r.call("model-broken-region", "admin", "PUT", f"/admin/regions/{BROKEN}/model",
           model_bytes, octet, volatile_body=True)
    r.call("model-upload", "admin", "PUT", model, model_bytes, octet, volatile_body=True)
    r.call("admin-status-model", "admin", "GET", "/admin/status")
    for name, t in DEPARTURES[:4]:
        for pn, x, y in pairs:
            r.call(f"model-eta-{name}-{pn}", "public", "POST", "/v1/eta",
                   {"from": x, "to": y, "leaving": t})
        r.call(f"model-eta-{name}-off-network", "public", "POST", "/v1/eta",
               {"from": off, "to": b, "leaving": t})
        r.call(f"model-eta-{name}-outside", "public", "POST", "/v1/eta",
               {"from": outside, "to": outside2, "leaving": t})
        r.call(f"model-route-{name}", "public", "POST", "/v1/route",
               {"from": a, "to": b, "leaving": t})
        r.call(f"model-matrix-{name}", "public", "POST", "/v1/eta/matrix",
               {"from": [a, c, off], "to": [b, d, outside], "leaving": t})

    # ---- Phase 5: completed trips.
    start = dt.datetime(2025, 11, 3, 5, 0, tzinfo=dt.timezone.utc)
    r.call("trips-csv", "admin", "POST", "/admin/trips",
           trips_csv(city, 40, 23, start, bad_rows=True), {"Content-Type": "text/csv"})
    r.call("trips-jsonl", "admin", "POST", "/admin/trips", trips_jsonl(city, 25, 29, start),
           {"Content-Type": "application/x-ndjson"})
    r.call("trips-jsonl-alias", "admin", "POST", "/admin/trips", trips_jsonl(city, 5, 31, start),
           {"Content-Type": "application/jsonl"})
    r.call("trips-no-content-type", "admin", "POST", "/admin/trips", "id\n")
    r.call("trips-json-content-type", "admin", "POST", "/admin/trips", "[]",
           {"Content-Type": "application/json"})
    r.call("trips-bad-header", "admin", "POST", "/admin/trips", "a,b,c\n1,2,3\n",
           {"Content-Type": "text/csv"})
    r.call("trips-empty-csv", "admin", "POST", "/admin/trips", "",
           {"Content-Type": "text/csv"})
    r.call("trips-header-only", "admin", "POST", "/admin/trips",
           trips_csv(city, 0, 1, start), {"Content-Type": "text/csv"})
    r.call("trips-only-bad", "admin", "POST", "/admin/trips",
           "from_lat,from_lon,to_lat,to_lon,leaving,duration_s\n1,2,3,4,x,5\n",
           {"Content-Type": "text/csv"})
    r.call("metrics-trips", "public", "GET", "/metrics", kind="metrics")
    r.call("dashboard-data-trips", "public", "GET", "/dashboard/data", kind="dashboard")

    # ---- Phase 6: reloads.
    reload = f"/admin/regions/{REGION}/reload"
    r.call("reload-unchanged", "admin", "POST", reload)
    r.call("admin-status-reload-unchanged", "admin", "GET", "/admin/status")
    later = time.time() + 5
    os.utime(flat_path, (later, later))
    r.call("reload-configured-newer", "admin", "POST", reload)
    r.call("admin-status-reload-configured", "admin", "GET", "/admin/status")
    for name, t in DEPARTURES[:3]:
        r.call(f"reloaded-eta-{name}", "public", "POST", "/v1/eta",
               {"from": a, "to": b, "leaving": t})
    r.call("reload-again-unchanged", "admin", "POST", reload)
    r.call("reload-broken-region", "admin", "POST", f"/admin/regions/{BROKEN}/reload")
    r.call("reload-with-body", "admin", "POST", reload, "{}", {"Content-Type": "application/json"})

    # ---- Phase 7: bodies that stop coming (the connection closes after).
    r.call("eta-body-timeout", "public", "POST", "/v1/eta", b'{"from":',
           {"Content-Type": "application/json"}, declared_length=200)
    r.call("live-body-timeout", "admin", "POST", f"/admin/regions/{REGION}/live", b"[",
           {"Content-Type": "application/json"}, declared_length=200)

    # ---- The end state.
    r.call("healthz-end", "public", "GET", "/healthz")
    r.call("readyz-end", "public", "GET", "/readyz")
    r.call("metrics-end", "public", "GET", "/metrics", kind="metrics")
    r.call("dashboard-data-end", "public", "GET", "/dashboard/data", kind="dashboard")
    r.call("admin-status-end", "admin", "GET", "/admin/status")
    r.call("openapi-end", "public", "GET", "/openapi.json")
    r.call("admin-openapi-end", "admin", "GET", "/admin/openapi.json")


def restart_cases(r, city):
    """After a restart over the same state dirs. No answer leaves now: the
    saved model's correction depends on the hour of the week."""
    P = city.point
    a, b, c, d = P(0), P(200), P(57, 0.0004, -0.0003), P(333)
    r.call("restart-healthz", "public", "GET", "/healthz")
    r.call("restart-readyz", "public", "GET", "/readyz")
    r.call("restart-admin-status", "admin", "GET", "/admin/status")
    for name, t in DEPARTURES[:4]:
        r.call(f"restart-eta-{name}", "public", "POST", "/v1/eta",
               {"from": a, "to": b, "leaving": t})
        r.call(f"restart-route-{name}", "public", "POST", "/v1/route",
               {"from": c, "to": d, "leaving": t})
        r.call(f"restart-matrix-{name}", "public", "POST", "/v1/eta/matrix",
               {"from": [a, c], "to": [b, d], "leaving": t})
    r.call("restart-reload", "admin", "POST", f"/admin/regions/{REGION}/reload")
    r.call("restart-metrics", "public", "GET", "/metrics", kind="metrics")
    r.call("restart-dashboard-data", "public", "GET", "/dashboard/data", kind="dashboard")
    r.call("restart-admin-status-end", "admin", "GET", "/admin/status")


# --------------------------------------------------------------------------
# Comparing


def show(v, limit=300):
    s = json.dumps(v, sort_keys=True)
    return s if len(s) <= limit else s[:limit] + "..."


def diff(a, b, path, out):
    if type(a) is not type(b) or not isinstance(a, (dict, list)):
        if a != b or type(a) is not type(b):
            out.append(f"{path}: {show(a)} != {show(b)}")
        return
    if isinstance(a, dict):
        for k in sorted(set(a) | set(b)):
            if k not in b:
                out.append(f"{path}.{k}: only in A: {show(a[k])}")
            elif k not in a:
                out.append(f"{path}.{k}: only in B: {show(b[k])}")
            else:
                diff(a[k], b[k], f"{path}.{k}", out)
        if list(a) != list(b) and set(a) == set(b):
            out.append(f"{path}: key order {list(a)} != {list(b)}")
        return
    if len(a) != len(b):
        out.append(f"{path}: length {len(a)} != {len(b)}")
    for i, (x, y) in enumerate(zip(a, b)):
        diff(x, y, f"{path}[{i}]", out)


def compare(pa, pb):
    with open(pa) as f:
        a = json.load(f)
    with open(pb) as f:
        b = json.load(f)
    print(f"A: {a.get('meta')}\nB: {b.get('meta')}")
    out = []
    diff(a.get("coverage"), b.get("coverage"), "coverage", out)
    diff(a.get("uncovered"), b.get("uncovered"), "uncovered", out)
    ca = {c["name"]: c for c in a["cases"]}
    cb = {c["name"]: c for c in b["cases"]}
    order_a = [c["name"] for c in a["cases"] if c["name"] in cb]
    order_b = [c["name"] for c in b["cases"] if c["name"] in ca]
    if order_a != order_b:
        out.append("case order differs")
    for name in [c["name"] for c in a["cases"]]:
        if name not in cb:
            out.append(f"{name}: only in A")
            continue
        diff(ca[name], cb[name], name, out)
    for name in [c["name"] for c in b["cases"]]:
        if name not in ca:
            out.append(f"{name}: only in B")
    for line in out:
        print(line)
    n = len(a["cases"])
    if out:
        print(f"{len(out)} difference(s) over {n} cases in A, {len(b['cases'])} in B")
        return 1
    print(f"identical: {n} cases, {len(a.get('coverage', {}))} operations")
    return 0


def main():
    p = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    p.add_argument("--hodos", help="the hodos binary to record")
    p.add_argument("--out", help="where to write the recording (JSON)")
    p.add_argument("--nodes", type=int, default=400, help="synthetic city size")
    p.add_argument("--seed", type=int, default=7, help="synthetic city seed")
    p.add_argument("--model", help="use this model file instead of training one")
    p.add_argument("--keep", action="store_true", help="keep the temp dir (printed)")
    p.add_argument("--compare", nargs=2, metavar=("A", "B"), help="compare two recordings")
    args = p.parse_args()
    if args.compare:
        return compare(*args.compare)
    if not (args.hodos and args.out):
        p.error("--hodos and --out are required (or --compare A B)")
    return record(args)


if __name__ == "__main__":
    sys.exit(main())
