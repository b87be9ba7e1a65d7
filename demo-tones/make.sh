#!/usr/bin/env bash
# Rebuild the bundled demo WAVs from recipes.txt with `brink gen`.
#
# Every line of recipes.txt names a file, its `brink gen` options (with a fixed --seed) and one
# recipe per channel, so running this twice gives byte-identical files. The integration test
# tests/integration/demo.rs reads the same recipes.txt and checks the committed files against it.
#
# Usage: demo-tones/make.sh   (from anywhere; honours CARGO_TARGET_DIR)
set -euo pipefail

here="$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)"
root="$(dirname "$here")"

# Cargo builds into CARGO_TARGET_DIR when set, else into target/ at the repository root. A
# relative CARGO_TARGET_DIR is taken from the caller's directory, so pin it before moving.
if [ -n "${CARGO_TARGET_DIR:-}" ]; then
    case "$CARGO_TARGET_DIR" in
    /*) ;;
    *) CARGO_TARGET_DIR="$PWD/$CARGO_TARGET_DIR" ;;
    esac
    export CARGO_TARGET_DIR
fi
target="${CARGO_TARGET_DIR:-$root/target}"

cd "$root"
cargo build --release

brink="$target/release/brink"
if [ ! -x "$brink" ]; then
    echo "make.sh: no brink binary at $brink after the build" >&2
    exit 1
fi

while read -r -a words; do
    # Skip blank lines and comments.
    if [ "${#words[@]}" -eq 0 ] || [[ "${words[0]}" == \#* ]]; then
        continue
    fi
    echo "== ${words[0]}"
    "$brink" gen "$here/${words[0]}" "${words[@]:1}"
done <"$here/recipes.txt"

ls -l "$here"/*.wav
