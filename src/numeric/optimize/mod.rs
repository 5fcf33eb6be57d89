//! Searches shared by the numerical kernels: golden-section search for a maximum on a
//! bracket (in two conventions, see [`golden_section_midpoint`]), bisection for a root, and ([`povm`]) the Riemannian ascents over rank-one
//! POVMs. No physics here; callers bring the function and the bracket or the starting
//! point.

pub mod povm;

pub use povm::{povm_ascent, povm_lbfgs, AscentOptions, PovmObjective};

use crate::error::{Error, ErrorKind, Result};

/// Golden-section search for a maximum of `f` on `[a, b]` in `iters` steps (the bracket
/// shrinks by 0.618 per step). Returns `(x, f(x))` of the best interior point visited;
/// for a unimodal `f` it lies within `(b − a)·0.618^iters` of the maximiser.
pub fn golden_section_max(f: impl Fn(f64) -> f64, mut a: f64, mut b: f64, iters: usize) -> (f64, f64) {
    let ratio = golden_ratio_conjugate();
    let mut x1 = b - ratio * (b - a);
    let mut x2 = a + ratio * (b - a);
    let (mut f1, mut f2) = (f(x1), f(x2));
    for _ in 0..iters {
        if f1 < f2 {
            a = x1;
            x1 = x2;
            f1 = f2;
            x2 = a + ratio * (b - a);
            f2 = f(x2);
        } else {
            b = x2;
            x2 = x1;
            f2 = f1;
            x1 = b - ratio * (b - a);
            f1 = f(x1);
        }
    }
    if f1 >= f2 {
        (x1, f1)
    } else {
        (x2, f2)
    }
}

/// Golden-section search for a maximum of `f` on `[a, b]` that returns the midpoint of the
/// final bracket after `iters` steps (without evaluating `f` there).
///
/// Each step places both interior points afresh from the current bracket,
/// `x₁ = b − r(b − a)` and `x₂ = a + r(b − a)` with r = (√5 − 1)/2, and keeps `[a, x₂]` when
/// `f(x₁) > f(x₂)`, otherwise `[x₁, b]`: ties (and NaN) keep the right part. In exact
/// arithmetic the brackets are those of [`golden_section_max`]; in floating point they are
/// not, since that one carries the surviving interior point over and keeps the left part
/// on ties. Results computed with one convention are reproduced only by the same one, so
/// callers whose outputs were fixed with this one (the optimal signal intensity of the
/// key-rate tables, the six-state Holevo bound of the hunt) keep it.
pub fn golden_section_midpoint(f: impl Fn(f64) -> f64, mut a: f64, mut b: f64, iters: usize) -> f64 {
    let ratio = golden_ratio_conjugate();
    for _ in 0..iters {
        let x1 = b - ratio * (b - a);
        let x2 = a + ratio * (b - a);
        if f(x1) > f(x2) {
            b = x2;
        } else {
            a = x1;
        }
    }
    0.5 * (a + b)
}

/// `(√5 − 1)/2 ≈ 0.618`: the factor by which a golden-section step shrinks the bracket.
fn golden_ratio_conjugate() -> f64 {
    0.5 * (5f64.sqrt() - 1.0)
}

/// Finds a root of `f` in `[lo, hi]` by bisection until the bracket is below `tol`; `f`
/// must change sign on the bracket.
pub fn bisect(f: impl Fn(f64) -> f64, mut lo: f64, mut hi: f64, tol: f64) -> Result<f64> {
    let (mut flo, fhi) = (f(lo), f(hi));
    if flo.is_nan() || fhi.is_nan() || flo.signum() == fhi.signum() {
        return Err(Error::new(ErrorKind::NoConvergence, format!("no sign change of the function on [{lo}, {hi}]: {flo} and {fhi}")));
    }
    while hi - lo > tol {
        let mid = 0.5 * (lo + hi);
        let fm = f(mid);
        if fm == 0.0 {
            return Ok(mid);
        }
        if fm.signum() == flo.signum() {
            lo = mid;
            flo = fm;
        } else {
            hi = mid;
        }
    }
    Ok(0.5 * (lo + hi))
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_abs_diff_eq;

    #[test]
    fn finds_the_peak_of_a_smooth_function() {
        let (x, v) = golden_section_max(|x| -(x - 0.3).powi(2) + 2.0, -1.0, 2.0, 80);
        assert!((x - 0.3).abs() < 1e-7 && (v - 2.0).abs() < 1e-14, "{x} {v}");
        // A kink is fine too: golden section needs no derivative.
        let (x, _) = golden_section_max(|x| -(x - 1.25).abs(), 0.0, 3.0, 80);
        assert!((x - 1.25).abs() < 1e-12);
    }

    #[test]
    fn midpoint_search_finds_the_peak_and_keeps_its_conventions() {
        let x = golden_section_midpoint(|x| -(x - 0.3).powi(2) + 2.0, -1.0, 2.0, 80);
        assert!((x - 0.3).abs() < 1e-7, "{x}");
        let x = golden_section_midpoint(|x| -(x - 1.25).abs(), 0.0, 3.0, 80);
        assert!((x - 1.25).abs() < 1e-12, "{x}");
        // Ties and NaN keep the right part, so a flat function ends at the right end; the
        // point-carrying search keeps the left part on ties and ends at the left end.
        assert!(golden_section_midpoint(|_| 1.0, 0.0, 1.0, 60) > 1.0 - 1e-9);
        assert!(golden_section_midpoint(|_| f64::NAN, 0.0, 1.0, 60) > 1.0 - 1e-9);
        assert!(golden_section_max(|_| 1.0, 0.0, 1.0, 60).0 < 1e-9);
        // Bit for bit the loop it stands for: both points from the bracket every step.
        let r = (5f64.sqrt() - 1.0) / 2.0;
        let reference = |f: &dyn Fn(f64) -> f64, mut a: f64, mut b: f64, iters: usize| {
            for _ in 0..iters {
                let (c, d) = (b - r * (b - a), a + r * (b - a));
                if f(c) > f(d) {
                    b = d;
                } else {
                    a = c;
                }
            }
            0.5 * (a + b)
        };
        let plateau = |x: f64| (-(x - 0.7).powi(2)).max(-0.01);
        type Case<'a> = (&'a dyn Fn(f64) -> f64, f64, f64, usize);
        let cases: [Case; 4] = [
            (&|x: f64| (3.0 * x).sin(), 0.0, 1.5, 80),
            (&|x: f64| -(x.exp() - 2.0).abs(), -13.8, 0.0, 80),
            (&plateau, 0.0, 1.0, 100),
            (&|x: f64| x.ln(), 0.1, 0.2, 5),
        ];
        for (f, a, b, iters) in cases {
            assert_eq!(golden_section_midpoint(f, a, b, iters).to_bits(), reference(f, a, b, iters).to_bits());
        }
    }

    #[test]
    fn bisect_finds_sqrt_two() {
        assert_abs_diff_eq!(bisect(|x| x * x - 2.0, 0.0, 2.0, 1e-14).unwrap(), 2f64.sqrt(), epsilon = 1e-13);
        assert!(bisect(|x| x * x + 1.0, 0.0, 2.0, 1e-14).is_err());
    }
}
