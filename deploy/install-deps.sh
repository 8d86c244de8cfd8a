#!/bin/sh
# Install the Debian packages fitfarm needs to build and test. Idempotent:
# packages already present are left alone, and apt is only asked when
# something is missing. Run as root (or through sudo).
set -eu

PACKAGES="build-essential cmake pkg-config libzmq3-dev libmsgpack-dev libsodium-dev
libcmocka-dev libsqlite3-dev sqlite3 libjansson-dev libcairo2-dev libfontconfig-dev python3 python3-numpy python3-scipy python3-pytest
clang libclang-rt-14-dev valgrind
libmicrohttpd-dev python3-prometheus-client chromium
slurmctld slurmd slurm-client munge
systemd groff-base dpkg-dev"

missing=""
for p in $PACKAGES; do
  if ! dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "install ok installed"; then
    missing="$missing $p"
  fi
done

if [ -z "$missing" ]; then
  echo "install-deps: everything is already installed"
  exit 0
fi

SUDO=""
if [ "$(id -u)" -ne 0 ]; then
  SUDO="sudo"
fi
echo "install-deps: installing$missing"
$SUDO apt-get update -q
DEBIAN_FRONTEND=noninteractive $SUDO apt-get install -y -q --no-install-recommends $missing
