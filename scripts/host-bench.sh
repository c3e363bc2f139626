#!/usr/bin/env bash
# Host speed: numpy's float forward pass against `kinglet vet`'s batched f32 and int8 passes
# over 10,000 rows of a 784-100-10 model, both measured in one run (converter/benches/vet.rs,
# which runs converter/benches/vet_numpy.py in the reference venv). Prints one table.
#
# OPENBLAS_CORETYPE and OPENBLAS_L2_SIZE, if this machine sets them, make OpenBLAS pick slower
# kernels; they are unset for this benchmark command alone (never in tests or CI), so numpy
# runs at its best. The table names the BLAS numpy used (threadpoolctl).
set -euo pipefail
cd "$(dirname "$0")/.."
python="$(bash tests/python/setup_venv.sh | tail -n 1)"
echo "OPENBLAS_CORETYPE=${OPENBLAS_CORETYPE-<unset>} OPENBLAS_L2_SIZE=${OPENBLAS_L2_SIZE-<unset>} in the caller's environment (unset below)"
env -u OPENBLAS_CORETYPE -u OPENBLAS_L2_SIZE KINGLET_PYTHON="$python" \
  cargo bench -q -p kinglet-converter --bench vet
