//! Searches shared by the numerical kernels: golden-section search for a maximum on a
//! bracket, and ([`povm`]) the Riemannian ascents over rank-one POVMs. No physics here;
//! callers bring the function and the bracket or the starting point.

pub mod povm;

pub use povm::{povm_ascent, povm_lbfgs, AscentOptions, PovmObjective};

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

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn finds_the_peak_of_a_smooth_function() {
        let (x, v) = golden_section_max(|x| -(x - 0.3).powi(2) + 2.0, -1.0, 2.0, 80);
        assert!((x - 0.3).abs() < 1e-7 && (v - 2.0).abs() < 1e-14, "{x} {v}");
        // A kink is fine too: golden section needs no derivative.
        let (x, _) = golden_section_max(|x| -(x - 1.25).abs(), 0.0, 3.0, 80);
        assert!((x - 1.25).abs() < 1e-12);
    }
}
