//! Plan the `lever` demo and print a short summary of the motion.
//!
//!     cargo run --release --example lever_pull -- [seed]

#[path = "common/summary.rs"]
mod summary;

fn main() -> anyhow::Result<()> {
    summary::run(clamber::demo::lever::scenario()?)
}
