# Sourced by tools/test: the tests drive real peers from Debian's packages (chromium for the
# browser tests, mbpoll as an independent Modbus master, PostgreSQL for the plant database);
# install whichever is missing in one apt-get run.
declare -A _debian_command=(
    [chromium]=chromium
    [mbpoll]=mbpoll
    [postgresql]=/usr/lib/postgresql
)
_debian_missing=()
for _package in "${!_debian_command[@]}"; do
    _probe="${_debian_command[$_package]}"
    if [[ "$_probe" == /* ]]; then
        [ -e "$_probe" ] || _debian_missing+=("$_package")
    elif ! command -v "$_probe" >/dev/null 2>&1; then
        _debian_missing+=("$_package")
    fi
done
if [ "${#_debian_missing[@]}" -gt 0 ]; then
    if [ "$(id -u)" = 0 ] && command -v apt-get >/dev/null 2>&1; then
        echo "installing Debian's ${_debian_missing[*]} for the tests (first run only, about a minute)..." >&2
        mkdir -p "$root/.venv"
        if ! { apt-get update -qq &&
               DEBIAN_FRONTEND=noninteractive apt-get install -y -qq "${_debian_missing[@]}"; } \
               >"$root/.venv/apt.log" 2>&1; then
            tail -n 20 "$root/.venv/apt.log" >&2
            echo "error: installing ${_debian_missing[*]} failed; the whole output is in $root/.venv/apt.log" >&2
            exit 1
        fi
    else
        echo "warning: ${_debian_missing[*]} not found and not root: the tests that use them will fail;" \
             "install them with apt-get install ${_debian_missing[*]}" >&2
    fi
fi
