//! The viewer's colours, in one place (our own palette, described in docs/viewer.md).
//! Background "night slate"; the robot in warm "sandstone" with its effector links in
//! "ember"; holds in cool tones that differ in shape and colour by kind; obstacles in muted
//! "harbour" blue-grey; mechanisms in "heather" violet.

use kiss3d::color::Color;

const fn rgb(r: f32, g: f32, b: f32) -> Color {
    Color::new(r, g, b, 1.0)
}

/// Behind everything.
pub const BACKGROUND: Color = rgb(0.075, 0.085, 0.11);
/// The floor plate under the scene.
pub const FLOOR: Color = rgb(0.16, 0.17, 0.20);
/// Grid lines on the floor.
pub const GRID: Color = rgb(0.26, 0.28, 0.32);
/// Robot links.
pub const ROBOT: Color = rgb(0.90, 0.74, 0.50);
/// Links that carry an effector.
pub const EFFECTOR: Color = rgb(0.96, 0.42, 0.28);
/// Links of a mechanism (door, lever).
pub const MECHANISM: Color = rgb(0.66, 0.56, 0.90);
/// Fixed obstacles.
pub const OBSTACLE: Color = rgb(0.33, 0.45, 0.54);
/// A bar (rail) hold: a long rod.
pub const BAR: Color = rgb(0.16, 0.80, 0.68);
/// A point hold: a ball with a short approach pin.
pub const POINT: Color = rgb(0.98, 0.80, 0.18);
/// A handle on a mechanism.
pub const HANDLE: Color = rgb(0.93, 0.36, 0.72);
/// A hold gripped in the active stance (any kind).
pub const GRIPPED: Color = rgb(0.97, 0.97, 1.0);
/// Timeline: background, two alternating stance tones, switch ticks, play head, text.
pub const BAND: Color = rgb(0.11, 0.12, 0.15);
pub const SPAN_A: Color = rgb(0.20, 0.46, 0.52);
pub const SPAN_B: Color = rgb(0.36, 0.32, 0.58);
pub const TICK: Color = rgb(0.98, 0.80, 0.18);
pub const HEAD: Color = rgb(0.96, 0.42, 0.28);
pub const TEXT: Color = rgb(0.88, 0.90, 0.94);
pub const DIM_TEXT: Color = rgb(0.55, 0.58, 0.64);

/// The colour as 8-bit RGB without conversion.
pub fn rgb8(c: Color) -> [u8; 3] {
    let q = |x: f32| (x.clamp(0.0, 1.0) * 255.0).round() as u8;
    [q(c.r), q(c.g), q(c.b)]
}

/// The colour as it appears in a rendered picture: the palette values are linear and the
/// renderer writes sRGB, so each channel goes through the sRGB transfer function
/// (IEC 61966-2-1: 12.92 x below 0.0031308, else 1.055 x^(1/2.4) - 0.055).
pub fn srgb8(c: Color) -> [u8; 3] {
    let f = |x: f32| {
        let x = x.clamp(0.0, 1.0);
        let y = if x <= 0.003_130_8 {
            12.92 * x
        } else {
            1.055 * x.powf(1.0 / 2.4) - 0.055
        };
        (y * 255.0).round() as u8
    };
    [f(c.r), f(c.g), f(c.b)]
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn srgb_transfer_matches_published_points() {
        // IEC 61966-2-1 transfer function evaluated independently: linear 0.5 -> 0.7354
        // (187.5 of 255), 0.2 -> 0.4845 (123.5), 0.001 -> 0.0129 (3.3), 0 -> 0, 1 -> 1.
        assert_eq!(srgb8(Color::new(0.5, 0.2, 0.0, 1.0)), [188, 124, 0]);
        assert_eq!(srgb8(Color::new(1.0, 0.001, 0.0, 1.0)), [255, 3, 0]);
    }
}
