"""Station submit and item page under 8 concurrent clients with waitress on loopback,
against the same requests through the Flask test client in-process."""

from __future__ import annotations

import http.client
import itertools
import logging
import statistics
import threading
import time
import urllib.parse
from typing import Any

from common import Result, Size, account

from curation import create_app
from curation.web.app import database, settle_for_serving

CLIENTS, P95_GOAL, THROUGHPUT_GOAL = 8, 0.100, 0.5
_keys = itertools.count()


def _requests(codes: dict[str, str], n: int) -> list[tuple[str, str, dict[str, str] | None]]:
    """n requests: item pages of the deep needle and station submissions, in turn."""
    page = ("GET", f"/items/{codes['deep_needle']}", None)
    post = ("POST", f"/stations/{codes['station']}/record", {
        "technique": "sem-imaging", "items": codes["large_family"], "operator": codes["operator"],
        "started": "2032-01-05T10:00", "started-offset": "+01:00",
        "p_accelerating_voltage_kV": "5", "p_beam_current_nA": "0.5",
        "p_detector": "secondary_electron"})
    return [page if k % 2 == 0 else post for k in range(n)]


def _cookie(app: Any, user_id: int) -> str:
    """The session cookie a login as `user_id` would set."""
    signed = app.session_interface.get_signing_serializer(app).dumps({"user_id": user_id})
    return f"{app.config['SESSION_COOKIE_NAME']}={signed}"


def _check(method: str, path: str, status: int, location: str | None) -> None:
    """A page must answer 200 and a submission must redirect, but never to the login page."""
    if status != (200 if method == "GET" else 302) or "/login" in (location or ""):
        raise RuntimeError(f"{method} {path}: {status} {location or ''}")


def _form(data: dict[str, str]) -> dict[str, str]:
    return {**data, "submission_key": f"bench-{next(_keys)}-{time.time_ns()}"}


def _client_loop(port: int, cookie: str, work: list[Any], latencies: list[float]) -> None:
    conn = http.client.HTTPConnection("127.0.0.1", port, timeout=30)
    for method, path, data in work:
        body = urllib.parse.urlencode(_form(data)) if data else None
        headers = {"Cookie": cookie}
        if data:
            headers["Content-Type"] = "application/x-www-form-urlencoded"
        started = time.perf_counter()
        conn.request(method, path, body=body, headers=headers)
        response = conn.getresponse()
        response.read()
        latencies.append(time.perf_counter() - started)
        _check(method, path, response.status, response.getheader("Location"))
    conn.close()


def _waitress(app: Any, cookie: str, work: list[Any]) -> tuple[list[float], float]:
    import waitress  # type: ignore[import-untyped]

    # Requests waiting for a thread are what this measures; waitress would warn of each one.
    logging.getLogger("waitress.queue").setLevel(logging.ERROR)
    server = waitress.create_server(app, host="127.0.0.1", port=0, threads=CLIENTS)
    serving = threading.Thread(target=server.run, daemon=True)
    serving.start()
    latencies: list[float] = []
    shares = [work[k::CLIENTS] for k in range(CLIENTS)]
    threads = [threading.Thread(target=_client_loop,
                                args=(server.effective_port, cookie, s, latencies))
               for s in shares]
    started = time.perf_counter()
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    elapsed = time.perf_counter() - started
    # A worker may still be answering its last keep-alive channel: keep its noise out.
    logging.getLogger("waitress").setLevel(logging.CRITICAL)
    server.close()
    return latencies, elapsed


def _in_process(app: Any, user_id: int, work: list[Any]) -> tuple[list[float], float]:
    client, latencies = app.test_client(), []
    with client.session_transaction() as cookie:
        cookie["user_id"] = user_id
    started = time.perf_counter()
    for method, path, data in work:
        t = time.perf_counter()
        response = client.open(path, method=method, data=_form(data) if data else None)
        latencies.append(time.perf_counter() - t)
        _check(method, path, response.status_code, response.headers.get("Location"))
    return latencies, time.perf_counter() - started


def _p(values: list[float], q: int) -> float:
    return statistics.quantiles(values, n=100)[q - 1] if len(values) > 1 else values[0]


def run(url: str, size: Size, codes: dict[str, str]) -> list[Result]:
    """p50/p95 and throughput of both; goals p95 <= 100 ms and throughput >= 0.5x."""
    app = create_app({"DATABASE_URL": url, "SECRET_KEY": "bench", "WTF_CSRF_ENABLED": False})
    work = _requests(codes, size.load_requests)
    user_id = account(database(app).sessions, "curator")
    settle_for_serving()  # as `curation serve` does
    _in_process(app, user_id, work[:4])
    base_lat, base_s = _in_process(app, user_id, work)
    lat, elapsed = _waitress(app, _cookie(app, user_id), work)
    name = "postgresql" if url.startswith("postgresql") else "sqlite"
    note = f"p50 {_p(lat, 50) * 1000:.1f} ms (in-process {_p(base_lat, 50) * 1000:.1f} ms)"
    return [
        Result(f"load: p95 latency, {CLIENTS} clients on waitress", name, _p(lat, 95),
               _p(base_lat, 95), P95_GOAL, kind="absolute", note=note),
        Result(f"load: throughput, {CLIENTS} clients vs in-process (req/s)", name,
               len(work) / elapsed, len(work) / base_s, THROUGHPUT_GOAL, unit="req/s",
               kind="at-least"),
    ]
