#!/usr/bin/env bash
# One fluxproof Celery worker node: deploy/worker.sh [NODE_NAME]
#
# Runs the queued checks (task fluxproof.execute_run) from FLUXPROOF_BROKER_URL and stores the
# records in FLUXPROOF_DATABASE_URL. Give every node on a host its own name (worker-1, ...);
# `fluxproof worker` is the same worker for the simple case of one node per host.
#   FLUXPROOF_WORKER_CONCURRENCY  pool processes of this node (default 1: one per node, and
#                                 one node per core)
#   FLUXPROOF_LOG_LEVEL           INFO by default
#   FLUXPROOF_BIN                 directory holding celery (default: the repository's .venv/bin)
set -euo pipefail
root="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
bin="${FLUXPROOF_BIN:-$root/.venv/bin}"
name="${1:-${FLUXPROOF_WORKER_NAME:-fluxproof}}"
if [[ -z "${FLUXPROOF_BROKER_URL:-}" ]]; then
    echo "worker.sh: FLUXPROOF_BROKER_URL is not set (e.g. redis://127.0.0.1:6379/0)" >&2
    exit 2
fi
cd "$root"
exec "$bin/celery" -A worker.celery_app worker \
    --hostname "${name}@%h" \
    --concurrency "${FLUXPROOF_WORKER_CONCURRENCY:-1}" \
    --loglevel "${FLUXPROOF_LOG_LEVEL:-INFO}"
