#!/usr/bin/env bash
# Peak memory (maximum resident set, GNU time's `-v`) of `kinglet vet` and `kinglet pack` on
# 1,000,000 generated rows of 64 features (the digits example's width: values 0..16, as its
# pixels), as .npy and as CSV (with a label column). Not a test: a measurement for
# BENCHMARKS.md ("Host speed and memory").
# Needs /usr/bin/time (Debian package `time`) and the reference venv for numpy.
set -euo pipefail
cd "$(dirname "$0")/.."
rows="${1:-1000000}"
python="$(bash tests/python/setup_venv.sh | tail -n 1)"
# KINGLET_BIN=path measures another build (the "before" column) instead of this checkout's.
k="${KINGLET_BIN:-target/release/kinglet}"
[ -n "${KINGLET_BIN:-}" ] || cargo build -q --release -p kinglet-converter --bin kinglet
dir="$(mktemp -d)"
trap 'rm -rf "$dir"' EXIT
"$python" - "$dir" "$rows" <<'PY'
import sys
import numpy as np
d, n = sys.argv[1], int(sys.argv[2])
rng = np.random.default_rng(20261202)
np.save(f"{d}/rows.npy", rng.integers(0, 17, size=(n, 64)).astype(np.float32))
np.save(f"{d}/labels.npy", rng.integers(0, 10, size=n).astype(np.int64))
x, y = np.load(f"{d}/rows.npy").astype(np.int64), np.load(f"{d}/labels.npy")
head = ",".join([f"f{i}" for i in range(64)] + ["label"])
np.savetxt(f"{d}/rows.csv", np.column_stack([x, y]), fmt="%d", delimiter=",", header=head, comments="")
PY
for f in rows.npy rows.csv; do
  ls -l "$dir/$f" | awk '{printf "%s: %d rows, %.0f MB\n", "'"$f"'", '"$rows"', $5 / 1e6}'
done
"$k" pack examples/digits/model.onnx --calibration examples/digits/calibration.csv -o "$dir/m.kgl" >/dev/null
peak() { # label, command...
  local label="$1"; shift
  /usr/bin/time -v "$@" >/dev/null 2>"$dir/time.txt" || { cat "$dir/time.txt"; exit 1; }
  local kb s
  kb=$(sed -n 's/^\s*Maximum resident set size (kbytes): //p' "$dir/time.txt")
  s=$(sed -n 's/^\s*Elapsed (wall clock) time (h:mm:ss or m:ss): //p' "$dir/time.txt")
  printf '%-44s %8.0f MB  %s\n' "$label" "$(echo "$kb / 1024" | bc -l)" "$s"
}
peak "vet (batched, default)" "$k" vet examples/digits/model.onnx "$dir/m.kgl" \
  --data "$dir/rows.npy" --label-file "$dir/labels.npy" --json
peak "vet --per-row" "$k" vet examples/digits/model.onnx "$dir/m.kgl" \
  --data "$dir/rows.npy" --label-file "$dir/labels.npy" --json --per-row
peak "pack --calibration (1M rows)" "$k" pack examples/digits/model.onnx \
  --calibration "$dir/rows.npy" -o "$dir/big.kgl"
peak "vet, CSV rows with a label column" "$k" vet examples/digits/model.onnx "$dir/m.kgl" \
  --data "$dir/rows.csv" --label label --json
peak "pack --calibration, CSV rows" "$k" pack examples/digits/model.onnx \
  --calibration "$dir/rows.csv" --calibration-label label -o "$dir/big.kgl"
