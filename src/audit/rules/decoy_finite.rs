//! `decoy-finite`: a finite-key decoy-state rule after Lim, Curty, Walenta, Xu, Zbinden,
//! "Concise security bounds for practical decoy-state QKD", PRA 89, 022307 (2014), with
//! three intensities μ₁ (signal) > μ₂ + μ₃, μ₂ > μ₃ ≥ 0. Our key is the signal's Z
//! detections (their X basis); our X detections are their test basis.
//!
//! Derivation as implemented (our own ε accounting; the paper's printed constants were not
//! available to us, REFERENCES.md §16.2, so none is recalled):
//! 1. Hoeffding: for basis B and intensity k, the expected number of detections
//!    `n*_{B,k}` lies in `n_{B,k} ± √(n_B/2 · ln(1/ε_PE))` except with probability ε_PE each;
//!    dividing by the probability `p_k e^{−μ_k}` gives the rescaled `n^±_{B,k}` used in the
//!    decoy inequalities (and the same for errors `m^±`).
//! 2. Decoy inequalities (Lim et al. 2014, with τₙ = Σ_k p_k e^{−μ_k} μ_kⁿ/n!):
//!    `s_{B,0} ≥ τ₀ (μ₂ n⁻_{B,μ₃} − μ₃ n⁺_{B,μ₂})/(μ₂ − μ₃)` (clipped at 0),
//!    `s_{B,1} ≥ τ₁ μ₁ [n⁻_{B,μ₂} − n⁺_{B,μ₃} − (μ₂² − μ₃²)/μ₁² (n⁺_{B,μ₁} − s_{B,0}/τ₀)] / [μ₁(μ₂ − μ₃) − μ₂² + μ₃²]`,
//!    `v_{X,1} ≤ τ₁ (m⁺_{X,μ₂} − m⁻_{X,μ₃})/(μ₂ − μ₃)`.
//! 3. Intensity thinning: each vacuum or single-photon event is assigned to the signal
//!    intensity independently with probability `p_{μ₁} e^{−μ₁} μ₁ⁿ/(n! τₙ)`, so the signal
//!    key holds at least `q·s − √(s/2 · ln(1/ε_PE))` of them (Hoeffding, once per n = 0, 1).
//! 4. Phase error of the signal's single-photon key bits, by random sampling without
//!    replacement from all single-photon events of both bases:
//!    `φ ≤ λ + γ(ε_γ, λ, s_{X,1}, s_{Z,1|μ₁})`, λ = v_{X,1}/s_{X,1},
//!    `γ(ε, λ, c, d) = √((c+d)(1−λ)λ/(c·d·ln 2) · log₂((c+d)/(c·d·(1−λ)λ·ε²)))`,
//!    failing with probability ≤ ε_γ = ε_smooth² (as in the uncertainty-relation chain of
//!    `finite-uncertainty`).
//! 5. The key excludes the m test-sample bits; in the worst case these were single-photon
//!    events first, then vacuum events: `s₁ᵏᵉʸ = s_{Z,1|μ₁} − m`, `s₀ᵏᵉʸ = s_{Z,0|μ₁} − max(0, m − s_{Z,1|μ₁})`.
//! 6. `ℓ = s₀ᵏᵉʸ + s₁ᵏᵉʸ(1 − h(φ)) − leak_EC − 2 log₂(1/(2ε_PA))`.
//!
//! ε budget: 14 estimation events at ε_PE each (12 Hoeffding bounds on counts and errors,
//! 2 thinning bounds), smoothing and privacy amplification:
//! `ε_sec = ε_PA + 2ε_smooth + 14 ε_PE` with ε_PA = ε_sec/4, ε_smooth = ε_sec/8,
//! ε_PE = ε_sec/28.

use super::RuleParams;
use super::{ec_leak_bits, pa_cost_bits, BlockStats, IntensityObs, KeyLength};
use crate::quantum::measures::binary_entropy_capped;

const ASSUMPTIONS: &str = "Poisson source with three intensities, phase randomised; general attacks; finite block with Hoeffding bounds";
const SOURCE: &str = "after Lim, Curty, Walenta, Xu, Zbinden, PRA 89, 022307 (2014); epsilon accounting documented in rules::decoy_finite";

/// The ε split of this rule: (ε_PA, ε_smooth, ε_PE).
pub fn budget(epsilon_sec: f64) -> (f64, f64, f64) {
    (epsilon_sec / 4.0, epsilon_sec / 8.0, epsilon_sec / 28.0)
}

/// γ(ε, λ, c, d) of step 4.
pub fn gamma(eps: f64, lambda: f64, c: f64, d: f64) -> f64 {
    if !(lambda > 0.0 && lambda < 1.0) || c <= 0.0 || d <= 0.0 {
        return if lambda <= 0.0 && c > 0.0 && d > 0.0 { gamma(eps, 1.0 / (c + d), c, d) } else { f64::INFINITY };
    }
    let arg = (c + d) / (c * d * (1.0 - lambda) * lambda * eps * eps);
    ((c + d) * (1.0 - lambda) * lambda / (c * d * std::f64::consts::LN_2) * arg.log2().max(0.0)).sqrt()
}

struct Decoy {
    mu: [f64; 3],
    p: [f64; 3],
    tau0: f64,
    tau1: f64,
}

impl Decoy {
    /// Rescaled Hoeffding bound on intensity k's count (sign +1 upper, −1 lower).
    fn bound(&self, k: usize, count: f64, total: f64, eps: f64, sign: f64) -> f64 {
        (self.mu[k].exp() / self.p[k]) * (count + sign * (total / 2.0 * (1.0 / eps).ln()).sqrt())
    }
    /// (s₀, s₁) lower bounds for one basis from per-intensity detections.
    fn vacuum_single(&self, det: [f64; 3], eps: f64) -> (f64, f64) {
        let total: f64 = det.iter().sum();
        let [m1, m2, m3] = self.mu;
        let s0 =
            (self.tau0 * (m2 * self.bound(2, det[2], total, eps, -1.0) - m3 * self.bound(1, det[1], total, eps, 1.0)) / (m2 - m3)).max(0.0);
        let s1 = self.tau1
            * m1
            * (self.bound(1, det[1], total, eps, -1.0)
                - self.bound(2, det[2], total, eps, 1.0)
                - (m2 * m2 - m3 * m3) / (m1 * m1) * (self.bound(0, det[0], total, eps, 1.0) - s0 / self.tau0))
            / (m1 * (m2 - m3) - m2 * m2 + m3 * m3);
        (s0, s1.max(0.0))
    }
}

/// The rule's length.
pub fn length(obs: &BlockStats, params: &RuleParams) -> KeyLength {
    let Some(l) = obs.intensities else {
        return KeyLength::new(f64::NAN, ASSUMPTIONS, SOURCE);
    };
    let raw = raw_length(obs, &l, params).unwrap_or(f64::NAN);
    KeyLength::new(raw, ASSUMPTIONS, SOURCE)
}

fn raw_length(obs: &BlockStats, l: &IntensityObs, params: &RuleParams) -> Option<f64> {
    if l.count < 3 {
        return None;
    }
    // Order the decoys so that μ₂ > μ₃.
    let (i2, i3) = if l.mu[1] > l.mu[2] { (1, 2) } else { (2, 1) };
    let prob = |i: usize| l.probability[i];
    let d = {
        let mu = [l.mu[0], l.mu[i2], l.mu[i3]];
        let p = [prob(0), prob(i2), prob(i3)];
        // τ₀ and τ₁ (n! = 1 for both).
        let tau = |n: i32| -> f64 { (0..3).map(|k| p[k] * (-mu[k]).exp() * mu[k].powi(n)).sum() };
        Decoy { mu, p, tau0: tau(0), tau1: tau(1) }
    };
    let (eps_pa, eps_smooth, eps_pe) = budget(params.epsilon_sec);
    let pick = |a: [u64; 3]| [a[0] as f64, a[i2] as f64, a[i3] as f64];
    let (s_z0, s_z1) = d.vacuum_single(pick(l.z_detections), eps_pe);
    let (_, s_x1) = d.vacuum_single(pick(l.x_detections), eps_pe);
    let m = pick(l.x_errors);
    let m_total: f64 = m.iter().sum();
    let v_x1 = d.tau1 * (d.bound(1, m[1], m_total, eps_pe, 1.0) - d.bound(2, m[2], m_total, eps_pe, -1.0)) / (d.mu[1] - d.mu[2]);
    // Thinning to the signal intensity.
    let share = |n: i32| d.p[0] * (-d.mu[0]).exp() * d.mu[0].powi(n) / if n == 0 { d.tau0 } else { d.tau1 };
    let thin = |s: f64, q: f64| (q * s - (s / 2.0 * (1.0 / eps_pe).ln()).sqrt()).max(0.0);
    let s0_sig = thin(s_z0, share(0));
    let s1_sig = thin(s_z1, share(1));
    if s1_sig <= 0.0 || s_x1 <= 0.0 {
        return Some(-ec_leak_bits(obs, params));
    }
    // The key is the signal's Z detections outside the test sample of m bits; in the worst
    // case the sample took single-photon events first, then vacuum events.
    let m = obs.m as f64;
    let s1_key = (s1_sig - m).max(0.0);
    let s0_key = (s0_sig - (m - s1_sig).max(0.0)).max(0.0);
    if s1_key <= 0.0 {
        return Some(s0_key - ec_leak_bits(obs, params) - pa_cost_bits(eps_pa));
    }
    let lambda = (v_x1.max(0.0) / s_x1).min(0.5);
    let phi = lambda + gamma(eps_smooth * eps_smooth, lambda, s_x1, s1_key);
    Some(s0_key + s1_key * (1.0 - binary_entropy_capped(phi)) - ec_leak_bits(obs, params) - pa_cost_bits(eps_pa))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn budget_adds_up() {
        let (pa, sm, pe) = budget(1e-10);
        assert!((pa + 2.0 * sm + 14.0 * pe - 1e-10).abs() < 1e-24);
    }

    #[test]
    fn gamma_shrinks_with_more_events() {
        let g1 = gamma(1e-20, 0.02, 1e4, 1e5);
        let g2 = gamma(1e-20, 0.02, 1e6, 1e7);
        assert!(g1 > g2 && g2 > 0.0);
        assert!((g1 / g2 - 10.0).abs() < 2.0, "γ scales like 1/√(events): {g1} vs {g2}");
    }
}
