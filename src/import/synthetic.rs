//! Synthetic demo city. (Being written.)
