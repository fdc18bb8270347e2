"""Gunicorn settings for running the registry in production behind nginx.

Started by ``deploy/systemd/registry.service``::

    .venv/bin/gunicorn --config deploy/gunicorn.conf.py

The Django settings come from the environment (``/etc/registry/registry.env``, see
``deploy/env.example``); the few knobs below can be overridden there too.
"""

from __future__ import annotations

import multiprocessing
import os

wsgi_app = "registry.wsgi:application"

# nginx proxies to this address (deploy/nginx/registry.conf); keep it on the loopback.
bind = os.environ.get("REGISTRY_GUNICORN_BIND", "127.0.0.1:8001")

# Synchronous workers: requests are short, CPU-bound (numpy, pyproj, reportlab) and nginx
# buffers slow clients and uploads. The usual starting point is 2 x cores + 1, capped so a
# large machine does not open more database connections than PostgreSQL allows.
workers = int(os.environ.get("REGISTRY_GUNICORN_WORKERS", min(2 * multiprocessing.cpu_count() + 1, 9)))
worker_class = "sync"

# Long enough for a control report PDF with its map, a screening over a large site, or an
# import of a few thousand marks; anything longer should become a background job.
timeout = int(os.environ.get("REGISTRY_GUNICORN_TIMEOUT", "120"))
graceful_timeout = 30
keepalive = 5

# Recycle workers now and then so that a slow leak cannot grow for months. Not too often: a new worker
# starts with an empty read cache (registry/selectors/read_cache.py) and spends a second or two of CPU
# starting and filling it. At 2,000 a busy worker was replaced every 15 s; at 20,000 a worker serving
# 500 nearby-API requests a second every 40 s, which cost the load benchmark a tenth or more of its
# nearby throughput and raised its open-loop p95 from 6 to 23 ms (benchmarks/bench_load.py). At 200,000
# a worker under that full load lasts some 7 minutes, and under an office's usual load days.
max_requests = int(os.environ.get("REGISTRY_GUNICORN_MAX_REQUESTS", "200000"))
max_requests_jitter = max_requests // 10

# Trust X-Forwarded-* only from nginx on this machine.
forwarded_allow_ips = "127.0.0.1,::1"

# Logs go to the journal (systemd captures stdout/stderr).
accesslog = "-"
errorlog = "-"
loglevel = os.environ.get("REGISTRY_GUNICORN_LOG_LEVEL", "info")
access_log_format = '%(h)s "%(r)s" %(s)s %(b)s %(M)sms "%(a)s"'

# Heartbeat files in memory, not on a possibly slow or read-only disk.
worker_tmp_dir = "/dev/shm" if os.path.isdir("/dev/shm") else None
