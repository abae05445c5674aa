# deploy/lib/setup.sh -- shared set-up of deploy/run and deploy/test.
#
# Sourced, not run. Installs the Debian packages feasgate needs when they
# are missing (with apt-get when running as root; otherwise says which to
# install and stops), then configures and builds into build/.
#
#   fg_setup_packages runtime|test   install what is missing
#   fg_build [extra cmake args...]   configure + build build/ (Release)
#   fg_build_in DIR [cmake args...] [-- targets...]
#                                    configure + build another folder
#                                    (the sanitizer and fuzzing builds)

FG_ROOT="$(cd "$(dirname "${BASH_SOURCE[0]}")/../.." && pwd)"

FG_PKGS_BUILD="gcc make cmake pkg-config libmicrohttpd-dev libcjson-dev \
libsqlite3-dev libgsl-dev librandom123-dev libcurl4-openssl-dev \
libgnutls28-dev libpq-dev"
FG_PKGS_RUN="curl sqlite3"
FG_PKGS_TEST="python3 python3-scipy python3-numpy python3-statsmodels \
r-cran-mvtnorm libopenblas0-pthread \
python3-jsonschema python3-mpmath openssl clang libclang-rt-14-dev postgresql \
nginx chromium python3-websocket coinor-cbc glpk-utils"

fg_missing_packages() {
  local missing=() p
  for p in "$@"; do
    if ! dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "install ok installed"; then
      missing+=("$p")
    fi
  done
  echo "${missing[@]:-}"
}

fg_setup_packages() {
  local want="$FG_PKGS_BUILD $FG_PKGS_RUN"
  if [ "${1:-runtime}" = test ]; then want="$want $FG_PKGS_TEST"; fi
  # shellcheck disable=SC2086
  local missing
  missing="$(fg_missing_packages $want)"
  if [ -z "${missing// /}" ]; then return 0; fi
  if [ "$(id -u)" -ne 0 ]; then
    echo "feasgate: these Debian packages are missing: $missing" >&2
    echo "feasgate: install them as root (apt-get install $missing) and run again" >&2
    exit 1
  fi
  echo "feasgate: installing $missing" >&2
  export DEBIAN_FRONTEND=noninteractive
  apt-get update -qq >&2
  # shellcheck disable=SC2086
  apt-get install -y -qq --no-install-recommends $missing >&2
}

fg_build() {
  local dir="$FG_ROOT/build"
  cmake -S "$FG_ROOT" -B "$dir" -DCMAKE_BUILD_TYPE=Release "$@" >&2
  cmake --build "$dir" -j "$(nproc)" >&2
}

fg_build_in() {
  local dir="$FG_ROOT/$1"
  shift
  local args=() targets=()
  while [ $# -gt 0 ] && [ "$1" != "--" ]; do args+=("$1"); shift; done
  if [ "${1:-}" = "--" ]; then shift; targets=("$@"); fi
  cmake -S "$FG_ROOT" -B "$dir" "${args[@]}" >&2
  if [ ${#targets[@]} -gt 0 ]; then
    cmake --build "$dir" -j "$(nproc)" --target "${targets[@]}" >&2
  else
    cmake --build "$dir" -j "$(nproc)" >&2
  fi
}
