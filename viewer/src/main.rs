//! The `clamber-view` executable: `show` (window) and `render` (PNG, no window). The core
//! `clamber` binary forwards its `show` and `render` commands here.

use std::path::PathBuf;
use std::process::ExitCode;

use anyhow::{Context, Result};
use clap::{Args, Parser, Subcommand};

use clamber::scenario_file::load_scenario;
use clamber_view::framing::ViewSettings;
use clamber_view::render::{strip, write_png, Layers, Renderer};
use clamber_view::show::{show, ShowOptions};
use clamber_view::{Replay, ViewError};

#[derive(Parser)]
#[command(
    name = "clamber-view",
    version,
    about = "Replays Clamber routes in 3D: a window (show) or pictures with no window (render)",
    after_help = "Exit codes: 0 success, 1 internal or graphics error, 2 bad command line, \
3 an input file is missing or malformed, 6 the picture could not be written."
)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Args, Clone, Copy)]
struct View {
    /// Camera azimuth in degrees about the vertical axis (from +x towards +y).
    #[arg(long, default_value_t = ViewSettings::default().azimuth, allow_negative_numbers = true)]
    azimuth: f64,
    /// Camera elevation in degrees above the horizontal.
    #[arg(long, default_value_t = ViewSettings::default().elevation, allow_negative_numbers = true)]
    elevation: f64,
    /// Picture (or window) width in pixels.
    #[arg(long, default_value_t = ViewSettings::default().width)]
    width: u32,
    /// Picture (or window) height in pixels.
    #[arg(long, default_value_t = ViewSettings::default().height)]
    height: u32,
}

impl View {
    fn settings(self) -> ViewSettings {
        ViewSettings {
            azimuth: self.azimuth,
            elevation: self.elevation,
            width: self.width,
            height: self.height,
        }
    }
}

#[derive(Subcommand)]
enum Command {
    /// Open a window and replay the route (space: play/pause, arrows: step, shift+arrows:
    /// switch to switch, +/-: speed, Home: start, mouse on the timeline: scrub).
    Show {
        /// Scenario file (*.scenario.toml).
        scenario: PathBuf,
        /// Route or motion JSON written by `clamber plan`.
        route: PathBuf,
        /// Save a frame of the window to this PNG file and close (with --after).
        #[arg(long)]
        screenshot: Option<PathBuf>,
        /// Seconds after opening at which the screenshot is taken.
        #[arg(long, default_value_t = 2.0, requires = "screenshot")]
        after: f64,
        #[command(flatten)]
        view: View,
    },
    /// Render the route at one time (or a strip of key frames) to a PNG, with no window.
    Render {
        /// Scenario file (*.scenario.toml).
        scenario: PathBuf,
        /// Route or motion JSON written by `clamber plan`.
        route: PathBuf,
        /// Route time in seconds (clamped to the route); default: the end.
        #[arg(long, short, allow_negative_numbers = true, conflicts_with = "strip")]
        time: Option<f64>,
        /// Instead of one time: N key frames from start to end, side by side.
        #[arg(long, value_name = "N")]
        strip: Option<usize>,
        /// Output PNG file (written atomically).
        #[arg(long, short)]
        output: PathBuf,
        /// Leave out the caption and the timeline.
        #[arg(long)]
        no_overlay: bool,
        #[command(flatten)]
        view: View,
    },
}

fn load(scenario: &PathBuf, route: &PathBuf) -> Result<(clamber::scenario::Scenario, Replay)> {
    let f = load_scenario(scenario).map_err(ViewError::from)?;
    let replay = Replay::load(route, &f.scenario.robot)?;
    Ok((f.scenario, replay))
}

fn run(cli: Cli) -> Result<()> {
    match cli.command {
        Command::Show {
            scenario,
            route,
            screenshot,
            after,
            view,
        } => {
            if !(after.is_finite() && after >= 0.0) {
                return Err(ViewError::Option {
                    what: "--after",
                    expected: format!("a non-negative number of seconds, got {after}"),
                }
                .into());
            }
            let (s, replay) = load(&scenario, &route)?;
            let options = ShowOptions {
                view: view.settings(),
                screenshot: screenshot.map(|p| (p, after)),
            };
            kiss3d::pollster::block_on(show(&s, &replay, &options))?;
        }
        Command::Render {
            scenario,
            route,
            time,
            strip: n,
            output,
            no_overlay,
            view,
        } => {
            if let Some(t) = time.filter(|t| !t.is_finite()) {
                return Err(ViewError::Option {
                    what: "--time",
                    expected: format!("a number of seconds, got {t}"),
                }
                .into());
            }
            if let Some(n) = n.filter(|&n| n == 0 || n > 32) {
                return Err(ViewError::Option {
                    what: "--strip",
                    expected: format!("1 to 32 key frames, got {n}"),
                }
                .into());
            }
            let (s, replay) = load(&scenario, &route)?;
            let layers = Layers {
                robot: true,
                overlay: !no_overlay,
            };
            let mut r = Renderer::new(&s, &replay, view.settings())?;
            let img = match n {
                Some(n) => {
                    let frames: Vec<_> = replay
                        .key_times(n)
                        .into_iter()
                        .map(|t| r.frame(t, layers))
                        .collect();
                    strip(&frames)
                }
                None => r.frame(time.unwrap_or(replay.end()), layers),
            };
            write_png(&img, &output).with_context(|| "writing the picture")?;
            println!("wrote {}", output.display());
        }
    }
    Ok(())
}

fn exit_code(e: &anyhow::Error) -> u8 {
    for cause in e.chain() {
        if let Some(v) = cause.downcast_ref::<ViewError>() {
            return match v {
                ViewError::Io { .. }
                | ViewError::RouteJson { .. }
                | ViewError::RouteFile { .. }
                | ViewError::Scenario(_) => 3,
                ViewError::Option { .. } => 2,
                ViewError::Output(_) => 6,
                _ => 1,
            };
        }
    }
    1
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    match run(cli) {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("clamber-view: error: {e:#}");
            ExitCode::from(exit_code(&e))
        }
    }
}
