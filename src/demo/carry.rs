//! Demo scenario `carry` (being written).
