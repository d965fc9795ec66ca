"""Page latency of the workbench, driven over HTTP against a real `saltplan serve`.

Starts ``saltplan serve`` (uvicorn, 127.0.0.1, a free port) in a subprocess and measures,
with an HTTP client (httpx), wall-clock time per request:

* new compound (paste SMILES -> plan -> redirect), the compound page (GET), the plan updated
  in place (htmx POST of a measured pKa), the screen designer (POST, plate drawn);
* the compound page again while a 1,000-row portfolio runs in the background worker.

Molecule: an invented drug-like base (a tertiary amine on a chlorophenyl ethyl chain with an
amide: MW about 330). Prints median and 90th percentile [ms] of N repeats.

    python benchmarks/web_speed.py [--repeat 10]
"""
from __future__ import annotations

import argparse
import re
import shutil
import socket
import statistics
import subprocess
import sys
import time

import httpx

API = "CN(C)CCc1ccc(Cl)cc1NC(=O)c1ccc(OC)cc1"
PORTFOLIO_SMILES = ["CN(C)CCc1ccc(Cl)cc1", "OC(=O)c1ccccc1", "c1ccncc1",
                    "CC(=O)Nc1ccc(O)cc1", "CCN(CC)CCOC(=O)c1ccc(N)cc1"]


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def timed(fn, n: int) -> list[float]:
    out = []
    for _ in range(n):
        t = time.perf_counter()
        fn()
        out.append((time.perf_counter() - t) * 1000)
    return out


def show(label: str, ms: list[float]) -> None:
    ms = sorted(ms)
    p90 = ms[min(len(ms) - 1, int(round(0.9 * (len(ms) - 1))))]
    print(f"{label:<58} median {statistics.median(ms):7.0f} ms   p90 {p90:7.0f} ms   (n={len(ms)})")


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=10)
    args = ap.parse_args()
    port = free_port()
    exe = shutil.which("saltplan") or sys.executable
    cmd = [exe, "serve", "--port", str(port)] if exe != sys.executable else \
        [sys.executable, "-m", "saltplan.cli", "serve", "--port", str(port)]
    server = subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True)
    base = f"http://127.0.0.1:{port}"
    try:
        c = httpx.Client(base_url=base, timeout=120)
        for _ in range(200):
            try:
                c.get("/")
                break
            except httpx.TransportError:
                time.sleep(0.1)
        tok = c.cookies.get("saltplan_csrf")
        urls: list[str] = []

        def new():
            r = c.post("/new", data={"csrf_token": tok, "structure": API, "name": "HRN-150"})
            urls.append(r.headers["location"])

        new()                                             # warm-up (imports, caches)
        show("new compound (paste SMILES, plan, redirect)", timed(new, args.repeat))
        url = urls[-1]
        show("compound page (GET, drawing + ranked plan)", timed(lambda: c.get(url), args.repeat))
        pkas = iter(f"base={7 + 0.01 * i:.2f}" for i in range(10_000))
        show("plan updated in place (htmx POST, measured pKa)", timed(
            lambda: c.post(url + "/inputs", headers={"hx-request": "true"},
                           data={"csrf_token": tok, "pka": next(pkas)}), args.repeat))
        show("screen designer (POST, plate map drawn)", timed(
            lambda: c.post(url + "/screen", headers={"hx-request": "true"},
                           data={"csrf_token": tok, "budget_mg": "800"}), args.repeat))

        body = "id,smiles\n" + "".join(f"HRN-{i},{PORTFOLIO_SMILES[i % 5]}\n" for i in range(1000))
        t0 = time.perf_counter()
        r = c.post("/portfolio", data={"csrf_token": tok},
                   files={"file": ("p.csv", body.encode(), "text/csv")})
        job = str(r.url)
        during: list[float] = []
        while True:
            during += timed(lambda: c.get(url), 1)
            p = c.get(job + "/progress")
            if p.headers.get("hx-refresh"):
                break
            time.sleep(0.2)
        total = time.perf_counter() - t0
        done = re.search(r'id="job-count">([^<]*)<', p.text)
        show("compound page during a 1,000-row portfolio run", during)
        print(f"portfolio run: {done.group(1) if done else '?'} in {total:.1f} s "
              f"({1000 / total:.0f} rows/s, one worker process)")
    finally:
        server.terminate()
        server.wait(10)
    return 0


if __name__ == "__main__":
    sys.exit(main())
