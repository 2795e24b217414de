//! Collision and clearance queries. OWNER: collision helper. To be written.
