# Shared by scripts/demo and scripts/test: create or reuse .venv and install lcao into it.
# Sourced, not run. Needs only Python 3.11+ on the PATH (python3.11, python3.12, ... or python3).
set -euo pipefail
root="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
venv="$root/.venv"
pick_python() {
  for cand in "${PYTHON:-}" python3.13 python3.12 python3.11 python3; do
    [ -n "$cand" ] || continue
    if command -v "$cand" >/dev/null 2>&1 && "$cand" -c 'import sys; sys.exit(0 if sys.version_info >= (3, 11) else 1)' 2>/dev/null; then
      echo "$cand"; return 0
    fi
  done
  echo "lcao needs Python 3.11 or newer on the PATH (set PYTHON=/path/to/python3.11)" >&2
  return 1
}
if [ ! -x "$venv/bin/python" ]; then
  py="$(pick_python)"
  echo "creating $venv with $py" >&2
  "$py" -m venv "$venv"
fi
extras="${LCAO_EXTRAS:-test}"
stamp="$venv/.lcao-installed-${extras//,/-}"
if [ ! -f "$stamp" ] || [ "$root/pyproject.toml" -nt "$stamp" ]; then
  echo "installing lcao and its dependencies into $venv" >&2
  "$venv/bin/python" -m pip install --quiet --disable-pip-version-check --upgrade pip >&2 || true
  "$venv/bin/python" -m pip install --quiet --disable-pip-version-check -e "$root[$extras]" >&2
  touch "$stamp"
fi
export PATH="$venv/bin:$PATH"
export MPLBACKEND=Agg
export OMP_NUM_THREADS="${OMP_NUM_THREADS:-1}"
