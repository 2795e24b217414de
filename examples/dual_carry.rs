//! Plan the `carry` demo and print a short summary of the motion.
//!
//!     cargo run --release --example dual_carry -- [seed]

#[path = "common/summary.rs"]
mod summary;

fn main() -> anyhow::Result<()> {
    summary::run(clamber::demo::carry::scenario()?)
}
