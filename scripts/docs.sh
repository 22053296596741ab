#!/usr/bin/env bash
# Builds the API reference with Doxygen (docs/Doxyfile) into build-docs/html and fails on any
# warning (an undocumented public member, a broken reference, a malformed command).
# Usage: ./scripts/docs.sh   (from any directory); open build-docs/html/index.html.
set -euo pipefail
cd "$(dirname "${BASH_SOURCE[0]}")/.."
# shellcheck source=scripts/common.sh
source scripts/common.sh
rowfold_need_packages doxygen
rm -rf build-docs
mkdir -p build-docs
echo "== doxygen $(doxygen --version)"
rc=0
doxygen docs/Doxyfile || rc=$?
log=build-docs/warnings.log
if [ "$rc" -ne 0 ] || [ -s "$log" ]; then
  echo "docs: doxygen failed (exit ${rc}) or warned; $(grep -c . "$log" 2>/dev/null || echo 0) warning line(s):" >&2
  cat "$log" >&2 2>/dev/null || true
  exit 1
fi
echo "docs: build-docs/html/index.html, 0 warnings"
