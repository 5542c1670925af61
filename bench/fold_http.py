"""POST /api/v1/fold (20 tones) against the trivial JSON endpoint /healthz of the same app.

A real server on 127.0.0.1 (one worker), loaded by wrk for 10 s with 32 connections per
endpoint. Bars (issue "Foundation"): fold throughput ≥ 60 % of the trivial endpoint's,
fold p99 ≤ 25 ms on a 2-core machine. Prints the ratio; asserts nothing.

``--loop uvloop`` measures the same with uvloop instead of the default asyncio loop.
"""

from __future__ import annotations

import argparse
import json
import re
import shutil
import subprocess
import sys
import tempfile
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from bench._util import local_server
from service.demo import demo_anti_alias

DURATION_S = 10
CONNECTIONS = 32


def fold_body() -> dict[str, object]:
    tones = [
        {"label": f"tone {i}", "freq_hz": 250.0 * (i + 1) + 13.0, "amplitude": 0.1}
        for i in range(20)
    ]
    return {"sample_rate_hz": 12_800.0, "anti_alias": demo_anti_alias(), "tones": tones}


# Every request a different body (20 random tone frequencies), so no answer can come
# from the response cache: this measures the computation itself.
VARIED_LUA = """
wrk.method = "POST"
wrk.headers["Content-Type"] = "application/json"
math.randomseed(7)
request = function()
  local parts = {}
  for i = 1, 20 do
    parts[i] = string.format('{"label":"tone %d","freq_hz":%.3f,"amplitude":0.1}', i,
                             math.random() * 40000)
  end
  local body = '{"sample_rate_hz":12800,"anti_alias":{"family":"butterworth","order":2,' ..
               '"cutoff_hz":5000},"tones":[' .. table.concat(parts, ",") .. ']}'
  return wrk.format(nil, nil, nil, body)
end
"""


def _ms(text: str) -> float:
    m = re.match(r"([\d.]+)(us|ms|s)", text)
    if not m:
        return float("nan")
    v, unit = float(m.group(1)), m.group(2)
    return v / 1000 if unit == "us" else v * 1000 if unit == "s" else v


def run_wrk(url: str, lua: Path | None) -> dict[str, float]:
    cmd = ["wrk", "-t1", f"-c{CONNECTIONS}", f"-d{DURATION_S}s", "--latency", url]
    if lua is not None:
        cmd[1:1] = ["-s", str(lua)]
    out = subprocess.run(cmd, capture_output=True, text=True, check=True).stdout
    rps = float(re.search(r"Requests/sec:\s+([\d.]+)", out).group(1))  # type: ignore[union-attr]
    p = {q: _ms(v) for q, v in re.findall(r"^\s+(50|90|99)%\s+(\S+)", out, re.M)}
    errors = re.search(r"Non-2xx or 3xx responses: (\d+)", out)
    return {
        "rps": rps,
        "p50": p.get("50", float("nan")),
        "p99": p.get("99", float("nan")),
        "non2xx": float(errors.group(1)) if errors else 0.0,
    }


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--loop", choices=("asyncio", "uvloop"), default="asyncio")
    loop = parser.parse_args().loop
    if shutil.which("wrk") is None:
        print("wrk is not installed (Debian package 'wrk'); cannot run this benchmark")
        return 2
    with tempfile.TemporaryDirectory() as tmp:
        lua = Path(tmp) / "post.lua"
        body = json.dumps(fold_body())
        lua.write_text(
            'wrk.method = "POST"\n'
            'wrk.headers["Content-Type"] = "application/json"\n'
            f"wrk.body = {json.dumps(body)}\n"
        )
        varied = Path(tmp) / "varied.lua"
        varied.write_text(VARIED_LUA)
        with local_server(data_dir=Path(tmp) / "data", loop=loop) as base:
            run_wrk(base + "/healthz", None)  # warm up
            trivial = run_wrk(base + "/healthz", None)
            fold = run_wrk(base + "/api/v1/fold", lua)
            fresh = run_wrk(base + "/api/v1/fold", varied)
    print(
        f"load: wrk, {DURATION_S} s, {CONNECTIONS} connections, 1 thread, 127.0.0.1, "
        f"1 server worker, {loop} event loop"
    )
    rows = [
        ("GET  /healthz (trivial)", trivial),
        ("POST /api/v1/fold, same body", fold),
        ("POST /api/v1/fold, new body each", fresh),
    ]
    for name, r in rows:
        print(
            f"{name:34s} {r['rps']:8.0f} req/s  ratio {r['rps'] / trivial['rps']:5.2f}  "
            f"p50 {r['p50']:6.2f} ms  p99 {r['p99']:6.2f} ms  non-2xx {r['non2xx']:.0f}"
        )
    ratio = fold["rps"] / trivial["rps"]
    ok_ratio, ok_p99 = ratio >= 0.6, fold["p99"] <= 25.0
    print(
        f"bar (same 20-tone body): ratio {ratio:.2f} >= 0.60 {'PASS' if ok_ratio else 'FAIL'}; "
        f"p99 {fold['p99']:.2f} ms <= 25 ms {'PASS' if ok_p99 else 'FAIL'}"
    )
    fr = fresh["rps"] / trivial["rps"]
    print(f"computed every time (cache bypassed): ratio {fr:.2f}, p99 {fresh['p99']:.2f} ms")
    ok = ok_ratio and ok_p99 and fold["non2xx"] == 0 and fresh["non2xx"] == 0
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
