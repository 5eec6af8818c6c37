# Sourced by tools/test: the browser tests drive Debian's chromium; install it when missing.
if ! command -v chromium >/dev/null 2>&1; then
    if [ "$(id -u)" = 0 ] && command -v apt-get >/dev/null 2>&1; then
        echo "installing Debian's chromium for the browser tests (first run only, about a minute)..." >&2
        mkdir -p "$root/.venv"
        if ! { apt-get update -qq &&
               DEBIAN_FRONTEND=noninteractive apt-get install -y -qq chromium; } \
               >"$root/.venv/apt.log" 2>&1; then
            tail -n 20 "$root/.venv/apt.log" >&2
            echo "error: installing chromium failed; the whole output is in $root/.venv/apt.log" >&2
            exit 1
        fi
    else
        echo "warning: chromium not found and not root: the browser tests will fail;" \
             "install Debian's chromium (apt-get install chromium)" >&2
    fi
fi
