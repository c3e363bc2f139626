#!/usr/bin/env bash
# Regenerates everything in firmware-example/models/ from examples/, without Python:
#   digits.kgl, digits_float.kgl, vibration.kgl        kinglet pack (int8 with calibration; f32);
#                                                      digits.kgl and lr_digits.kgl keep the
#                                                      integer input path (--integer-input): the
#                                                      firmware feeds them raw u8 pixels
#   lr_digits.kgl, lr_digits_float.kgl                 kinglet pack of the scikit-learn
#                                                      LogisticRegression (MinMaxScaler, skl2onnx
#                                                      LinearClassifier) in tests/fixtures/linear/
#   tanh_digits.kgl, tanh_digits_float.kgl             kinglet pack of the scikit-learn
#                                                      MLPClassifier(activation="tanh") in
#                                                      tests/fixtures/activation/
#   int4_digits.kgl                                    the digits example with int4 weights on
#                                                      every layer (--weights int4, format
#                                                      version 6), integer input path kept
#   digits_int16_input.kgl                             the digits example with an int16 input
#                                                      tensor and every layer output's range
#                                                      doubled (--input-tensor int16
#                                                      --headroom 2, format version 7),
#                                                      integer input path kept
#   digits_heldout_*.bin, vibration_replay*.bin        make-assets (this workspace)
#
# Usage: bash firmware-example/models/regenerate.sh [OUT_DIR]   (default: firmware-example/models)
# KINGLET=<path to the kinglet binary> skips building it. CARGO_TARGET_DIR is honoured.
set -euo pipefail
root="$(cd "$(dirname "${BASH_SOURCE[0]}")/../.." && pwd)"
out="${1:-$root/firmware-example/models}"
mkdir -p "$out"
out="$(cd "$out" && pwd)"
host="$(rustc -vV | sed -n 's/^host: //p')"

if [[ -z "${KINGLET:-}" ]]; then
  (cd "$root" && cargo build --quiet --release -p kinglet-converter --bin kinglet)
  KINGLET="${CARGO_TARGET_DIR:-$root/target}/release/kinglet"
fi

"$KINGLET" pack "$root/examples/digits/model.onnx" \
  --calibration "$root/examples/digits/calibration.csv" --integer-input -o "$out/digits.kgl"
"$KINGLET" pack "$root/examples/digits/model.onnx" --float -o "$out/digits_float.kgl"
"$KINGLET" pack "$root/tests/fixtures/linear/lr_digits_minmax.onnx" \
  --calibration "$root/examples/digits/calibration.csv" --integer-input -o "$out/lr_digits.kgl"
"$KINGLET" pack "$root/tests/fixtures/linear/lr_digits_minmax.onnx" --float -o "$out/lr_digits_float.kgl"
"$KINGLET" pack "$root/tests/fixtures/activation/mlp_tanh_digits.onnx" \
  --calibration "$root/examples/digits/calibration.csv" --integer-input -o "$out/tanh_digits.kgl"
"$KINGLET" pack "$root/tests/fixtures/activation/mlp_tanh_digits.onnx" --float -o "$out/tanh_digits_float.kgl"
"$KINGLET" pack "$root/examples/digits/model.onnx" --weights int4 \
  --calibration "$root/examples/digits/calibration.csv" --integer-input -o "$out/int4_digits.kgl"
"$KINGLET" pack "$root/examples/digits/model.onnx" --input-tensor int16 --headroom 2 \
  --calibration "$root/examples/digits/calibration.csv" --integer-input -o "$out/digits_int16_input.kgl"
"$KINGLET" pack "$root/examples/vibration/model.onnx" \
  --calibration "$root/examples/vibration/calibration.csv" -o "$out/vibration.kgl"

(cd "$root/firmware-example" && cargo run --quiet --target "$host" \
  -p kinglet-fw-make-assets -- "$root" "$out")
