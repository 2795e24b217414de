//! Human-readable summaries of models (`clamber robot`). OWNER: toml helper. To be written.
