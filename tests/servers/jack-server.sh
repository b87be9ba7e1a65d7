#!/usr/bin/env bash
# A private JACK server with no sound card (dummy driver), and a test tone to play into it.
#
#   jack-server.sh start NAME [TONE_CLIENT]
#       Start `jackd --no-realtime -d dummy -r 48000 -p 480` as server NAME (clients pick it with
#       JACK_DEFAULT_SERVER=NAME) and wait until it answers (at most 10 s). With TONE_CLIENT, also
#       start a tone client of that name (see `tone`). Exit 0 once everything answers; if anything
#       fails to come up, whatever was started is stopped again and the exit status is 1.
#       Starting a NAME that is already running is an error (stop it first, or use restart).
#   jack-server.sh tone NAME CLIENT
#       Start jack_simple_client as CLIENT on server NAME and wait (at most 10 s) for its ports
#       CLIENT:output1 and CLIENT:output2: 240 Hz and 720 Hz sines, peak 0.2 (-13.98 dBFS), an
#       exact 200-sample table at 48 kHz. It exits by itself when the server goes away.
#   jack-server.sh stop NAME
#       Stop the tone clients and the server of NAME (SIGTERM to their process groups, SIGKILL
#       after 5 s), then remove NAME's state and its leftovers in /dev/shm. Fine to run when
#       nothing runs, and to run twice.
#   jack-server.sh restart NAME [TONE_CLIENT]
#       stop, then start.
#   jack-server.sh status NAME
#       Exit 0 when server NAME answers; print its ports and connections.
#   jack-server.sh selftest
#       Start a server with a tone, record 1 s of the tone with jack_rec, stop, restart, time it
#       all, and stop. Cleans up after itself whatever happens.
#
# Client tools started here never start a server of their own (JACK_NO_START_SERVER=1). State
# (pids, logs) lives in $BRINK_JACK_STATE_DIR/NAME, by default ${TMPDIR:-/tmp}/brink-jack-UID/NAME.
set -euo pipefail

RATE=48000
PERIOD=480
START_WAIT_S=10
STOP_WAIT_S=5

export JACK_NO_START_SERVER=1

usage() {
    sed -n '2,/^set -euo/p' "$0" | sed '$d' | sed 's/^# \{0,1\}//' >&2
    exit 2
}

die() {
    echo "jack-server: $*" >&2
    exit 1
}

need() {
    local t
    for t in "$@"; do
        command -v "$t" >/dev/null || die "$t not found: install jackd2"
    done
}

check_name() {
    [[ $1 =~ ^[A-Za-z0-9_.-]+$ ]] || die "name '$1': use letters, digits, '_', '.' and '-'"
}

state_dir() {
    echo "${BRINK_JACK_STATE_DIR:-${TMPDIR:-/tmp}/brink-jack-$(id -u)}/$1"
}

now_ms() {
    date +%s%3N
}

# True when server $1 answers.
answers() {
    JACK_DEFAULT_SERVER=$1 jack_lsp >/dev/null 2>&1
}

# True when process $1 exists and is not a zombie (an exited child nobody has reaped yet).
alive() {
    local state
    state=$(sed 's/.*) //' "/proc/$1/stat" 2>/dev/null | cut -d' ' -f1) || return 1
    [ -n "$state" ] && [ "$state" != Z ]
}

# The pid in file $1 if that process is alive, else nothing.
live_pid() {
    local pid
    [ -f "$1" ] || return 1
    pid=$(cat "$1")
    [[ $pid =~ ^[0-9]+$ ]] && alive "$pid" && echo "$pid"
}

# Stop the process group led by the pid in file $1: TERM, then KILL after STOP_WAIT_S.
stop_group() {
    local file=$1 pid i
    pid=$(live_pid "$file") || {
        rm -f "$file"
        return 0
    }
    kill -TERM -- "-$pid" 2>/dev/null || kill -TERM "$pid" 2>/dev/null || true
    for ((i = 0; i < STOP_WAIT_S * 20; i++)); do
        alive "$pid" || break
        sleep 0.05
    done
    if alive "$pid"; then
        echo "jack-server: pid $pid did not stop in ${STOP_WAIT_S} s: SIGKILL" >&2
        kill -KILL -- "-$pid" 2>/dev/null || kill -KILL "$pid" 2>/dev/null || true
        for ((i = 0; i < 40; i++)); do
            alive "$pid" || break
            sleep 0.05
        done
    fi
    rm -f "$file"
}

# Start "$@" in a session (and process group) of its own, with no terminal and its output in
# log file $2; the pid (= process group id) goes to file $1.
spawn() {
    local pidfile=$1 log=$2
    shift 2
    setsid "$@" </dev/null >"$log" 2>&1 &
    echo $! >"$pidfile"
}

stop() {
    local name=$1 dir f
    check_name "$name"
    dir=$(state_dir "$name")
    if [ -d "$dir" ]; then
        for f in "$dir"/tone-*.pid; do
            [ -e "$f" ] && stop_group "$f"
        done
        stop_group "$dir/jackd.pid"
        rm -rf "$dir"
    fi
    # A server that died hard leaves its socket and semaphores behind; they are named after it.
    rm -f /dev/shm/jack_"$name"_* /dev/shm/jack_sem.*_"$name"_* 2>/dev/null || true
    echo "jack-server: $name stopped"
}

# JACK keeps a registry of its servers in /dev/shm, with room for a few. The entry of a server
# that died hard stays behind, and once the dead server's pid is reused by another process its
# slot looks taken: after enough hard stops jackd refuses with "Too many servers already
# active". When no JACK server runs on this machine at all, nothing uses the registry or the
# segments it lists: remove them, and jackd makes a new registry.
clear_stale_registry() {
    if grep -qsx -e jackd -e jackdmp /proc/[0-9]*/comm; then
        return 0
    fi
    rm -f /dev/shm/jack-shm-registry /dev/shm/jack-"$(id -u)"-* 2>/dev/null || true
}

start() {
    local name=$1 tone=${2:-} dir t0 i
    check_name "$name"
    need jackd jack_lsp
    dir=$(state_dir "$name")
    if live_pid "$dir/jackd.pid" >/dev/null || answers "$name"; then
        die "server $name is already running (stop it first, or restart)"
    fi
    rm -rf "$dir"
    mkdir -p "$dir"
    rm -f /dev/shm/jack_"$name"_* /dev/shm/jack_sem.*_"$name"_* 2>/dev/null || true
    clear_stale_registry
    t0=$(now_ms)
    JACK_DEFAULT_SERVER=$name spawn "$dir/jackd.pid" "$dir/jackd.log" \
        jackd --no-realtime -d dummy -r "$RATE" -p "$PERIOD" -C 2 -P 2
    for ((i = 0; i < START_WAIT_S * 50; i++)); do
        answers "$name" && break
        if ! live_pid "$dir/jackd.pid" >/dev/null; then
            # A server of this name killed a moment ago stays registered until its process is
            # reaped: then jackd says "already active". Try again until the wait is over.
            if grep -q "server already active" "$dir/jackd.log" 2>/dev/null; then
                sleep 0.2
                i=$((i + 10))
                JACK_DEFAULT_SERVER=$name spawn "$dir/jackd.pid" "$dir/jackd.log" \
                    jackd --no-realtime -d dummy -r "$RATE" -p "$PERIOD" -C 2 -P 2
                continue
            fi
            cat "$dir/jackd.log" >&2 || true
            stop "$name" >/dev/null
            die "jackd exited during start-up (log above)"
        fi
        sleep 0.02
    done
    if ! answers "$name"; then
        cat "$dir/jackd.log" >&2 || true
        stop "$name" >/dev/null
        die "server $name did not answer within ${START_WAIT_S} s"
    fi
    echo "jack-server: $name up in $(($(now_ms) - t0)) ms (pid $(cat "$dir/jackd.pid"), dummy driver, $RATE Hz, $PERIOD frames)"
    if [ -n "$tone" ]; then
        tone "$name" "$tone" || {
            stop "$name" >/dev/null
            die "tone client $tone did not come up"
        }
    fi
}

tone() {
    local name=$1 client=$2 dir t0 i
    check_name "$name"
    check_name "$client"
    need jack_simple_client jack_lsp
    dir=$(state_dir "$name")
    answers "$name" || die "server $name is not running"
    mkdir -p "$dir"
    stop_group "$dir/tone-$client.pid"
    t0=$(now_ms)
    JACK_DEFAULT_SERVER=$name spawn "$dir/tone-$client.pid" "$dir/tone-$client.log" \
        jack_simple_client "$client"
    for ((i = 0; i < START_WAIT_S * 50; i++)); do
        if JACK_DEFAULT_SERVER=$name jack_lsp 2>/dev/null | grep -qx "$client:output2"; then
            echo "jack-server: tone $client:output1 (240 Hz) and $client:output2 (720 Hz) on $name in $(($(now_ms) - t0)) ms"
            return 0
        fi
        live_pid "$dir/tone-$client.pid" >/dev/null || break
        sleep 0.02
    done
    cat "$dir/tone-$client.log" >&2 || true
    stop_group "$dir/tone-$client.pid"
    die "tone client $client did not register its ports on $name"
}

status() {
    local name=$1
    check_name "$name"
    need jack_lsp
    if answers "$name"; then
        JACK_DEFAULT_SERVER=$name jack_lsp -c
        return 0
    fi
    echo "jack-server: $name is not running" >&2
    return 1
}

selftest() {
    need jackd jack_lsp jack_simple_client jack_rec sox
    local name=brink-selftest-$$ out t0
    out=$(mktemp -d "${TMPDIR:-/tmp}/jack-selftest.XXXXXX")
    # shellcheck disable=SC2064 # expand now: the trap must stop this server, remove this dir
    trap "stop '$name' >/dev/null 2>&1 || true; rm -rf '$out'" EXIT
    start "$name" brink_tone
    JACK_DEFAULT_SERVER=$name timeout --kill-after=5 20 \
        jack_rec -f "$out/tone.wav" -d 1 brink_tone:output1 brink_tone:output2 >/dev/null 2>&1 ||
        die "jack_rec failed"
    local c want got
    for c in 1 2; do
        want=$((c == 1 ? 240 : 720))
        got=$(sox "$out/tone.wav" -n remix "$c" stat 2>&1 | awk '/Rough +frequency/ {print $3}')
        [ -n "$got" ] && [ "$got" -ge $((want - 3)) ] && [ "$got" -le $((want + 3)) ] ||
            die "recorded channel $c: rough frequency '$got' Hz, expected about $want Hz"
        echo "jack-server: recorded channel $c through JACK: about $got Hz"
    done
    t0=$(now_ms)
    stop "$name"
    echo "jack-server: stop took $(($(now_ms) - t0)) ms"
    answers "$name" && die "server still answers after stop"
    stop "$name" >/dev/null # idempotent
    t0=$(now_ms)
    start "$name" brink_tone
    echo "jack-server: restart with tone took $(($(now_ms) - t0)) ms"
    stop "$name"
    echo "jack-server: selftest passed"
}

cmd=${1:-}
shift || true
case "$cmd" in
    start) [ $# -ge 1 ] && [ $# -le 2 ] || usage; start "$@" ;;
    tone) [ $# -eq 2 ] || usage; tone "$@" ;;
    stop) [ $# -eq 1 ] || usage; stop "$1" ;;
    restart) [ $# -ge 1 ] && [ $# -le 2 ] || usage; stop "$1"; start "$@" ;;
    status) [ $# -eq 1 ] || usage; status "$1" ;;
    selftest) [ $# -eq 0 ] || usage; selftest ;;
    -h | --help | help) usage ;;
    *) usage ;;
esac
