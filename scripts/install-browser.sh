#!/bin/sh
# Installs what the browser tests need (headless Chromium and a font with wide Unicode
# coverage) when no Chromium is on the PATH yet. The README's test command and .ci/run call
# it; on a machine that already has a Chromium it does nothing.
#
# Debian and Ubuntu: Debian's packages `chromium` and `fonts-dejavu-core`, through apt-get
# (as root, or through sudo without a password). Elsewhere it says what to install and exits
# 1, because the browser tests fail, not skip, without a browser (printing is part of the job).
set -eu

for name in chromium chromium-browser google-chrome chrome; do
    if command -v "$name" >/dev/null 2>&1; then
        exit 0
    fi
done

if command -v apt-get >/dev/null 2>&1; then
    if [ "$(id -u)" -eq 0 ]; then
        run=""
    elif command -v sudo >/dev/null 2>&1 && sudo -n true 2>/dev/null; then
        run="sudo -n"
    else
        echo "install-browser: Chromium is missing; as root run:" >&2
        echo "  apt-get install chromium fonts-dejavu-core" >&2
        exit 1
    fi
    echo "install-browser: installing chromium and fonts-dejavu-core with apt-get" >&2
    export DEBIAN_FRONTEND=noninteractive
    $run apt-get update -qq
    $run apt-get install -y -qq chromium fonts-dejavu-core >/dev/null
    exit 0
fi

echo "install-browser: Chromium is missing; install it with your system's package manager" >&2
echo "  (the planner looks for chromium, chromium-browser, google-chrome or chrome)" >&2
exit 1
