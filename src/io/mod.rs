//! Case input and result output (in progress).
