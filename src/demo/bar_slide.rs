//! Demo scenario `bar_slide` (being written).
