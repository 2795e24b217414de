//! The `clamber` command-line tool.

use std::path::{Path, PathBuf};
use std::process::ExitCode;

use anyhow::{Context, Result};
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
        /// Print the report as JSON instead of text.
        #[arg(long)]
        json: bool,
    },
}

fn robot(file: &Path, json: bool) -> Result<()> {
    let robot = clamber::robot_file::load_robot(file)?;
    let report = clamber::report::RobotReport::new(&robot)
        .with_context(|| format!("{}: cannot compute the report", file.display()))?;
    if json {
        println!("{}", serde_json::to_string_pretty(&report)?);
    } else {
        print!("{}", report.to_text());
    }
    Ok(())
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    let result = match &cli.command {
        Command::Robot { file, json } => robot(file, *json),
    };
    match result {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            // The first error's message already holds file, line, column, field and cause.
            eprintln!("error: {e}");
            ExitCode::FAILURE
        }
    }
}
