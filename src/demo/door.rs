//! Demo scenario `door` (being written).
