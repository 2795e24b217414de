//! The 2D layer over the 3D view: a caption (scenario, time, speed, the active stance) at the
//! top left and the timeline along the bottom (one coloured span per stance, a tick at each
//! switch, the play head). Layout is pure arithmetic ([`Timeline`]); drawing goes through
//! kiss3d's 2D lines and text in pixel coordinates (origin top left, y down).

use std::sync::Arc;

use kiss3d::camera::Camera2d;
use kiss3d::event::WindowEvent;
use kiss3d::prelude::{Canvas, Font, Mat3, Vec2, Vec3, Window};

use crate::palette;
use crate::replay::Replay;

/// Height of the band at the bottom that holds the timeline (pixels).
pub const BAND: f32 = 64.0;

/// The timeline's place on screen.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Timeline {
    pub x0: f32,
    pub x1: f32,
    /// Vertical centre of the bar.
    pub y: f32,
    pub thickness: f32,
}

impl Timeline {
    /// The timeline of a picture `width` x `height` pixels.
    pub fn new(width: f32, height: f32) -> Timeline {
        let margin = 24.0_f32.min(0.05 * width);
        Timeline {
            x0: margin,
            x1: (width - margin).max(margin + 1.0),
            y: height - 0.5 * BAND + 6.0,
            thickness: 14.0,
        }
    }

    /// x of a fraction of the route (0 = start, 1 = end).
    pub fn x_of(&self, fraction: f64) -> f32 {
        self.x0 + (self.x1 - self.x0) * fraction.clamp(0.0, 1.0) as f32
    }

    /// Fraction of the route under pixel column `x` (clamped to the bar).
    pub fn fraction_at(&self, x: f32) -> f64 {
        (((x - self.x0) / (self.x1 - self.x0)) as f64).clamp(0.0, 1.0)
    }

    /// Whether a pointer at (`x`, `y`) is on the timeline's band (for scrubbing).
    pub fn hit(&self, x: f32, y: f32) -> bool {
        x >= self.x0 - 8.0 && x <= self.x1 + 8.0 && (y - self.y).abs() <= BAND * 0.5
    }
}

/// A 2D camera in physical pixels, origin top left, y down (kiss3d's fixed 2D view only
/// learns the size from a resize event, which an off-screen surface never sends).
#[derive(Clone, Copy, Debug)]
pub struct PixelView {
    pub width: f32,
    pub height: f32,
}

impl Camera2d for PixelView {
    fn handle_event(&mut self, _canvas: &Canvas, event: &WindowEvent) {
        if let WindowEvent::FramebufferSize(w, h) = *event {
            self.width = w as f32;
            self.height = h as f32;
        }
    }

    fn update(&mut self, _canvas: &Canvas) {}

    fn view_transform_pair(&self) -> (Mat3, Mat3) {
        let proj = Mat3::from_cols(
            Vec3::new(2.0 / self.width, 0.0, 0.0),
            Vec3::new(0.0, -2.0 / self.height, 0.0),
            Vec3::new(-1.0, 1.0, 1.0),
        );
        (Mat3::IDENTITY, proj)
    }

    fn unproject(&self, window_coord: Vec2, _size: Vec2) -> Vec2 {
        window_coord
    }
}

/// What the caption says besides the replay itself.
pub struct Caption<'a> {
    pub title: &'a str,
    pub speed: f64,
    pub playing: Option<bool>,
}

/// Draw the caption and the timeline at time `t` into `window` (`width` x `height` px).
pub fn draw(
    window: &mut Window,
    font: &Arc<Font>,
    width: f32,
    height: f32,
    replay: &Replay,
    t: f64,
    caption: &Caption<'_>,
) {
    let tl = Timeline::new(width, height);
    // Band behind the timeline: a few thick horizontal strokes.
    let mut y = height - BAND;
    while y < height {
        window.draw_line_2d(
            Vec2::new(0.0, y + 2.0),
            Vec2::new(width, y + 2.0),
            palette::BAND,
            4.0,
        );
        y += 4.0;
    }
    // Stance spans.
    for (i, s) in replay.spans.iter().enumerate() {
        let (a, b) = (
            tl.x_of(replay.fraction(s.t0)),
            tl.x_of(replay.fraction(s.t1)),
        );
        let c = if i % 2 == 0 {
            palette::SPAN_A
        } else {
            palette::SPAN_B
        };
        window.draw_line_2d(
            Vec2::new(a, tl.y),
            Vec2::new(b.max(a + 1.0), tl.y),
            c,
            tl.thickness,
        );
    }
    // Switch ticks.
    for w in &replay.switches {
        let x = tl.x_of(replay.fraction(w.time));
        window.draw_line_2d(
            Vec2::new(x, tl.y - 11.0),
            Vec2::new(x, tl.y + 11.0),
            palette::TICK,
            3.0,
        );
    }
    // Play head.
    let x = tl.x_of(replay.fraction(t));
    window.draw_line_2d(
        Vec2::new(x, tl.y - 16.0),
        Vec2::new(x, tl.y + 16.0),
        palette::HEAD,
        4.0,
    );
    let span = replay.span_at(t);
    let state = match caption.playing {
        Some(true) => "playing",
        Some(false) => "paused",
        None => "",
    };
    window.draw_text(
        caption.title,
        Vec2::new(14.0, 10.0),
        26.0,
        font,
        palette::TEXT,
    );
    window.draw_text(
        &format!(
            "t {:6.2} s of {:.2} s   speed x{:.2}   {state}",
            t,
            replay.end(),
            caption.speed
        ),
        Vec2::new(14.0, 40.0),
        22.0,
        font,
        palette::DIM_TEXT,
    );
    window.draw_text(
        &format!(
            "stance {}/{}: {}",
            span + 1,
            replay.spans.len(),
            replay.spans[span].label
        ),
        Vec2::new(14.0, 66.0),
        24.0,
        font,
        palette::TEXT,
    );
    // The next switch, if any, under the timeline's left end.
    if let Some(w) = replay.switches.iter().find(|w| w.time > t) {
        window.draw_text(
            &format!("next: {} at {:.2} s", w.label, w.time),
            Vec2::new(tl.x0, height - BAND + 4.0),
            18.0,
            font,
            palette::DIM_TEXT,
        );
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn timeline_maps_fractions_and_back() {
        let tl = Timeline::new(1000.0, 600.0);
        assert_eq!(tl.x_of(0.0), tl.x0);
        assert_eq!(tl.x_of(1.0), tl.x1);
        assert_eq!(tl.x_of(2.0), tl.x1);
        for f in [0.0, 0.25, 0.5, 0.9, 1.0] {
            assert!((tl.fraction_at(tl.x_of(f)) - f).abs() < 1e-6);
        }
        assert!(tl.hit(500.0, tl.y));
        assert!(!tl.hit(500.0, 100.0));
        assert!(tl.y > 600.0 - BAND && tl.y < 600.0);
    }
}
