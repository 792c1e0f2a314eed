#!/usr/bin/env bash
# Installs every Debian package that building pare, its tests and its reference checks need.
# Idempotent: when everything is present it only asks dpkg and returns.
set -euo pipefail

packages=(
  # build (ccache: CMakeLists.txt compiles through it when it is present)
  cmake make g++ ccache
  libeigen3-dev libboost-dev libboost-program-options-dev
  catch2 libfast-float-dev nlohmann-json3-dev zlib1g-dev libssl-dev
  # sanitizers and fuzzing (libFuzzer comes with clang; libomp-dev is clang's OpenMP runtime)
  clang-14 libclang-rt-14-dev libomp-dev
  # reference checks and benchmarks (general-purpose libraries, Debian's builds)
  python3 python3-numpy python3-scipy python3-sklearn python3-pandas libopenblas0
  # report.html checks: a strict HTML parser, headless rendering, reading the picture, a font
  python3-html5lib chromium python3-pil fonts-dejavu-core
  time
)

missing=()
for p in "${packages[@]}"; do
  if ! dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "install ok installed"; then
    missing+=("$p")
  fi
done
if [ ${#missing[@]} -eq 0 ]; then
  exit 0
fi

echo "install-deps: installing ${missing[*]}"
sudo=""
if [ "$(id -u)" -ne 0 ]; then sudo="sudo"; fi
export DEBIAN_FRONTEND=noninteractive
$sudo apt-get update -qq
$sudo apt-get install -y -qq --no-install-recommends "${missing[@]}"
