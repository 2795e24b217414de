//! Plan the `bar_slide` demo and print a short summary of the motion.
//!
//!     cargo run --release --example bar_slide -- [seed]

#[path = "common/summary.rs"]
mod summary;

fn main() -> anyhow::Result<()> {
    summary::run(clamber::demo::bar_slide::scenario()?)
}
