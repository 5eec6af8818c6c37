# Sourced by the tools/ scripts: makes .venv with the project installed (editable) plus EXTRAS.
set -euo pipefail
root="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
venv="$root/.venv"
extras="${EXTRAS:-}"
stamp="$venv/.installed${extras:+-$extras}"
if [ ! -x "$venv/bin/python" ]; then
    python3 -m venv "$venv"
fi
if [ ! -f "$stamp" ] || [ "$root/pyproject.toml" -nt "$stamp" ]; then
    "$venv/bin/python" -m pip install --quiet --disable-pip-version-check --upgrade pip
    "$venv/bin/python" -m pip install --quiet --disable-pip-version-check -e "$root${extras:+[$extras]}"
    touch "$stamp"
fi
export PATH="$venv/bin:$PATH"
cd "$root"
