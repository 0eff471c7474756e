"""Throughput of a sweep written to an object store (a local S3-compatible server) against local disk.

The same sweep (``winkler_column``, 30000 points, two thread workers, no model work so that the store is all
there is to measure) runs into a folder on local disk and into a bucket on moto's server on 127.0.0.1, for
several block sizes. Printed: points per second on each and the ratio disk / object store. Every request to
the server costs milliseconds (a local disk write costs microseconds), so small blocks measure latency;
blocks of a few thousand points (the size ``block.target_seconds`` chooses for models that take
milliseconds per point) amortise it.

Run: ``python benchmarks/bench_object_store.py`` (needs the test extra: s3fs and moto[server]). No asserts
on time: the figures go into commit messages.
"""

from __future__ import annotations

import contextlib
import os
import shutil
import socket
import subprocess
import sys
import tempfile
import time
import uuid


def _plan(path: str, block_points: int):  # type: ignore[no-untyped-def]
    from sweepshell.config.loader import build_plan

    return build_plan({"name": "bench", "model": "winkler_column", "fixed": {"end": "pinned"},
                       "settings": {"path_samples": 32},
                       "axes": {"stiffness_ratio": {"logspace": [-1, 3, 150]},
                                "load_ratio": {"linspace": [0.5, 40, 200]}},
                       "store": {"path": path}, "executor": {"kind": "threads", "workers": 2},
                       "block": {"points": block_points}, "reuse": False})


def _run(path: str, block_points: int) -> float:
    from sweepshell import run_sweep

    plan = _plan(path, block_points)
    t0 = time.perf_counter()
    summary = run_sweep(plan)
    seconds = time.perf_counter() - t0
    assert summary.complete and summary.computed == plan.n_points
    return plan.n_points / seconds


def _start_server() -> tuple[subprocess.Popen[bytes], str]:
    """Start moto's server in its own process (a thread would share this process's interpreter lock)."""
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        port = sock.getsockname()[1]
    proc = subprocess.Popen([sys.executable, "-m", "moto.server", "-H", "127.0.0.1", "-p", str(port)],
                            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    for _ in range(200):
        with socket.socket() as sock, contextlib.suppress(OSError):
            sock.connect(("127.0.0.1", port))
            return proc, f"http://127.0.0.1:{port}"
        time.sleep(0.05)
    proc.kill()
    raise SystemExit("moto's server did not start")


def main() -> None:
    import s3fs

    server, endpoint = _start_server()
    os.environ.update({"AWS_ACCESS_KEY_ID": "bench", "AWS_SECRET_ACCESS_KEY": "bench", "AWS_DEFAULT_REGION":
                       "us-east-1", "AWS_ENDPOINT_URL": endpoint})
    fs = s3fs.S3FileSystem(skip_instance_cache=True)
    bucket = f"bench-{uuid.uuid4().hex[:8]}"
    fs.mkdir(bucket)
    t0 = time.perf_counter()
    for i in range(40):
        fs.pipe_file(f"{bucket}/probe-{i}", b"x" * 1000)
    latency_ms = (time.perf_counter() - t0) / 40 * 1e3
    print(f"server: moto on 127.0.0.1 (own process), {latency_ms:.1f} ms per small PUT")
    folder = tempfile.mkdtemp(prefix="bench-object-store-")
    _run(os.path.join(folder, "warm.zarr"), 15000)  # imports and first-use costs outside the timings
    try:
        print("points per block | disk points/s | object store points/s | ratio disk/object store")
        for block_points in (300, 3000, 15000):
            disk = _run(os.path.join(folder, f"b{block_points}.zarr"), block_points)
            remote = _run(f"s3://{bucket}/b{block_points}.zarr", block_points)
            print(f"{block_points:>16} | {disk:>13.0f} | {remote:>21.0f} | {disk / remote:>6.1f}")
    finally:
        shutil.rmtree(folder, ignore_errors=True)
        server.terminate()
        server.wait(timeout=30)


if __name__ == "__main__":
    main()
