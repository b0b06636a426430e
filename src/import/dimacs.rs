//! 9th DIMACS Challenge import. (Being written.)
