//! Datasets for calibration and comparison: CSV and NPY loading (in progress).
