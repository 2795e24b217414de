//! Demo scenario `lever` (being written).
