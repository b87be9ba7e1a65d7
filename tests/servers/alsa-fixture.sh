#!/usr/bin/env bash
# A capture device with no sound card: an ALSA PCM that reads a raw file.
#
#   alsa-fixture.sh setup DIR RAWFILE [FORMAT [NAME]]
#       Write DIR/.asoundrc defining capture PCM NAME (default brink_fixture): the ALSA `file`
#       plugin reading RAWFILE (raw interleaved FORMAT samples, 2 channels, 48000 Hz; FORMAT is
#       FLOAT_LE (default) or S16_LE) on a `null` slave, wrapped in `plug`, with a hint so device
#       enumeration lists it. Use it by giving a program HOME=DIR (that program only).
#   alsa-fixture.sh verify DIR RAWFILE [FORMAT [NAME]]
#       Capture RAWFILE's length from NAME with arecord (alsa-utils) and check the samples are
#       the file's, byte for byte. Prints what it did; exit 0 when they match.
#   alsa-fixture.sh selftest
#       In a temporary directory: make a raw file (sox), set up, verify for FLOAT_LE and S16_LE,
#       check that the device is listed, and report what capture returns past the end of the file.
#       Cleans up after itself whatever happens.
#   alsa-fixture.sh cleanup DIR
#       Remove what setup wrote in DIR (DIR/.asoundrc). Fine to run twice.
#
# Things to know (details in README.md beside this script):
# - The null slave does not pace: capture returns as fast as it is read (hundreds of times real
#   time), so a program reading it will see the whole file in a fraction of a second.
# - The file is read in the format the plug's slave is pinned to (FORMAT). Ask for that same
#   format: a client asking for another format gets plug converting, and the file plugin then
#   skips frames of the file (it reads ahead for frames that the converter never takes).
# - At the end of the file capture goes on, with no error and not with silence: the last block
#   read is delivered again and again (stale buffer contents).
set -euo pipefail

RATE=48000
CHANNELS=2
WAIT_S=30   # bound on any one capture

usage() {
    sed -n '2,/^set -euo/p' "$0" | sed '$d' | sed 's/^# \{0,1\}//' >&2
    exit 2
}

die() {
    echo "alsa-fixture: $*" >&2
    exit 1
}

bytes_per_sample() {
    case "$1" in
        FLOAT_LE) echo 4 ;;
        S16_LE) echo 2 ;;
        *) die "format '$1' is not supported: use FLOAT_LE or S16_LE" ;;
    esac
}

# Quote a string for an ALSA configuration file.
alsa_quote() {
    local s=${1//\\/\\\\}
    printf '"%s"' "${s//\"/\\\"}"
}

setup() {
    local dir=$1 raw=$2 format=${3:-FLOAT_LE} name=${4:-brink_fixture}
    [ -d "$dir" ] || die "no directory $dir"
    [ -f "$raw" ] || die "no raw file $raw"
    bytes_per_sample "$format" >/dev/null
    [[ $name =~ ^[A-Za-z_][A-Za-z0-9_]*$ ]] || die "PCM name '$name' must be letters, digits and _"
    raw=$(cd "$(dirname "$raw")" && pwd)/$(basename "$raw")
    cat >"$dir/.asoundrc" <<CONF
# Written by tests/servers/alsa-fixture.sh: capture PCM "$name" plays a raw file.
pcm.$name {
    type plug
    slave {
        pcm {
            type file
            slave.pcm "null"
            file "/dev/null"
            infile $(alsa_quote "$raw")
            format "raw"
        }
        format $format
        channels $CHANNELS
        rate $RATE
    }
    hint {
        show on
        description "$name"
    }
}
CONF
    echo "alsa-fixture: $dir/.asoundrc defines capture PCM '$name' reading $raw ($format, $CHANNELS ch, $RATE Hz)"
}

# Run a command with the fixture's HOME (and nothing else of the caller's ALSA configuration).
in_fixture() {
    local dir=$1
    shift
    HOME=$dir XDG_CONFIG_HOME=$dir/.config timeout --kill-after=5 "$WAIT_S" "$@"
}

verify() {
    local dir=$1 raw=$2 format=${3:-FLOAT_LE} name=${4:-brink_fixture}
    command -v arecord >/dev/null || die "arecord not found: install alsa-utils"
    local bps size frames out
    bps=$(bytes_per_sample "$format")
    size=$(stat -c %s "$raw")
    frames=$((size / (bps * CHANNELS)))
    [ "$frames" -gt 0 ] || die "$raw holds no whole frame"
    out=$(mktemp "${TMPDIR:-/tmp}/alsa-fixture-out.XXXXXX")
    if ! in_fixture "$dir" arecord -q -D "$name" -f "$format" -c "$CHANNELS" -r "$RATE" \
        -s "$frames" -t raw "$out"; then
        rm -f "$out"
        die "arecord failed on '$name'"
    fi
    if cmp -s -n "$((frames * bps * CHANNELS))" "$raw" "$out"; then
        echo "alsa-fixture: verify $format: $frames frames captured from '$name' equal the file"
        rm -f "$out"
    else
        cmp -n "$((frames * bps * CHANNELS))" "$raw" "$out" >&2 || true
        rm -f "$out"
        die "verify $format: captured samples differ from the file"
    fi
}

selftest() {
    command -v sox >/dev/null || die "sox not found (selftest makes its raw files with it)"
    command -v arecord >/dev/null || die "arecord not found: install alsa-utils"
    local dir
    dir=$(mktemp -d "${TMPDIR:-/tmp}/alsa-fixture.XXXXXX")
    # shellcheck disable=SC2064 # expand now: the trap must remove this very directory
    trap "rm -rf '$dir'" EXIT
    local fmt enc bits
    for fmt in FLOAT_LE S16_LE; do
        case $fmt in
            FLOAT_LE) enc=floating-point bits=32 ;;
            S16_LE) enc=signed-integer bits=16 ;;
        esac
        # Noise, so that no stretch of the file looks like another.
        sox -q -n -r "$RATE" -c "$CHANNELS" -e "$enc" -b "$bits" -L -t raw "$dir/in.raw" \
            synth 0.5 whitenoise gain -6
        setup "$dir" "$dir/in.raw" "$fmt"
        verify "$dir" "$dir/in.raw" "$fmt"
    done
    # Listed by name (what device enumeration sees).
    if in_fixture "$dir" arecord -L | grep -qx "brink_fixture"; then
        echo "alsa-fixture: 'arecord -L' lists brink_fixture"
    else
        die "'arecord -L' does not list brink_fixture"
    fi
    # Past the end of the file (format S16_LE from the loop above).
    local bps=2 size frames extra=48000
    size=$(stat -c %s "$dir/in.raw")
    frames=$((size / (bps * CHANNELS)))
    in_fixture "$dir" arecord -q -D brink_fixture -f S16_LE -c "$CHANNELS" -r "$RATE" \
        -s "$((frames + extra))" -t raw "$dir/long.raw" || die "capture past the end failed"
    local got tail_bytes nonzero
    got=$(stat -c %s "$dir/long.raw")
    echo "alsa-fixture: past the end: asked $((frames + extra)) frames, got $((got / (bps * CHANNELS))), arecord exit 0"
    tail -c +"$((size + 1))" "$dir/long.raw" >"$dir/tail.raw"
    tail_bytes=$(stat -c %s "$dir/tail.raw")
    nonzero=$(tr -d '\000' <"$dir/tail.raw" | wc -c)
    echo "alsa-fixture: past the end: $nonzero of $tail_bytes bytes are not zero"
    local n
    for n in 240 480 960 1024 2048 6000 12000; do
        if [ $((n * bps * CHANNELS)) -le "$size" ] &&
            cmp -s -n "$((n * bps * CHANNELS))" "$dir/tail.raw" \
                <(tail -c "$((n * bps * CHANNELS))" "$dir/in.raw"); then
            echo "alsa-fixture: past the end: the last $n frames of the file come again"
            break
        fi
    done
    echo "alsa-fixture: selftest passed"
}

cleanup() {
    local dir=$1
    if [ -f "$dir/.asoundrc" ] && grep -q 'tests/servers/alsa-fixture.sh' "$dir/.asoundrc"; then
        rm -f "$dir/.asoundrc"
    fi
}

cmd=${1:-}
shift || true
case "$cmd" in
    setup) [ $# -ge 2 ] && [ $# -le 4 ] || usage; setup "$@" ;;
    verify) [ $# -ge 2 ] && [ $# -le 4 ] || usage; verify "$@" ;;
    selftest) [ $# -eq 0 ] || usage; selftest ;;
    cleanup) [ $# -eq 1 ] || usage; cleanup "$1" ;;
    -h | --help | help) usage ;;
    *) usage ;;
esac
