//! The swing between two unit axes: the rotation vector of the shortest rotation taking the
//! fixed axis `h` to the moving axis `a`. Zero only when the axes are aligned (anti-parallel
//! axes give a swing of length pi, unlike the cross product, which vanishes there too).

use nalgebra::{Matrix3, Vector3};

use crate::math::skew;

/// Swing vector `s = theta * (h x a) / |h x a|`, `theta = atan2(|h x a|, h . a)`, and its
/// derivative with respect to `a` (3x3). Both axes must be unit vectors. Derivation: with
/// `c = h x a`, `n = |c|`, `d = h . a`, `f = theta / n`: `ds = f [h]x da + c (df)`, and
/// `df = (d/n - theta/n^2) dn - dd` for unit vectors (n^2 + d^2 = 1), `dn = -(h x c)/n . da`.
/// As `n -> 0` (aligned) `f -> 1` and `df -> -h . da`.
pub fn swing(h: &Vector3<f64>, a: &Vector3<f64>) -> (Vector3<f64>, Matrix3<f64>) {
    let c = h.cross(a);
    let n = c.norm();
    let d = h.dot(a);
    let hx = skew(h);
    if n < 1e-9 && d > 0.0 {
        return (c, hx - c * h.transpose());
    }
    let theta = n.atan2(d);
    if n < 1e-12 {
        // Anti-parallel: direction undefined; any perpendicular will do, the residual is pi.
        let p = if h.x.abs() < 0.9 {
            Vector3::x()
        } else {
            Vector3::y()
        };
        let axis = h.cross(&p).normalize();
        return (axis * theta, Matrix3::zeros());
    }
    let f = theta / n;
    let dn = -(h.cross(&c)) / n;
    let g = dn * (d / n - theta / (n * n)) - h;
    (c * f, hx * f + c * g.transpose())
}
