#!/usr/bin/env bash
# Writes the invented example stacks into demo-data/generated/ (see README.md).
set -euo pipefail
here="$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)"
cd "$here/.."
cargo run --quiet --release -p orbitspan-cli -- demo --out demo-data/generated
