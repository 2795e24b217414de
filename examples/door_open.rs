//! Plan the door demo and print a short summary of the motion.
//!
//!     cargo run --release --example door_open -- [seed]

#[path = "common/summary.rs"]
mod summary;

fn main() -> anyhow::Result<()> {
    summary::run(clamber::demo::door::scenario()?)
}
