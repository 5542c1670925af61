"""Mixed traffic at 64 connections for 60 s against ``foldwise serve --workers 2``.

Four request types run at once, each from its own wrk process (one thread), with the 64
connections shared out by weight: fold (20 random tones each time, so no answer comes
from the cache), diagnose of a 400-line spectrum, save (a small fold, new every time),
and read by id of results saved during the run (the save script appends each new id to
a file the read script re-reads). One wrk per type gives p50/p99 per endpoint, which a
single wrk cannot. Afterwards every id saved during the run is read back.

Bounded and 127.0.0.1 only. Never part of the test suite. Prints a table and exits 1
on any error: a non-2xx answer, a socket error or timeout, or a saved id that does not
read back.

    .venv/bin/python bench/load.py              # SQLite in a temporary data directory
    .venv/bin/python bench/load.py --postgres   # fresh schema in 127.0.0.1:5432/test
"""

from __future__ import annotations

import argparse
import contextlib
import json
import re
import secrets
import shutil
import subprocess
import sys
import tempfile
import time
from collections.abc import Iterator
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

import httpx

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from bench._util import local_server
from service.demo import demo_anti_alias, demo_diagnose_request

DURATION_S = 60
CONNECTIONS = {"fold": 24, "diagnose": 8, "save": 16, "read": 16}
WORKERS = 2
SEED_SAVES = 64
TIMEOUT = "10s"  # a request slower than this counts as an error
PG_CONNINFO = "host=127.0.0.1 port=5432 user=postgres dbname=test connect_timeout=5"
PG_URL = "postgresql+psycopg://postgres@127.0.0.1:5432/test"

# Shared by every script: count answers that are not 2xx (wrk itself lets 3xx pass) and
# report them from done(), which runs after the threads finished.
COMMON_LUA = """
local threads = {}
function setup(thread) table.insert(threads, thread) end
bad = 0
function count(status) if status < 200 or status > 299 then bad = bad + 1 end end
function done(summary, latency, requests)
  local total = 0
  for _, t in ipairs(threads) do total = total + t:get("bad") end
  io.write(string.format("not-2xx: %d\\n", total))
end
"""

TONES_LUA = """
local function tones(n)
  local parts = {}
  for i = 1, n do
    parts[i] = string.format('{"label":"tone %d","freq_hz":%.3f,"amplitude":0.1}', i,
                             math.random() * 40000)
  end
  return '{"sample_rate_hz":12800,"anti_alias":{"family":"butterworth","order":2,' ..
         '"cutoff_hz":5000},"tones":[' .. table.concat(parts, ",") .. ']}'
end
"""

FOLD_LUA = """
math.randomseed(11)
wrk.method = "POST"
wrk.headers["Content-Type"] = "application/json"
function request() return wrk.format(nil, "/api/v1/fold", nil, tones(20)) end
function response(status, headers, body) count(status) end
"""

DIAGNOSE_LUA = """
wrk.method = "POST"
wrk.path = "/api/v1/diagnose"
wrk.headers["Content-Type"] = "application/json"
wrk.body = {body}
function response(status, headers, body) count(status) end
"""

SAVE_LUA = """
math.randomseed(13)
wrk.method = "POST"
wrk.headers["Content-Type"] = "application/json"
local ids = io.open({ids_file}, "a")
function request()
  local body = '{{"kind":"fold","title":"load run","request":' .. tones(3) .. '}}'
  return wrk.format(nil, "/api/v1/diagnoses", nil, body)
end
function response(status, headers, body)
  count(status)
  if status == 201 then
    local id = string.match(body, '"id":"([%w_-]+)"')
    if id then ids:write(id, "\\n"); ids:flush() end
  end
end
"""

READ_LUA = """
math.randomseed(17)
local ids, sent = {{}}, 0
local function reload()
  local f = io.open({ids_file}, "r")
  if f then
    local fresh = {{}}
    for line in f:lines() do if #line > 0 then table.insert(fresh, line) end end
    f:close()
    if #fresh > 0 then ids = fresh end
  end
end
reload()
function request()
  sent = sent + 1
  if sent % 100 == 0 then reload() end
  local id = ids[math.random(#ids)]
  return wrk.format("GET", "/api/v1/diagnoses/" .. id .. "?spectrum=false")
end
function response(status, headers, body) count(status) end
"""


def _ms(text: str) -> float:
    m = re.match(r"([\d.]+)(us|ms|s)$", text)
    if not m:
        return float("nan")
    v, unit = float(m.group(1)), m.group(2)
    return v / 1000 if unit == "us" else v * 1000 if unit == "s" else v


def _parse(out: str) -> dict[str, float]:
    def num(pattern: str) -> float:
        m = re.search(pattern, out)
        return float(m.group(1)) if m else 0.0

    p = {q: _ms(v) for q, v in re.findall(r"^\s+(50|99)%\s+(\S+)", out, re.M)}
    sock = re.search(r"Socket errors: connect (\d+), read (\d+), write (\d+), timeout (\d+)", out)
    return {
        "requests": num(r"(\d+) requests in"),
        "rps": num(r"Requests/sec:\s+([\d.]+)"),
        "p50": p.get("50", float("nan")),
        "p99": p.get("99", float("nan")),
        "not2xx": max(num(r"not-2xx: (\d+)"), num(r"Non-2xx or 3xx responses: (\d+)")),
        "socket": float(sum(int(g) for g in sock.groups())) if sock else 0.0,
    }


@contextlib.contextmanager
def _pg_schema() -> Iterator[str]:
    import psycopg

    schema = f"fw_load_{secrets.token_hex(6)}"
    with psycopg.connect(PG_CONNINFO, autocommit=True) as admin:
        admin.execute(f'CREATE SCHEMA "{schema}"')
    try:
        yield f"{PG_URL}?options=-csearch_path%3D{schema}&application_name={schema}"
    finally:
        with psycopg.connect(PG_CONNINFO, autocommit=True) as admin:
            admin.execute(
                "SELECT pg_terminate_backend(pid) FROM pg_stat_activity "
                "WHERE application_name = %s",
                (schema,),
            )
            admin.execute(f'DROP SCHEMA "{schema}" CASCADE')


def _scripts(tmp: Path, ids_file: Path) -> dict[str, Path]:
    diagnose_body = json.dumps(demo_diagnose_request(lines=400))
    quoted_ids = json.dumps(str(ids_file))
    texts = {
        "fold": TONES_LUA + FOLD_LUA,
        "diagnose": DIAGNOSE_LUA.replace("{body}", json.dumps(diagnose_body)),
        "save": TONES_LUA + SAVE_LUA.format(ids_file=quoted_ids),
        "read": READ_LUA.format(ids_file=quoted_ids),
    }
    paths = {}
    for name, text in texts.items():
        paths[name] = tmp / f"{name}.lua"
        paths[name].write_text(COMMON_LUA + text)
    return paths


def _warm_up_and_seed(base: str, ids_file: Path) -> None:
    with httpx.Client(base_url=base, timeout=60) as client:
        r = client.get("/readyz")
        r.raise_for_status()
        client.post("/api/v1/diagnose", json=demo_diagnose_request(lines=400)).raise_for_status()
        ids = []
        for n in range(SEED_SAVES):
            req = {
                "sample_rate_hz": 12_800.0,
                "anti_alias": demo_anti_alias(),
                "tones": [{"label": "seed", "freq_hz": 10_000.0 + n}],
            }
            r = client.post("/api/v1/diagnoses", json={"kind": "fold", "request": req})
            r.raise_for_status()
            ids.append(r.json()["id"])
    ids_file.write_text("".join(f"{i}\n" for i in ids))


def _read_back(base: str, ids: list[str]) -> int:
    """How many of ``ids`` do not read back with 200."""
    with httpx.Client(base_url=base, timeout=60) as client:

        def ok(rid: str) -> bool:
            r = client.get(f"/api/v1/diagnoses/{rid}", params={"spectrum": "false"})
            return r.status_code == 200 and r.json()["id"] == rid

        with ThreadPoolExecutor(8) as pool:
            return sum(not good for good in pool.map(ok, ids))


def run(postgres: bool, duration_s: int, loop: str = "asyncio") -> int:
    with contextlib.ExitStack() as stack:
        tmp = Path(stack.enter_context(tempfile.TemporaryDirectory()))
        env = {"FOLDWISE_LOG_LEVEL": "warning"}
        if postgres:
            env["FOLDWISE_DATABASE_URL"] = stack.enter_context(_pg_schema())
        base = stack.enter_context(
            local_server(env, workers=WORKERS, data_dir=tmp / "data", loop=loop)
        )
        ids_file = tmp / "ids.txt"
        _warm_up_and_seed(base, ids_file)
        seeded = len(ids_file.read_text().split())
        scripts = _scripts(tmp, ids_file)
        procs = {
            name: subprocess.Popen(
                [
                    "wrk",
                    "-t1",
                    f"-c{CONNECTIONS[name]}",
                    f"-d{duration_s}s",
                    f"--timeout={TIMEOUT}",
                    "--latency",
                    "-s",
                    str(scripts[name]),
                    base,
                ],
                stdout=subprocess.PIPE,
                stderr=subprocess.STDOUT,
                text=True,
            )
            for name in CONNECTIONS
        }
        t0 = time.monotonic()
        outs = {name: p.communicate(timeout=duration_s + 60)[0] for name, p in procs.items()}
        wall = time.monotonic() - t0
        saved_during = ids_file.read_text().split()[seeded:]
        unreadable = _read_back(base, saved_during)

    results = {name: _parse(out) for name, out in outs.items()}
    store = "PostgreSQL (fresh schema)" if postgres else "SQLite (WAL, synchronous=FULL)"
    print(
        f"load: {sum(CONNECTIONS.values())} connections for {duration_s} s ({wall:.0f} s wall), "
        f"one wrk per endpoint, 127.0.0.1; server: foldwise serve --workers {WORKERS} "
        f"--loop {loop}, {store}"
    )
    head = (
        f"{'endpoint':<34} {'conns':>5} {'requests':>9} {'req/s':>8} "
        f"{'p50 ms':>8} {'p99 ms':>8} {'not 2xx':>8} {'socket':>7}"
    )
    print(head)
    print("-" * len(head))
    labels = {
        "fold": "POST /api/v1/fold (20 tones)",
        "diagnose": "POST /api/v1/diagnose (400 lines)",
        "save": "POST /api/v1/diagnoses",
        "read": "GET  /api/v1/diagnoses/{id}",
    }
    for name, r in results.items():
        print(
            f"{labels[name]:<34} {CONNECTIONS[name]:>5} {r['requests']:>9.0f} {r['rps']:>8.1f} "
            f"{r['p50']:>8.2f} {r['p99']:>8.2f} {r['not2xx']:>8.0f} {r['socket']:>7.0f}"
        )
    total = sum(r["requests"] for r in results.values())
    errors = sum(r["not2xx"] + r["socket"] for r in results.values())
    print(f"total {total:.0f} requests, {total / duration_s:.0f} req/s, {errors:.0f} errors")
    print(
        f"saved during the run: {len(saved_during)}; read back afterwards: "
        f"{len(saved_during) - unreadable} ok, {unreadable} missing"
    )
    bad = [name for name, out in outs.items() if "Requests/sec" not in out]
    for name in bad:
        print(f"wrk for {name} did not finish normally:\n{outs[name][-2000:]}")
    ok = errors == 0 and unreadable == 0 and not bad and len(saved_during) > 0
    print("PASS: no errors" if ok else "FAIL")
    return 0 if ok else 1


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument(
        "--postgres", action="store_true", help="use the local PostgreSQL (fresh schema)"
    )
    parser.add_argument("--duration", type=int, default=DURATION_S, help="seconds of load")
    parser.add_argument("--loop", choices=("asyncio", "uvloop"), default="asyncio")
    ns = parser.parse_args()
    if shutil.which("wrk") is None:
        print("wrk is not installed (Debian package 'wrk'); cannot run this benchmark")
        return 2
    if not 1 <= ns.duration <= 600:
        print(f"--duration={ns.duration} must be between 1 and 600 s")
        return 2
    return run(ns.postgres, ns.duration, ns.loop)


if __name__ == "__main__":
    sys.exit(main())
