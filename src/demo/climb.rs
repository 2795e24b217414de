//! Demo scenario `climb` (being written).
