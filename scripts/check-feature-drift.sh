#!/usr/bin/env bash
# Lists dependencies that `cargo test --release` builds with other features than
# `cargo build --release` (each one makes the two commands build polars separately).
# Empty output = one shared build. Fix a line by pinning that crate's features in Cargo.toml.
set -euo pipefail
cd "$(dirname "$0")/.."
export CARGO_TARGET_DIR="${CARGO_TARGET_DIR:-$HOME/.cache/kiln-target}"
list() {
    cargo "$@" --release --message-format=json 2>/dev/null | python3 -c '
import sys, json
for line in sys.stdin:
    m = json.loads(line)
    if m.get("reason") == "compiler-artifact" and not m["package_id"].startswith("path+"):
        print(m["package_id"].split("#")[-1], m["target"]["name"], sorted(m["features"]))' | sort
}
diff <(list build) <(list test --no-run) | grep '^<' || true
