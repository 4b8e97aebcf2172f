# Shared by scripts/demo and scripts/test: make .venv if absent and install the
# package editable with the given extras, skipping the install when pyproject.toml
# and the extras have not changed since the last one.
set -euo pipefail
root="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
venv="$root/.venv"
extras="${1:-}"
if [ ! -x "$venv/bin/python" ]; then
  python3 -m venv "$venv"
fi
stamp="$venv/.curvefit-install-$(echo "$extras" | tr ',' '-')"
want="$( (cat "$root/pyproject.toml"; echo "$extras") | sha256sum | cut -d' ' -f1)"
if [ ! -f "$stamp" ] || [ "$(cat "$stamp")" != "$want" ]; then
  "$venv/bin/python" -m pip install --quiet --upgrade pip
  spec="$root"
  [ -n "$extras" ] && spec="$root[$extras]"
  "$venv/bin/python" -m pip install --quiet -e "$spec"
  echo "$want" > "$stamp"
fi
