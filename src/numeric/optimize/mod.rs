//! Searches shared by the numerical kernels: golden-section search for a maximum on a
//! bracket, bisection for a root, and ([`povm`]) the Riemannian ascents over rank-one
//! POVMs. No physics here; callers bring the function and the bracket or the starting
//! point.

pub mod povm;

pub use povm::{povm_ascent, povm_lbfgs, AscentOptions, PovmObjective};

use crate::error::{Error, ErrorKind, Result};

/// Golden-section search for a maximum of `f` on `[a, b]` in `iters` steps (the bracket
/// shrinks by 0.618 per step). Returns `(x, f(x))` of the best interior point visited;
/// for a unimodal `f` it lies within `(b − a)·0.618^iters` of the maximiser.
pub fn golden_section_max(f: impl Fn(f64) -> f64, mut a: f64, mut b: f64, iters: usize) -> (f64, f64) {
    let ratio = 0.5 * (5f64.sqrt() - 1.0);
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
    fn bisect_finds_sqrt_two() {
        assert_abs_diff_eq!(bisect(|x| x * x - 2.0, 0.0, 2.0, 1e-14).unwrap(), 2f64.sqrt(), epsilon = 1e-13);
        assert!(bisect(|x| x * x + 1.0, 0.0, 2.0, 1e-14).is_err());
    }
}
