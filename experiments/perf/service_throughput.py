"""Throughput and latency of `invbench serve` on this machine (a script, not a test).

Saves the optimal table and the best base-stock policy of an invented lost-sales instance,
starts the service on 127.0.0.1 on a free port (its own process, stopped at the end), sends a
bounded burst of single-state requests from a few concurrent keep-alive connections, and prints
decisions per second and latency percentiles per policy. Target: at least 2,000 single-state
decisions per second with p99 under 20 ms. The client is a small asyncio HTTP/1.1 client, so
that on a 2-core machine the measurement is not limited by a heavier client library.

    .venv/bin/python experiments/perf/service_throughput.py [--requests 20000] [--connections 8]
"""
from __future__ import annotations

import argparse
import asyncio
import json
import os
import signal
import socket
import subprocess
import sys
import tempfile
import time
import urllib.request
from pathlib import Path

import numpy as np

import invbench

SPEC = {"name": "bike-chain-perf", "model": "lost_sales", "lead_time": 3, "shortage_cost": 9.0,
        "demand": {"distribution": "poisson", "mean": 5}}  # invented instance


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _die_with_parent() -> None:  # the server must not outlive this script, even if it is killed
    import ctypes
    ctypes.CDLL("libc.so.6", use_errno=True).prctl(1, signal.SIGTERM)  # PR_SET_PDEATHSIG


async def _worker(port: int, bodies: list[bytes], lat: list[float], stop_at: float) -> int:
    reader, writer = await asyncio.open_connection("127.0.0.1", port)
    done = 0
    try:
        for body in bodies:
            if time.perf_counter() > stop_at:
                break
            t0 = time.perf_counter()
            writer.write(b"POST /v1/order HTTP/1.1\r\nHost: 127.0.0.1\r\nContent-Type: application/json\r\n"
                         b"Content-Length: " + str(len(body)).encode() + b"\r\n\r\n" + body)
            head = await reader.readuntil(b"\r\n\r\n")
            if not head.startswith(b"HTTP/1.1 200"):
                raise RuntimeError(f"unexpected answer: {head[:80]!r}")
            length = int([h for h in head.split(b"\r\n") if h.lower().startswith(b"content-length:")][0].split(b":")[1])
            await reader.readexactly(length)
            lat.append(time.perf_counter() - t0)
            done += 1
    finally:
        writer.close()
    return done


async def burst(port: int, policy: str, states: np.ndarray, connections: int, seconds: float) -> tuple[float, np.ndarray]:
    bodies = [json.dumps({"policy": policy, "state": s.tolist()}).encode() for s in states]
    per = [bodies[i::connections] for i in range(connections)]
    lat: list[float] = []
    t0 = time.perf_counter()
    counts = await asyncio.gather(*(_worker(port, b, lat, t0 + seconds) for b in per))
    wall = time.perf_counter() - t0
    return sum(counts) / wall, np.array(lat) * 1e3


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--requests", type=int, default=20_000, help="requests per policy (bounded burst)")
    ap.add_argument("--connections", type=int, default=8, help="concurrent keep-alive connections")
    ap.add_argument("--seconds", type=float, default=30.0, help="stop a burst after this long in any case")
    args = ap.parse_args()
    if not (1 <= args.requests <= 1_000_000 and 1 <= args.connections <= 64 and 0 < args.seconds <= 120):
        ap.error("--requests in [1, 1e6], --connections in [1, 64], --seconds in (0, 120]")
    spec = invbench.load_spec(SPEC)
    tmp = Path(tempfile.mkdtemp(prefix="invbench-perf-"))
    res = invbench.solve(spec)
    invbench.save_policy(res, tmp / "optimal")
    invbench.save_policy(invbench.make_policy("base_stock", spec), tmp / "base_stock")
    port = free_port()
    server = subprocess.Popen([sys.executable, "-m", "invbench", "serve", str(tmp / "optimal"), str(tmp / "base_stock"),
                               "--port", str(port)], stdout=subprocess.DEVNULL, preexec_fn=_die_with_parent)
    try:
        deadline = time.time() + 60
        while True:
            try:
                urllib.request.urlopen(f"http://127.0.0.1:{port}/health", timeout=1).read()
                break
            except OSError:
                if server.poll() is not None or time.time() > deadline:
                    raise SystemExit("the service did not start")
                time.sleep(0.2)
        rng = np.random.default_rng(0)
        states = res.policy.states[rng.integers(0, len(res.policy.states), args.requests)]
        print(f"instance {spec.label}: {len(res.policy.states):,} table states; {args.requests:,} requests per "
              f"policy over {args.connections} connections; cpus {os.cpu_count()}")
        print(f"{'policy':<12} {'decisions/s':>12} {'p50 ms':>8} {'p90 ms':>8} {'p99 ms':>8} {'max ms':>8}")
        for name in ("optimal", "base_stock"):
            asyncio.run(burst(port, name, states[:500], args.connections, args.seconds))  # warm-up
            rate, lat = asyncio.run(burst(port, name, states, args.connections, args.seconds))
            p50, p90, p99 = np.percentile(lat, [50, 90, 99])
            print(f"{name:<12} {rate:>12,.0f} {p50:>8.2f} {p90:>8.2f} {p99:>8.2f} {lat.max():>8.2f}")
        target = "met" if rate >= 2000 and p99 < 20 else "NOT met"
        print(f"target (>= 2,000 decisions/s, p99 < 20 ms): {target} for the last policy")
    finally:
        server.terminate()
        try:
            server.wait(timeout=10)
        except subprocess.TimeoutExpired:
            server.kill()
            server.wait()
    return 0


if __name__ == "__main__":
    sys.exit(main())
