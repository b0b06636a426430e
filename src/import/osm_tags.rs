//! OpenStreetMap tag rules. (Being written.)
