# shellcheck shell=bash
# Shared helpers for scripts/demo.sh and scripts/test.sh (sourced, not run).

# rowfold_need_packages PKG...: installs the Debian packages that `dpkg -s` does not report as
# installed (as root directly, else through passwordless sudo); otherwise lists them and exits 1.
# With ROWFOLD_LIST_PACKAGES=1 it prints PKG... one per line and ends the script (exit 0), so
# that .ci/run can collect every stage's packages and install them ahead of the stage.
rowfold_need_packages() {
  if [ "${ROWFOLD_LIST_PACKAGES:-0}" = 1 ]; then
    printf '%s\n' "$@"
    exit 0
  fi
  local missing=()
  local pkg
  for pkg in "$@"; do
    if ! dpkg -s "$pkg" >/dev/null 2>&1; then
      missing+=("$pkg")
    fi
  done
  if [ "${#missing[@]}" -eq 0 ]; then
    return 0
  fi
  echo "rowfold: missing system packages: ${missing[*]}"
  if [ "$(id -u)" -eq 0 ]; then
    export DEBIAN_FRONTEND=noninteractive
    apt-get update
    apt-get install -y --no-install-recommends "${missing[@]}"
  elif command -v sudo >/dev/null 2>&1 && sudo -n true >/dev/null 2>&1; then
    sudo -n env DEBIAN_FRONTEND=noninteractive apt-get update
    sudo -n env DEBIAN_FRONTEND=noninteractive apt-get install -y --no-install-recommends "${missing[@]}"
  else
    echo "rowfold: cannot install them (not root, no passwordless sudo). Please run:" >&2
    echo "  sudo apt-get update && sudo apt-get install -y --no-install-recommends ${missing[*]}" >&2
    exit 1
  fi
}

# rowfold_build_tool: "make" or "ninja-build", whichever is installed (make preferred), else
# "make" so that it gets installed.
rowfold_build_tool() {
  if dpkg -s make >/dev/null 2>&1; then
    echo make
  elif dpkg -s ninja-build >/dev/null 2>&1; then
    echo ninja-build
  else
    echo make
  fi
}

# rowfold_configure: configures build/ (Release, tests on) unless it is configured already.
rowfold_configure() {
  local generator=()
  if [ ! -f build/CMakeCache.txt ] && [ "$(rowfold_build_tool)" = ninja-build ]; then
    generator=(-G Ninja)
  fi
  cmake -S . -B build "${generator[@]}" -DCMAKE_BUILD_TYPE=Release -DROWFOLD_BUILD_TESTS=ON
}
