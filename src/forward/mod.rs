//! Forward model (in progress).
