#!/usr/bin/env bash
# Installs every build, test and helper dependency of flyby from Debian packages.
# Used by the README's commands and by .ci/run. Needs root (or sudo) and the Debian archive.
set -euo pipefail

packages=(
  # toolchain
  g++ cmake ninja-build pkg-config
  # numerical core and config (design card)
  libeigen3-dev libpcg-cpp-dev libtomlplusplus-dev
  # ODE integration (Boost.Odeint, header-only) and nonlinear least squares + special functions (GSL)
  libboost-dev libgsl-dev
  # command line and JSON output
  libcli11-dev nlohmann-json3-dev
  # records
  libhdf5-dev
  # parallel
  libopenmpi-dev openmpi-bin
  # tests and benchmarks
  catch2 libbenchmark-dev
  # fuzzing and sanitizers with clang
  clang libclang-rt-14-dev
  # reference checks and plotting helpers (Debian's /usr/bin/python3, never the engine)
  python3 python3-numpy python3-scipy python3-sympy python3-h5py python3-matplotlib
)

missing=()
for p in "${packages[@]}"; do
  dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "install ok installed" || missing+=("$p")
done

if [ ${#missing[@]} -eq 0 ]; then
  echo "setup-deps: all ${#packages[@]} packages present"
  exit 0
fi

SUDO=""
if [ "$(id -u)" -ne 0 ]; then SUDO="sudo"; fi
echo "setup-deps: installing ${missing[*]}"
$SUDO apt-get update -qq
DEBIAN_FRONTEND=noninteractive $SUDO apt-get install -y -qq --no-install-recommends "${missing[@]}" >/dev/null
echo "setup-deps: done"
