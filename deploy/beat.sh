#!/usr/bin/env bash
# The fluxproof scheduler: sends the nightly re-verification (fluxproof.reverify_all) at
# FLUXPROOF_NIGHTLY_AT (HH:MM, UTC). Run exactly ONE beat per deployment, or the batch is
# started twice.
#   FLUXPROOF_BEAT_SCHEDULE  file where beat keeps its last-run times
#                            (default: $FLUXPROOF_DATA_DIR/celerybeat-schedule, else ./var/...)
set -euo pipefail
root="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
bin="${FLUXPROOF_BIN:-$root/.venv/bin}"
if [[ -z "${FLUXPROOF_BROKER_URL:-}" ]]; then
    echo "beat.sh: FLUXPROOF_BROKER_URL is not set (e.g. redis://127.0.0.1:6379/0)" >&2
    exit 2
fi
schedule="${FLUXPROOF_BEAT_SCHEDULE:-${FLUXPROOF_DATA_DIR:-$root/var}/celerybeat-schedule}"
mkdir -p "$(dirname "$schedule")"
cd "$root"
exec "$bin/celery" -A worker.celery_app beat \
    --schedule "$schedule" \
    --loglevel "${FLUXPROOF_LOG_LEVEL:-INFO}"
