#!/usr/bin/env bash
# Runs every notebook in notebooks/ from top to bottom with the .NET C# kernel and fails on the first cell
# that fails. The executed copies go to a temporary folder (or to $NOTEBOOK_OUTPUT_DIR when set, to look at
# them afterwards); the committed notebooks are never rewritten, and they must carry no outputs.
#
# Needs the .NET SDK and Jupyter's nbconvert, nbclient and jupyter-client (on Debian:
# apt-get install jupyter-nbconvert python3-nbclient jupyter-client python3-ipykernel).
set -euo pipefail
cd "$(dirname "$0")/.."
export DOTNET_CLI_TELEMETRY_OPTOUT=1 DOTNET_NOLOGO=1 DOTNET_SKIP_FIRST_TIME_EXPERIENCE=1

# Debian's jupyter, unless told otherwise: a Python environment earlier on PATH may have no nbconvert
jupyter="${JUPYTER:-}"
if [ -z "$jupyter" ]; then
    if [ -x /usr/bin/jupyter ]; then jupyter=/usr/bin/jupyter; else jupyter="$(command -v jupyter || true)"; fi
fi
if [ -z "$jupyter" ] || ! "$jupyter" nbconvert --version >/dev/null 2>&1; then
    echo "run-notebooks: jupyter nbconvert is not installed (Debian: apt-get install jupyter-nbconvert python3-nbclient jupyter-client python3-ipykernel)" >&2
    exit 2
fi

shopt -s nullglob
notebooks=(notebooks/*.ipynb)
if [ ${#notebooks[@]} -eq 0 ]; then
    echo "run-notebooks: no notebooks in notebooks/" >&2
    exit 2
fi

# 1. committed notebooks carry no outputs, so that their diffs stay readable
python3 - "${notebooks[@]}" <<'PY'
import json, sys
bad = []
for path in sys.argv[1:]:
    with open(path, encoding="utf-8") as f:
        cells = json.load(f)["cells"]
    for i, cell in enumerate(cells, 1):
        if cell["cell_type"] != "code":
            continue
        if cell.get("outputs") or cell.get("execution_count") is not None:
            bad.append(f"{path}: cell {i} has outputs or an execution count")
        if "execution" in cell.get("metadata", {}):
            bad.append(f"{path}: cell {i} has execution timestamps in its metadata")
if bad:
    print("\n".join(bad), file=sys.stderr)
    print("strip them (see notebooks/README.md) before committing", file=sys.stderr)
    sys.exit(1)
PY
echo "notebooks: ${#notebooks[@]} committed without outputs"

# 2. the library the notebooks load (they reference src/OrderUnfold.Cli/bin/Release/net10.0/)
dotnet build -c Release src/OrderUnfold.Cli -nologo -v q

# 3. the C# kernel: the pinned dotnet-interactive from .config/dotnet-tools.json, registered with Jupyter
dotnet tool restore
dotnet tool run dotnet-interactive -- jupyter install

# 4. execute each notebook into the output folder; nbconvert stops with an error at the first failing cell
if [ -n "${NOTEBOOK_OUTPUT_DIR:-}" ]; then
    out="$NOTEBOOK_OUTPUT_DIR"
    mkdir -p "$out"
else
    out="$(mktemp -d)"
    trap 'rm -rf "$out"' EXIT
fi
for nb in "${notebooks[@]}"; do
    start=$SECONDS
    echo "notebooks: running $nb"
    # (the variable quiets the kernel's web-host start-up messages)
    Logging__LogLevel__Default=Warning "$jupyter" nbconvert --to notebook --execute "$nb" --output-dir "$out" \
        --ExecutePreprocessor.kernel_name=.net-csharp --ExecutePreprocessor.timeout=600 \
        --log-level=WARN
    echo "notebooks: $nb ran in $((SECONDS - start)) s"
done
echo "notebooks: all ${#notebooks[@]} ran without errors"
