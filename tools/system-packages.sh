#!/bin/sh
# The system packages the tests need beyond Python: redis-server (the service tests start their
# own) and chromium (the pages' browser tests). Installs what is missing on Debian as root;
# otherwise names exactly what to install and stops.
set -eu
missing=""
command -v redis-server >/dev/null 2>&1 || missing="$missing redis-server"
command -v chromium >/dev/null 2>&1 || missing="$missing chromium"
[ -z "$missing" ] && exit 0
if [ "$(id -u)" = 0 ] && command -v apt-get >/dev/null 2>&1; then
  echo "installing:$missing"
  apt-get update -q
  DEBIAN_FRONTEND=noninteractive apt-get install -y -q --no-install-recommends $missing
  exit 0
fi
echo "the tests need these system packages, missing here:$missing" >&2
echo "on Debian or Ubuntu, as root: apt-get install --no-install-recommends$missing" >&2
exit 1
