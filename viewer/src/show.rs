//! Window mode: replay a route with play/pause, scrubbing and speed control.
//!
//! Keys: space play/pause; left/right arrows step 1/50 of the route back/forward (with
//! shift: to the previous/next switch); `+`/`-` double/halve the speed; Home back to the
//! start. The left mouse button on the timeline scrubs; elsewhere it turns the camera.

use std::path::PathBuf;
use std::time::Instant;

use clamber::scenario::Scenario;
use kiss3d::event::{Action, Key, MouseButton, WindowEvent};
use kiss3d::prelude::{Font, Window};

use crate::error::ViewError;
use crate::framing::{camera, ViewSettings};
use crate::overlay::{self, Caption, PixelView, Timeline};
use crate::palette;
use crate::render::write_png;
use crate::replay::Replay;
use crate::stage::Stage;

/// Window mode options.
#[derive(Clone, Debug, Default)]
pub struct ShowOptions {
    pub view: ViewSettings,
    /// Save a frame of the window to this file after this many seconds, then close.
    pub screenshot: Option<(PathBuf, f64)>,
}

/// The replay clock: pure state changed by key presses and elapsed time.
#[derive(Clone, Debug, PartialEq)]
pub struct Clock {
    pub t: f64,
    pub speed: f64,
    pub playing: bool,
}

impl Clock {
    pub const MIN_SPEED: f64 = 1.0 / 16.0;
    pub const MAX_SPEED: f64 = 16.0;

    pub fn new(replay: &Replay) -> Clock {
        Clock {
            t: replay.start(),
            speed: 1.0,
            playing: true,
        }
    }

    /// Advance by `dt` wall seconds; at the end the replay stops (space plays it again
    /// from the start).
    pub fn tick(&mut self, replay: &Replay, dt: f64) {
        if self.playing {
            self.t += dt * self.speed;
            if self.t >= replay.end() {
                self.t = replay.end();
                self.playing = false;
            }
        }
    }

    pub fn toggle(&mut self, replay: &Replay) {
        if !self.playing && self.t >= replay.end() {
            self.t = replay.start();
        }
        self.playing = !self.playing;
    }

    /// Step by a fiftieth of the route (negative: back).
    pub fn step(&mut self, replay: &Replay, steps: f64) {
        let d = replay.duration().max(1e-9) / 50.0;
        self.t = (self.t + steps * d).clamp(replay.start(), replay.end());
    }

    /// Jump to the next (or previous) switch moment, or the route's end (start).
    pub fn jump(&mut self, replay: &Replay, forward: bool) {
        let eps = 1e-9;
        self.t = if forward {
            replay
                .switches
                .iter()
                .map(|w| w.time)
                .find(|&x| x > self.t + eps)
                .unwrap_or(replay.end())
        } else {
            replay
                .switches
                .iter()
                .rev()
                .map(|w| w.time)
                .find(|&x| x < self.t - eps)
                .unwrap_or(replay.start())
        };
    }

    pub fn faster(&mut self) {
        self.speed = (self.speed * 2.0).min(Self::MAX_SPEED);
    }

    pub fn slower(&mut self) {
        self.speed = (self.speed * 0.5).max(Self::MIN_SPEED);
    }

    pub fn seek_fraction(&mut self, replay: &Replay, f: f64) {
        self.t = replay.start() + f.clamp(0.0, 1.0) * replay.duration();
    }
}

/// Open the window and replay until it is closed (or the screenshot is taken).
pub async fn show(
    scenario: &Scenario,
    replay: &Replay,
    options: &ShowOptions,
) -> Result<(), ViewError> {
    let v = options.view;
    let title = format!("clamber-view: {}", scenario.name);
    let mut window = Window::new_with_size(&title, v.width, v.height).await;
    window.set_background_color(palette::BACKGROUND);
    window.set_ambient(0.35);
    let (mut cam, floor) = camera(scenario, replay, &v);
    let mut stage = Stage::new(scenario, floor);
    let font = Font::default();
    let mut clock = Clock::new(replay);
    let mut pixels = PixelView {
        width: v.width as f32,
        height: v.height as f32,
    };
    // The replay clock and the screenshot delay start once the first frame is on screen
    // (building the pipelines takes a while on a software driver).
    let mut opened: Option<Instant> = None;
    let mut last = Instant::now();
    let mut cursor = (0.0f32, 0.0f32);
    let mut scrubbing = false;
    loop {
        let (w, h) = (window.width() as f32, window.height() as f32);
        let tl = Timeline::new(w, h);
        for mut ev in window.events().iter() {
            match ev.value {
                WindowEvent::Key(key, Action::Press, mods) => {
                    let shift = mods.contains(kiss3d::event::Modifiers::Shift);
                    match key {
                        Key::Space => clock.toggle(replay),
                        Key::Right if shift => clock.jump(replay, true),
                        Key::Left if shift => clock.jump(replay, false),
                        Key::Right => clock.step(replay, 1.0),
                        Key::Left => clock.step(replay, -1.0),
                        Key::Equals | Key::Add | Key::NumpadEquals => clock.faster(),
                        Key::Minus | Key::Subtract => clock.slower(),
                        Key::Home => clock.t = replay.start(),
                        _ => continue,
                    }
                    ev.inhibited = true;
                }
                WindowEvent::CursorPos(x, y, _) => {
                    cursor = (x as f32, y as f32);
                    if scrubbing {
                        clock.seek_fraction(replay, tl.fraction_at(cursor.0));
                        ev.inhibited = true;
                    }
                }
                WindowEvent::MouseButton(MouseButton::Button1, Action::Press, _)
                    if tl.hit(cursor.0, cursor.1) =>
                {
                    scrubbing = true;
                    clock.seek_fraction(replay, tl.fraction_at(cursor.0));
                    ev.inhibited = true;
                }
                WindowEvent::MouseButton(MouseButton::Button1, Action::Release, _) if scrubbing => {
                    scrubbing = false;
                    ev.inhibited = true;
                }
                _ => {}
            }
        }
        let now = Instant::now();
        if !scrubbing && opened.is_some() {
            clock.tick(replay, (now - last).as_secs_f64());
        }
        last = now;
        let f = replay.frame(&scenario.robot, clock.t);
        stage.set_frame(&scenario.robot, &f.q, &replay.spans[f.span].holds);
        pixels.width = w;
        pixels.height = h;
        overlay::draw(
            &mut window,
            &font,
            w,
            h,
            replay,
            f.time,
            &Caption {
                title: &scenario.name,
                speed: clock.speed,
                playing: Some(clock.playing),
            },
        );
        let open = window
            .render(
                Some(&mut stage.root),
                None,
                Some(&mut cam),
                Some(&mut pixels),
                None,
                None,
            )
            .await;
        if !open {
            return Ok(());
        }
        let shown = *opened.get_or_insert_with(|| {
            last = Instant::now();
            last
        });
        if let Some((path, after)) = &options.screenshot {
            if shown.elapsed().as_secs_f64() >= *after {
                let img = window.snap_image();
                write_png(&img, path)?;
                return Ok(());
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::replay::{Span, SwitchMark};

    fn replay() -> Replay {
        let span = |t0: f64, t1: f64| Span {
            t0,
            t1,
            label: String::new(),
            holds: vec![],
            times: vec![t0, t1],
            path: vec![vec![], vec![]],
        };
        Replay::new(
            vec![span(0.0, 4.0), span(4.0, 10.0)],
            vec![SwitchMark {
                time: 4.0,
                label: String::new(),
            }],
        )
        .unwrap()
    }

    #[test]
    fn clock_plays_pauses_and_stops_at_the_end() {
        let r = replay();
        let mut c = Clock::new(&r);
        c.tick(&r, 1.0);
        assert_eq!(c.t, 1.0);
        c.faster();
        c.tick(&r, 1.0);
        assert_eq!(c.t, 3.0);
        c.toggle(&r);
        c.tick(&r, 1.0);
        assert_eq!(c.t, 3.0);
        c.toggle(&r);
        c.tick(&r, 100.0);
        assert_eq!(c.t, 10.0);
        assert!(!c.playing);
        c.toggle(&r);
        assert_eq!(c.t, 0.0);
        assert!(c.playing);
    }

    #[test]
    fn clock_steps_jumps_and_bounds_speed() {
        let r = replay();
        let mut c = Clock::new(&r);
        c.step(&r, 5.0);
        assert!((c.t - 1.0).abs() < 1e-12);
        c.jump(&r, true);
        assert_eq!(c.t, 4.0);
        c.jump(&r, true);
        assert_eq!(c.t, 10.0);
        c.jump(&r, false);
        assert_eq!(c.t, 4.0);
        c.jump(&r, false);
        assert_eq!(c.t, 0.0);
        c.step(&r, -3.0);
        assert_eq!(c.t, 0.0);
        for _ in 0..20 {
            c.faster();
        }
        assert_eq!(c.speed, Clock::MAX_SPEED);
        for _ in 0..40 {
            c.slower();
        }
        assert_eq!(c.speed, Clock::MIN_SPEED);
        c.seek_fraction(&r, 0.5);
        assert_eq!(c.t, 5.0);
    }
}
