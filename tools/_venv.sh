# Sourced by the tools/ scripts: makes .venv with the project installed (editable) plus EXTRAS.
# pip's own chatter goes to .venv/pip.log and is shown only when the install fails.
set -euo pipefail
root="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
venv="$root/.venv"
extras="${EXTRAS:-}"
stamp="$venv/.installed${extras:+-$extras}"
if [ ! -x "$venv/bin/python" ]; then
    python3 -m venv "$venv"
fi
if [ ! -f "$stamp" ] || [ "$root/pyproject.toml" -nt "$stamp" ]; then
    echo "setting up $venv${extras:+ with extras [$extras]} (first run only, about a minute)..." >&2
    log="$venv/pip.log"
    if ! { "$venv/bin/python" -m pip install --disable-pip-version-check --upgrade pip &&
           "$venv/bin/python" -m pip install --disable-pip-version-check \
               -e "$root${extras:+[$extras]}"; } >"$log" 2>&1; then
        tail -n 30 "$log" >&2
        echo "error: installing into $venv failed; the whole pip output is in $log" >&2
        exit 1
    fi
    touch "$stamp"
fi
export PATH="$venv/bin:$PATH"
cd "$root"
