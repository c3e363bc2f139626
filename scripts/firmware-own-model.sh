#!/usr/bin/env bash
# Follows "Your own model, step by step" (firmware-example/README.md) with a model the example
# does not ship, on the QEMU machines: a plain JSON model (docs/plain-model-format.md) and rows
# generated here; pack, vet on the shipped path, budget, vectors with their inputs, build the
# `vectors` firmware with the model, run it, and require every line bit-exact. Then a changed
# expected line must fail the run. Exits non-zero when any step breaks.
#
#   bash scripts/firmware-own-model.sh [TARGET...]   (default: both QEMU targets)
#
# KINGLET=<kinglet binary> skips building it; FW_TARGET_DIR as in scripts/firmware.sh.
# scripts/firmware.sh runs it.
set -euo pipefail
root="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
fw="$root/firmware-example"
fw_target="${FW_TARGET_DIR:-$fw/target}"
targets=("$@")
(( ${#targets[@]} )) || targets=(thumbv7em-none-eabihf thumbv6m-none-eabi)
if [[ -z "${KINGLET:-}" ]]; then
  (cd "$root" && cargo build -q --release -p kinglet-converter --bin kinglet)
  KINGLET="${CARGO_TARGET_DIR:-$root/target}/release/kinglet"
fi
work="$(mktemp -d)"
trap 'rm -rf "$work"' EXIT
failures=0
fail() { echo "FAIL: own model: $*"; failures=$((failures + 1)); }

# The trained model: 4 features, ReLU hidden layer of 6, 3 classes: "which of the first three
# features is largest", written by hand as a plain model (a user's would come from training).
cat >"$work/sorter.json" <<'JSON'
{
  "kinglet_model": 1,
  "input_width": 4,
  "scaler": { "mean": [0.0, 0.0, 0.0, 0.0], "std": [5.0, 5.0, 5.0, 5.0] },
  "layers": [
    {
      "inputs": 4, "outputs": 6, "activation": "relu",
      "weights": [
        [ 1.0,  0.0,  0.0,  0.05],
        [-1.0,  0.0,  0.0, -0.05],
        [ 0.0,  1.0,  0.0,  0.03],
        [ 0.0, -1.0,  0.0, -0.03],
        [ 0.0,  0.0,  1.0,  0.02],
        [ 0.0,  0.0, -1.0, -0.02]
      ],
      "bias": [0.0, 0.0, 0.0, 0.0, 0.0, 0.0]
    },
    {
      "inputs": 6, "outputs": 3, "activation": "linear",
      "weights": [
        [2.0, -2.0, 0.0,  0.0, 0.0,  0.0],
        [0.0,  0.0, 2.0, -2.0, 0.0,  0.0],
        [0.0,  0.0, 0.0,  0.0, 2.0, -2.0]
      ],
      "bias": [0.0, 0.1, -0.1]
    }
  ],
  "output": "softmax",
  "labels": ["first", "second", "third"]
}
JSON
# Rows: 48 × 4 features from a fixed linear congruential sequence, labelled by the rule.
awk 'BEGIN {
  s = 12345; print "f0,f1,f2,f3,label"
  for (r = 0; r < 48; r++) {
    best = 0
    for (k = 0; k < 4; k++) {
      s = (1103515245 * s + 12345) % 2147483648
      v[k] = sprintf("%.3f", (s / 2147483648) * 20 - 10)
      if (k < 3 && v[k] + 0 > v[best] + 0) best = k
    }
    printf "%s,%s,%s,%s,%d\n", v[0], v[1], v[2], v[3], best
  }
}' >"$work/rows.csv"
rows=48

echo "own model: 1. pack"
"$KINGLET" pack "$work/sorter.json" --calibration "$work/rows.csv" --calibration-label label \
  -o "$work/sorter.kgl" >"$work/pack.txt" || { cat "$work/pack.txt"; fail "pack"; exit 1; }
grep -E 'flash|RAM' "$work/pack.txt"

echo "own model: 2. vet on the shipped path (f32 features, Model::infer)"
"$KINGLET" vet "$work/sorter.json" "$work/sorter.kgl" --data "$work/rows.csv" --label label \
  --feed f32 --entry infer --min-agreement 95 >"$work/vet.txt" \
  || { cat "$work/vet.txt"; fail "vet"; }
grep -E '^(PASS|FAIL|verdict)' "$work/vet.txt"

echo "own model: 3. expected vectors, with their inputs"
"$KINGLET" score "$work/sorter.kgl" --data "$work/rows.csv" --label label --feed f32 \
  --entry infer --format vectors --name sorter --with-inputs -o "$work/sorter.txt"
[[ $(wc -l <"$work/sorter.txt") -eq $rows ]] || fail "score wrote $(wc -l <"$work/sorter.txt") lines, not $rows"

echo "own model: 4. the budget, in the bytes the firmware build counts"
# `kinglet budget` reports the model's own flash and RAM (model_flash, model_ram); the build's
# model budget counts the same bytes for every blob it embeds: the shipped three and this one.
# So the exact sum is the tightest budget that builds, and one byte less must fail the build.
model_bytes() { # model_bytes <blob> <key> <budget options...>; empty when budget refuses the blob
  local blob=$1 key=$2; shift 2
  { "$KINGLET" budget "$blob" "$@" --json 2>/dev/null || true; } \
    | sed -n "s/^  \"$key\": \([0-9]*\),\$/\1/p"
}
flash_sum=0 ram_sum=0
# Every model the firmware embeds, read from firmware-example/build.rs's MODELS, so the sum
# cannot miss one added there.
mapfile -t embedded < <(sed -n '/^const MODELS/,/^];/s/^ *"\(models\/[^"]*\.kgl\)",$/\1/p' "$fw/build.rs")
(( ${#embedded[@]} )) || { fail "no MODELS list in firmware-example/build.rs"; exit 1; }
for blob in "$work/sorter.kgl" "${embedded[@]/#/$fw/}"; do
  # digits_float is an f32 blob, which the int8-only build refuses: count it with the default.
  f=$(model_bytes "$blob" model_flash --board m0-16k --runtime int8-only)
  r=$(model_bytes "$blob" model_ram --board m0-16k --runtime int8-only)
  if [[ -z $f ]]; then
    f=$(model_bytes "$blob" model_flash --board m4f-64k)
    r=$(model_bytes "$blob" model_ram --board m4f-64k)
  fi
  [[ -n $f && -n $r ]] || { fail "budget --json of $blob has no model_flash/model_ram"; exit 1; }
  flash_sum=$((flash_sum + f)) ram_sum=$((ram_sum + r))
done
own_flash=$(model_bytes "$work/sorter.kgl" model_flash --board m0-16k)
own_ram=$(model_bytes "$work/sorter.kgl" model_ram --board m0-16k)
echo "  kinglet budget: this model $own_flash + $own_ram bytes; with the ${#embedded[@]} embedded, $flash_sum + $ram_sum bytes"
"$KINGLET" budget "$work/sorter.kgl" --board m0-16k --runtime classify-only | grep -E 'runtime code|stack|model alone'

# 5. the build: the blobs count against the budget, here set to the exact sum (bytes).
export KINGLET_FLASH_BUDGET=$flash_sum KINGLET_RAM_BUDGET=$ram_sum
build() { # build <target> <vectors file>
  (cd "$fw" && KINGLET_OWN_MODEL="$work/sorter.kgl" KINGLET_OWN_VECTORS="$2" KINGLET_OWN_FEED=f32 \
    CARGO_TARGET_DIR="$fw_target" cargo build --release --target "$1" --bin vectors) 2>"$work/build.log"
}
for t in "${targets[@]}"; do
  echo "own model: $t: build and run vectors"
  if ! build "$t" "$work/sorter.txt"; then
    cat "$work/build.log"; fail "$t: build"; continue
  fi
  grep -o 'sorter.kgl (KINGLET_OWN_MODEL): .*' "$work/build.log" | head -1 \
    || fail "$t: the build did not count the model against the budget"
  grep -q "sorter.kgl (KINGLET_OWN_MODEL): model flash: $own_flash bytes, scratch buffer RAM: $own_ram bytes" \
    "$work/build.log" || fail "$t: the build counted other bytes than kinglet budget's"
  grep -q "all models: model flash: $flash_sum bytes of $flash_sum budgeted, scratch RAM: $ram_sum bytes of $ram_sum budgeted" \
    "$work/build.log" || fail "$t: the build's sum differs from kinglet budget's"
  rc=0
  (cd "$fw" && ./qemu-run.sh "$fw_target/$t/release/vectors") >"$work/run-$t.txt" 2>&1 || rc=$?
  (( rc == 0 )) || fail "$t: vectors exited $rc"
  grep -E '^(own model|vectors:|MISMATCH|ERROR)' "$work/run-$t.txt" || true
  if grep -E '^sorter [0-9]{3} ' "$work/run-$t.txt" | diff -u "$work/sorter.txt" - >"$work/diff.txt"; then
    echo "  $rows lines identical to kinglet score's"
  else
    head -10 "$work/diff.txt"; fail "$t: the board's lines differ from kinglet score's"
  fi
  grep -Eq "^vectors: $((464 + rows)) passed, 0 failed$" "$work/run-$t.txt" || fail "$t: summary"
done

# One byte under the exact sum must fail the build, for flash and for RAM.
t="${targets[-1]}"
for over in "KINGLET_FLASH_BUDGET=$((flash_sum - 1))" "KINGLET_RAM_BUDGET=$((ram_sum - 1))"; do
  echo "own model: $t: $over (one byte short) fails the build"
  if (export "${over?}"; build "$t" "$work/sorter.txt"); then
    fail "$t: built with $over"
  elif ! grep -q 'model budget exceeded' "$work/build.log"; then
    cat "$work/build.log"; fail "$t: $over failed for another reason"
  fi
done

# A broken expectation must fail the run: line 7 claims another class.
echo "own model: $t: a changed expected line fails"
awk 'NR == 7 { n = sub(/ class=[0-9]+ /, " class=9 ") } 1' "$work/sorter.txt" >"$work/changed.txt"
cmp -s "$work/changed.txt" "$work/sorter.txt" && fail "could not change a line"
if build "$t" "$work/changed.txt"; then
  if (cd "$fw" && ./qemu-run.sh "$fw_target/$t/release/vectors") >"$work/run-changed.txt" 2>&1; then
    fail "$t: vectors passed with a changed expected line"
  fi
  grep -m1 '^MISMATCH own line 7' "$work/run-changed.txt" || fail "$t: no MISMATCH for line 7"
else
  cat "$work/build.log"; fail "$t: build with the changed line"
fi

if (( failures )); then
  echo "own model: $failures check(s) failed"; exit 1
fi
echo "own model: all steps passed"
