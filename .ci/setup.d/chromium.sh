# Sourced by .ci/run before the virtual environment is made: headless Chromium (Debian package
# `chromium`) for the test that opens a rendered report and screenshots it
# (tests/test_reports_chromium.py).  Exports nothing.
if ! command -v chromium >/dev/null 2>&1; then
    apt-get update -qq
    apt-get install -y -qq chromium >/dev/null
fi
