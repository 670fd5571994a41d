#!/usr/bin/env bash
# The whole fluxproof stack on one machine, from the machine's own Redis and PostgreSQL:
# the API under gunicorn, Celery worker nodes and (optionally) beat.
#
#   deploy/local-stack.sh start    start everything; wait until /v1/health answers and every
#                                  worker is ready
#   deploy/local-stack.sh stop     SIGTERM each process, wait, SIGKILL its process group after
#                                  the timeout; remove the pid files
#   deploy/local-stack.sh status   each process and the health answer (exit 0 all up, 3 not)
#   deploy/local-stack.sh env      print `export` lines of the stack's settings, for
#                                  `eval "$(deploy/local-stack.sh env)"; fluxproof token create ...`
#
# Settings (environment, read by `start`; stop/status/env read what start saved):
#   FLUXPROOF_STACK_DIR       run directory: pid files, logs, stack.env (default var/stack)
#   FLUXPROOF_BIND            API address (default 127.0.0.1:8611)
#   FLUXPROOF_BROKER_URL      Redis database of the stack (default redis://127.0.0.1:6379/11)
#   FLUXPROOF_DATABASE_URL    store (default: database `test` on 127.0.0.1:5432, schema
#                             fluxproof_stack, first user of postgres/root/$USER that connects)
#   FLUXPROOF_STACK_WORKERS   worker nodes (default 2), each with FLUXPROOF_WORKER_CONCURRENCY
#                             pool processes (default 1)
#   FLUXPROOF_STACK_BEAT      1 to start beat as well (default 0)
#   FLUXPROOF_STACK_STOP_TIMEOUT   seconds before SIGKILL (default 45)
#   FLUXPROOF_STACK_START_TIMEOUT  seconds to wait for health and workers (default 90)
#   FLUXPROOF_BIN             directory of python, gunicorn, celery, fluxproof (default .venv/bin)
set -euo pipefail

root="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
bin="${FLUXPROOF_BIN:-$root/.venv/bin}"
stack_dir="${FLUXPROOF_STACK_DIR:-$root/var/stack}"
env_file="$stack_dir/stack.env"
stop_timeout="${FLUXPROOF_STACK_STOP_TIMEOUT:-45}"
start_timeout="${FLUXPROOF_STACK_START_TIMEOUT:-90}"
helper=("$bin/python" "$root/deploy/stack_services.py")

say() { printf 'local-stack: %s\n' "$*"; }
die() { printf 'local-stack: %s\n' "$*" >&2; exit 1; }

# --- processes ------------------------------------------------------------------------------

# alive PID: the process exists and is not a zombie
alive() {
    local state
    state="$(awk '{sub(/.*\) /, ""); print $1}' "/proc/$1/stat" 2>/dev/null)" || return 1
    [[ -n "$state" && "$state" != "Z" ]]
}

# ours PID: the pid still belongs to a program this script starts (guards against pid reuse)
ours() {
    local cmdline
    cmdline="$(tr '\0' ' ' 2>/dev/null < "/proc/$1/cmdline")" || return 1
    [[ "$cmdline" == *gunicorn* || "$cmdline" == *celery* ]]
}

# group_alive PGID: some process is still in the process group (a zombie counts until init
# reaps it, which it does at once for these orphans)
group_alive() {
    kill -0 -- "-$1" 2>/dev/null
}

pid_files() {
    local name
    for name in api beat; do
        [[ -f "$stack_dir/$name.pid" ]] && echo "$stack_dir/$name.pid"
    done
    compgen -G "$stack_dir/worker-*.pid" | sort || true
}

declare -A signalled=()

# signal_one PIDFILE: SIGTERM the process if it is still ours (gunicorn: graceful stop of its
# workers; celery: warm shutdown, the task in hand is finished)
signal_one() {
    local pid
    pid="$(cat "$1")"
    if alive "$pid" && ours "$pid"; then
        kill -TERM "$pid" 2>/dev/null || true
        signalled["$1"]=1
    fi
}

# await_one PIDFILE: wait for the process to end, up to the timeout, then SIGKILL its whole
# process group (its children, pool processes and gunicorn workers, share the group id)
await_one() {
    local pid_file="$1" name pid waited=0
    name="$(basename "$pid_file" .pid)"
    pid="$(cat "$pid_file")"
    if [[ -z "${signalled[$pid_file]:-}" ]]; then
        say "$name (pid $pid) was not running"
        rm -f "$pid_file"
        return
    fi
    while alive "$pid" && (( waited < stop_timeout * 10 )); do
        sleep 0.1
        waited=$((waited + 1))
    done
    if alive "$pid"; then
        say "$name (pid $pid) still running after ${stop_timeout} s: SIGKILL"
        kill -KILL -- "-$pid" 2>/dev/null || kill -KILL "$pid" 2>/dev/null || true
    fi
    waited=0
    while group_alive "$pid" && (( waited < 50 )); do
        sleep 0.1
        waited=$((waited + 1))
    done
    if group_alive "$pid"; then
        say "$name (pid $pid): children left in its group: SIGKILL"
        kill -KILL -- "-$pid" 2>/dev/null || true
    fi
    say "$name (pid $pid) stopped"
    rm -f "$pid_file"
}

# launch NAME COMMAND...: start COMMAND in a session of its own, log and pid file under the run
# directory. (In a script, a background job is not a group leader, so setsid execs in place
# and $! is the program's own pid.)
launch() {
    local name="$1"
    shift
    setsid "$@" >> "$stack_dir/$name.log" 2>&1 < /dev/null &
    echo $! > "$stack_dir/$name.pid"
}

# --- settings -------------------------------------------------------------------------------

save_settings() {
    local key
    : > "$env_file"
    chmod 600 "$env_file"
    for key in FLUXPROOF_BIND FLUXPROOF_BROKER_URL FLUXPROOF_DATABASE_URL FLUXPROOF_SECRET_KEY \
               FLUXPROOF_SIGNING_KEY_FILE FLUXPROOF_AUDIT_ANCHOR_FILE FLUXPROOF_DATA_DIR \
               FLUXPROOF_STACK_WORKERS FLUXPROOF_STACK_BEAT FLUXPROOF_STACK_LEASE_OWNER; do
        printf 'export %s=%q\n' "$key" "${!key}" >> "$env_file"
    done
}

load_settings() {
    [[ -f "$env_file" ]] || return 1
    # shellcheck disable=SC1090
    source "$env_file"
}

# --- commands -------------------------------------------------------------------------------

start() {
    local pid_file n
    mkdir -p "$stack_dir"
    for pid_file in $(pid_files); do
        if alive "$(cat "$pid_file")"; then
            die "already running ($(basename "$pid_file" .pid), pid $(cat "$pid_file")); stop first"
        fi
        rm -f "$pid_file"
    done
    [[ -x "$bin/gunicorn" && -x "$bin/celery" ]] \
        || die "gunicorn and celery not found in $bin (make test installs them; or set FLUXPROOF_BIN)"

    export FLUXPROOF_BIND="${FLUXPROOF_BIND:-127.0.0.1:8611}"
    export FLUXPROOF_BROKER_URL="${FLUXPROOF_BROKER_URL:-redis://127.0.0.1:6379/11}"
    if [[ -z "${FLUXPROOF_DATABASE_URL:-}" ]]; then
        FLUXPROOF_DATABASE_URL="$("${helper[@]}" pg-url fluxproof_stack)"
    fi
    export FLUXPROOF_DATABASE_URL
    if [[ -z "${FLUXPROOF_SECRET_KEY:-}" ]]; then
        FLUXPROOF_SECRET_KEY="$("$bin/python" -c 'import secrets; print(secrets.token_hex(32))')"
    fi
    export FLUXPROOF_SECRET_KEY
    export FLUXPROOF_DATA_DIR="${FLUXPROOF_DATA_DIR:-$stack_dir/data}"
    # The Ed25519 key that signs sign-offs and keys the audit chain, outside the database
    # (created on first start), and the chain's anchor file: one each for every process.
    export FLUXPROOF_SIGNING_KEY_FILE="${FLUXPROOF_SIGNING_KEY_FILE:-$stack_dir/signing_key.pem}"
    export FLUXPROOF_AUDIT_ANCHOR_FILE="${FLUXPROOF_AUDIT_ANCHOR_FILE:-$stack_dir/audit_anchor.jsonl}"
    export FLUXPROOF_STACK_WORKERS="${FLUXPROOF_STACK_WORKERS:-2}"
    export FLUXPROOF_STACK_BEAT="${FLUXPROOF_STACK_BEAT:-0}"
    export FLUXPROOF_STACK_LEASE_OWNER="${FLUXPROOF_STACK_LEASE_OWNER:-local-stack:$stack_dir}"
    export FLUXPROOF_BIN="$bin"
    [[ "$FLUXPROOF_STACK_WORKERS" =~ ^[1-9][0-9]*$ ]] \
        || die "FLUXPROOF_STACK_WORKERS: expected a whole number of at least 1, got '$FLUXPROOF_STACK_WORKERS'"
    save_settings

    "${helper[@]}" lease-redis "$FLUXPROOF_BROKER_URL" "$FLUXPROOF_STACK_LEASE_OWNER"
    "${helper[@]}" ensure-schema "$FLUXPROOF_DATABASE_URL"
    (cd "$root" && "$bin/fluxproof" db upgrade) >> "$stack_dir/migrate.log" 2>&1 \
        || die "fluxproof db upgrade failed; see $stack_dir/migrate.log"

    for ((n = 1; n <= FLUXPROOF_STACK_WORKERS; n++)); do
        launch "worker-$n" "$root/deploy/worker.sh" "stack-$n"
    done
    if [[ "$FLUXPROOF_STACK_BEAT" == 1 ]]; then
        FLUXPROOF_BEAT_SCHEDULE="$stack_dir/celerybeat-schedule" launch beat "$root/deploy/beat.sh"
    fi
    (cd "$root" && FLUXPROOF_AUTO_MIGRATE=false FLUXPROOF_ACCESS_LOG="$stack_dir/access.log" \
        launch api "$bin/gunicorn" -c "$root/deploy/gunicorn.conf.py" service.wsgi:app)

    if ! "${helper[@]}" wait-http "http://$FLUXPROOF_BIND/v1/health" "$start_timeout"; then
        tail -n 40 "$stack_dir/api.log" >&2 || true
        stop
        die "the API did not become healthy; the stack was stopped"
    fi
    for ((n = 1; n <= FLUXPROOF_STACK_WORKERS; n++)); do
        local waited=0
        until grep -Eq '@[^ ]+ ready\.' "$stack_dir/worker-$n.log" 2>/dev/null; do
            if ! alive "$(cat "$stack_dir/worker-$n.pid")" || (( waited > start_timeout * 10 )); then
                tail -n 40 "$stack_dir/worker-$n.log" >&2 || true
                stop
                die "worker-$n did not become ready; the stack was stopped"
            fi
            sleep 0.1
            waited=$((waited + 1))
        done
    done
    say "API http://$FLUXPROOF_BIND (health ok), $FLUXPROOF_STACK_WORKERS worker node(s)$(
        [[ "$FLUXPROOF_STACK_BEAT" == 1 ]] && echo ', beat'); logs and pids in $stack_dir"
}

stop() {
    local pid_file
    load_settings || true
    # Signalled in this order: the API (no new work), beat, the workers (they finish the
    # task in hand); then all are awaited together.
    for pid_file in $(pid_files); do
        signal_one "$pid_file"
    done
    for pid_file in $(pid_files); do
        await_one "$pid_file"
    done
    if [[ -n "${FLUXPROOF_BROKER_URL:-}" && -n "${FLUXPROOF_STACK_LEASE_OWNER:-}" ]]; then
        "${helper[@]}" release-redis "$FLUXPROOF_BROKER_URL" "$FLUXPROOF_STACK_LEASE_OWNER" || true
    fi
}

status() {
    local pid_file pid up=0 down=0
    load_settings || { say "not started (no $env_file)"; return 3; }
    for pid_file in $(pid_files); do
        pid="$(cat "$pid_file")"
        if alive "$pid" && ours "$pid"; then
            say "$(basename "$pid_file" .pid): running (pid $pid)"
            up=$((up + 1))
        else
            say "$(basename "$pid_file" .pid): NOT running (pid $pid)"
            down=$((down + 1))
        fi
    done
    if curl -fsS --max-time 5 "http://$FLUXPROOF_BIND/v1/health" > /dev/null 2>&1; then
        say "health http://$FLUXPROOF_BIND/v1/health: ok"
    else
        say "health http://$FLUXPROOF_BIND/v1/health: no healthy answer"
        down=$((down + 1))
    fi
    (( up > 0 && down == 0 )) || return 3
}

print_env() {
    load_settings || die "not started (no $env_file)"
    grep -E '^export FLUXPROOF_(BIND|BROKER_URL|DATABASE_URL|SECRET_KEY|SIGNING_KEY_FILE|AUDIT_ANCHOR_FILE|DATA_DIR)=' \
        "$env_file"
}

case "${1:-}" in
    start) start ;;
    stop) stop ;;
    status) status ;;
    env) print_env ;;
    *) echo "usage: $0 start|stop|status|env" >&2; exit 2 ;;
esac
