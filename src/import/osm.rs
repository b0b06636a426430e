//! OpenStreetMap PBF import. (Being written.)
