#!/usr/bin/env bash
# Rebuild the extension in place for an editable install (pip install -e .),
# replacing the module file atomically so running tests never see half a file.
set -euo pipefail
cd "$(dirname "$0")"
cargo build --release -p vicino-py --features pyo3/extension-module --quiet
cp target/release/lib_core.so python/vicino/_core.abi3.so.new
mv -f python/vicino/_core.abi3.so.new python/vicino/_core.abi3.so
