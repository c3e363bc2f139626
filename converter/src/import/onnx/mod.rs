//! ONNX import (in progress).
