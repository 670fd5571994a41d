"""gunicorn settings of the fluxproof API: ``gunicorn -c deploy/gunicorn.conf.py service.wsgi:app``.

Every value can be changed from the environment, so one file serves the local stack, the
container image and the systemd unit:

``FLUXPROOF_BIND``            address to listen on (default ``127.0.0.1:8000``; a container
                              sets ``0.0.0.0:8000``)
``WEB_CONCURRENCY``           worker processes (default 2 x cores + 1, gunicorn's rule of thumb)
``FLUXPROOF_HTTP_THREADS``    threads per worker; above 1 the ``gthread`` worker is used
``FLUXPROOF_HTTP_TIMEOUT``    seconds a request may take before its worker is restarted (30)
``FLUXPROOF_GRACEFUL_TIMEOUT`` seconds to finish requests after SIGTERM (30)
``FLUXPROOF_ACCESS_LOG``      access log file, ``-`` for stdout (default ``-``)
``FLUXPROOF_ERROR_LOG``       error log file, ``-`` for stderr (default ``-``)
``FLUXPROOF_MAX_REQUESTS``    restart a worker after this many requests (0: never)

The app is not preloaded: each worker builds its own store engine and broker connection after
the fork (a connection pool shared across a fork is unsafe). Apply migrations once before start
(``fluxproof db upgrade``) and set ``FLUXPROOF_AUTO_MIGRATE=false`` for the API processes.
"""

import multiprocessing
import os


def _int(name: str, default: int) -> int:
    value = os.environ.get(name)
    if value is None or value == "":
        return default
    try:
        return int(value)
    except ValueError as exc:
        raise SystemExit(f"{name}: expected a whole number, got {value!r}") from exc


bind = os.environ.get("FLUXPROOF_BIND", "127.0.0.1:8000")
workers = _int("WEB_CONCURRENCY", multiprocessing.cpu_count() * 2 + 1)
threads = _int("FLUXPROOF_HTTP_THREADS", 1)
worker_class = "gthread" if threads > 1 else "sync"
timeout = _int("FLUXPROOF_HTTP_TIMEOUT", 30)
graceful_timeout = _int("FLUXPROOF_GRACEFUL_TIMEOUT", 30)
keepalive = 5
max_requests = _int("FLUXPROOF_MAX_REQUESTS", 0)
max_requests_jitter = max_requests // 10
preload_app = False
proc_name = "fluxproof-api"

accesslog = os.environ.get("FLUXPROOF_ACCESS_LOG", "-")
errorlog = os.environ.get("FLUXPROOF_ERROR_LOG", "-")
loglevel = os.environ.get("FLUXPROOF_LOG_LEVEL", "info").lower()
# Request time in microseconds (%(D)s) at the end of each line, for latency reading.
access_log_format = '%(h)s "%(r)s" %(s)s %(B)s "%(a)s" %(D)sus'
# Trust X-Forwarded-* only from a proxy on this machine.
forwarded_allow_ips = "127.0.0.1"
