//! The `clamber` command-line tool.

use std::path::PathBuf;

use anyhow::Result;
use clap::{Parser, Subcommand};

#[derive(Parser)]
#[command(
    name = "clamber",
    version,
    about = "Plans verified motions for robots that hold on to the world while they move"
)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Inspect a robot file: DOF, joints and limits, effectors, links and shapes, reach.
    Robot {
        /// Robot file (.toml or .urdf).
        file: PathBuf,
    },
}

fn main() -> Result<()> {
    let cli = Cli::parse();
    match cli.command {
        Command::Robot { file } => {
            let robot = clamber::robot_file::load_robot(&file)?;
            println!("{} : {} DOF", robot.name(), robot.nv());
        }
    }
    Ok(())
}
