//! Synthetic maps (in progress).
