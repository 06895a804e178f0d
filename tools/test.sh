#!/usr/bin/env bash
# Runs the default test suite on a fresh clone: installs the outside references the tests compare with when they are
# missing, then `dotnet test Engine.sln -c Release`. README's second command and CI's .ci/run both call this script.
#
#   tools/test.sh [dotnet test arguments...]     e.g. tools/test.sh --filter PackageTests
#
# What the tests need, and why:
# - Debian packages: python3 with python3-numpy, python3-sklearn, python3-scipy and python3-sentencepiece (reference
#   implementations the numeric and tokenizer tests compare with), coreutils' sha256sum, wordnet-base and the fortune
#   files (fortunes, fortunes-min) for the dataset builders' counts, fonts-dejavu-core for the plots, afl++ for
#   CI's short fuzz run, slurmctld, slurmd, slurm-client and munge for the single-node Slurm of SlurmArrayTests,
#   chromium-headless-shell for the study page, and qemu-user-static with the arm64 C, C++ and TLS libraries (dpkg's
#   arm64 architecture is added for them) to run the Arm64 build of the kernel checker in ArmKernelTests.
# - The npm package pinned in tests/Assay.Tests/Reference/package-lock.json: an independent implementation of JSON
#   tokenizer definitions.
# Missing Debian packages are installed with apt-get (after one `apt-get update`), as root or through sudo; the
# script stops with the list when it can do neither. A test whose reference is missing fails; none is skipped.
set -euo pipefail
root=$(cd "$(dirname "$0")/.." && pwd)
export DEBIAN_FRONTEND=noninteractive DOTNET_CLI_TELEMETRY_OPTOUT=1 DOTNET_NOLOGO=1

packages=(python3 python3-numpy python3-sklearn python3-scipy python3-sentencepiece coreutils wordnet-base fortunes
  fortunes-min fonts-dejavu-core afl++ slurmctld slurmd slurm-client munge chromium-headless-shell
  qemu-user-static libc6:arm64 libstdc++6:arm64 libssl3:arm64)
missing=()
for p in "${packages[@]}"; do
  dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "install ok installed" || missing+=("$p")
done
command -v npm >/dev/null || missing+=(nodejs npm)

if [ ${#missing[@]} -gt 0 ]; then
  if [ "$(id -u)" -eq 0 ]; then as_root=()
  elif command -v sudo >/dev/null; then as_root=(sudo -E)
  else
    echo "tools/test.sh: the tests need these Debian packages: ${missing[*]}" >&2
    echo "tools/test.sh: run this script as root, or install them first: apt-get update && apt-get install ${missing[*]}" >&2
    exit 2
  fi
  echo "tools/test.sh: installing ${missing[*]}" >&2
  if printf '%s\n' "${missing[@]}" | grep -q ':arm64$' && ! dpkg --print-foreign-architectures | grep -qx arm64; then
    "${as_root[@]}" dpkg --add-architecture arm64
  fi
  "${as_root[@]}" apt-get update
  "${as_root[@]}" apt-get install -y --no-install-recommends "${missing[@]}"
fi

reference="$root/tests/Assay.Tests/Reference"
if ! npm ls --prefix "$reference" >/dev/null 2>&1; then
  npm ci --prefix "$reference" --no-audit --no-fund
fi

cd "$root"
exec dotnet test Engine.sln -c Release "$@"
