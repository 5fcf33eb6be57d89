//! The exact evaluation of an attack on Bob's detection device: the attack's channel into
//! Bob's extended input space ([`crate::attack::device`]) followed by the device's POVM
//! ([`crate::protocol::detector::DetectorFlaws`]), conditioned on Bob's clicks.
//!
//! # What is computed
//! For Alice's basis α, Bob's basis β, Alice's bit x and Bob's click b, Eve's unnormalised
//! state is `σ(α, β, x, b) = Tr_B[(F_{β,b} ⊗ 1) K|ψ_{α,x}><ψ_{α,x}|K†]` summed over the Kraus
//! operators K, and the alarm probability is `Tr[(A ⊗ 1) ρ]`. Bob announces which rounds he
//! detected and Eve learns the basis after sifting, so every reported quantity is
//! conditioned on a click in a sifted round of basis θ (probability
//! `P_θ = ½ Σ_{x,b} Tr σ(θ, θ, x, b)`):
//! - `qber_θ = ½ Σ_x Tr σ(θ, θ, x, 1 − x) / P_θ`;
//! - Eve's ensemble: `τ_x = ½ Σ_b σ(θ, θ, x, b) / P_θ` with priors `p_x = Tr τ_x` (uniform
//!   for every built-in device attack, by symmetry, but not assumed);
//! - `holevo_θ = S(τ₀ + τ₁) − Σ_x p_x S(τ_x / p_x)`, `h_x_given_e = h(p₀) − holevo_z`,
//!   `p_guess_θ = ½(1 + ‖τ₀ − τ₁‖₁)`, accessible information of the same ensemble;
//! - the game value with `s_x = ½ σ(θ, θ, x, x) / P_θ`: `½(Tr s₀ + Tr s₁ + ‖s₀ − s₁‖₁)`;
//! - rates and `margin` exactly as [`crate::exact::eval`] defines them, except that under
//!   the six-state protocol QBERs without Pauli weights (a flawed detector need not act as
//!   a qubit channel) get the BB84 bound, which six-state data satisfy too. The proven
//!   inequalities of that module are *not* checked: they assume ideal detectors, and a
//!   negative `margin` here is the finding (the flaw breaks the uncertainty relation the
//!   flaw-blind rules rest on), not a numerical failure.
//!
//! An attack may never click Bob's Y measurement (blinding with Z and X triggers only); the
//! Y columns then read as for a fair coin (QBER ½, no information) and the point's note says
//! so: BB84 does not use Y, and a six-state system sees no sifted Y detections at all. Any
//! other basis without detections is an error.
//!
//! The campaign's [`SignalModel`] is the distribution of one *detected* round: basis pair
//! (α, β) with weight `p_α p_β P(click | α, β)` and the cells conditioned on a click, with
//! Eve's Helstrom measurement for Alice's basis on the click-conditioned states. Eve hides
//! the drop in Bob's detection rate by replacing the line with a less lossy one, so a
//! block's `signals` count detected rounds; the detection ratio is reported in the point's
//! note. The alarm odds (alarms per click) let the sampler abort blocks in which the
//! blinding monitor fired.
//!
//! # Closed forms (derived here, checked in `tests/devices.rs`)
//! Two-value mismatch η, the full attack (`fraction = 1`), BB84, Bob in the sifted basis.
//! - Time shift: at the early instant a Z or X photon of bit x clicks with efficiency 1
//!   (x = 0) or η (x = 1). Given a click, P(x = 0 | early) = 1/(1 + η): no errors, the
//!   detection ratio is (1 + η)/2 and Eve, who knows the instant, has H(X|E) = h(1/(1 + η)).
//! - Faked states: Eve measures in basis β (probability ½ each), finds b, sends the bit b̄ in
//!   the other basis β̄ at the instant that suppresses detector b̄ (efficiency η; detector b
//!   keeps 1). If Bob's basis is β (Alice's basis is β too in a sifted round, so b = x), the
//!   faked state is unbiased in β: click x with ½, click x̄ with η/2. If Bob's basis is β̄
//!   (Eve guessed Alice's basis wrong, her b is a fair coin against x), the faked state is
//!   the β̄-eigenstate of b̄: click b̄ with η, an error half of the time. Per sifted round,
//!   clicks: ½(1 + η)/2 + ½η = (1 + 3η)/4; errors: ½·η/2 + ½·η/2 = η/2; so
//!   **QBER = 2η/(1 + 3η)**, as the project's reference sheet states (its §13 gives the same
//!   derivation; the paper's own expression was not available to compare). Eve knows x
//!   exactly on the first kind of click, a fraction (1 + η)/(1 + 3η), and nothing of x on
//!   the second kind (she knows Bob's bit there, which is x only half the time): H(X|E) =
//!   2η/(1 + 3η) = QBER. Below the 11.0028 % of the BB84 zero-rate point when
//!   η < 0.110028/(2 − 3·0.110028) = 0.06589.
//! - Random swapping: both bits are registered with ½(1 + η) at each instant. The time shift
//!   then gives no information; faked states give QBER ½.
//! - Blinding with catch probability c on a fraction f of the periods: a blinded period
//!   clicks only when Bob's basis equals Eve's (½), never wrongly, and the monitor fires with
//!   probability c. Of the clicks in a sifted round, a share f(1 − c)/2 / (f(1 − c)/2 + 1 − f)
//!   is controlled and known to Eve; the rest pass untouched.

use crate::attack::device::DeviceAttack;
use crate::error::{Error, ErrorKind, Result};
use crate::exact::bounds::{six_state_entropy, six_state_weights};
use crate::exact::eval::{accessible_pair, check_no_nan, clamp_named, snap, EvalOptions, Evaluation, BOUND_SLACK, ROUNDING_SLACK};
use crate::exact::signal::{cell, SignalModel};
use crate::numeric::linalg::{c, hermitian_eigen, CMat};
use crate::protocol::detector::{DetectorFlaws, BOB_DIM};
use crate::protocol::{Basis, Protocol};
use crate::quantum::measures::{binary_entropy, mutual_information, trace_norm, von_neumann_entropy};

/// Below this probability of a click in a sifted round the attack leaves nothing to judge:
/// the evaluation is an error rather than a ratio of rounding noise.
pub const MIN_SIFTED_DETECTION: f64 = 1e-12;

/// A device attack's exact quantities and the model a campaign samples.
#[derive(Clone, Debug)]
pub struct DevicePoint {
    /// The quantities of [`crate::exact::eval::QUANTITIES`], per detected sifted round.
    pub evaluation: Evaluation,
    /// The distribution of one detected round.
    pub model: SignalModel,
    /// Bob's detection probability per signal relative to the honest device (1 = unchanged).
    pub detection_ratio: f64,
    /// Monitor alarms per detected round.
    pub alarm_odds: f64,
    /// A remark for the report (the detection drop Eve must hide, the alarm rate).
    pub note: String,
}

/// Eve's unnormalised states `σ[x][b]` and the alarm probabilities `alarm[x]` for one pair
/// of Alice's and Bob's bases.
type PairStates = ([[CMat; 2]; 2], [f64; 2]);

/// The [`PairStates`] for Alice's basis `alice` and Bob's basis `bob`.
fn conditional(attack: &DeviceAttack, flaws: &DetectorFlaws, alice: Basis, bob: Basis) -> PairStates {
    let d = attack.eve_dim;
    let clicks = [flaws.click_operator(bob, 0).transpose(), flaws.click_operator(bob, 1).transpose()];
    let alarm_op = flaws.alarm_operator().transpose();
    let zero = || CMat::zeros(d, d);
    let mut sig = [[zero(), zero()], [zero(), zero()]];
    let mut alarm = [0.0; 2];
    for x in 0..2 {
        let psi = alice.ket(x);
        for k in attack.channel.operators() {
            let v = k * &psi;
            // V[i, e] = v[i·d + e]: Bob's index i, Eve's e.
            let vm = CMat::from_fn(BOB_DIM, d, |i, e| v[i * d + e]);
            let vt = vm.transpose();
            let vc = vm.map(|z| z.conj());
            for b in 0..2 {
                // Tr_B[(F ⊗ 1)|v><v|] = Vᵀ Fᵀ V̄.
                sig[x][b] += &vt * &clicks[b] * &vc;
            }
            alarm[x] += (&vt * &alarm_op * &vc).trace().re;
        }
    }
    (sig, alarm)
}

/// Evaluates `attack` against the device `flaws` for `protocol` with basis probabilities
/// `basis_prob` (in the order of `protocol.bases()`).
pub fn evaluate_device(
    attack: &DeviceAttack,
    flaws: &DetectorFlaws,
    protocol: Protocol,
    basis_prob: &[f64],
    opts: &EvalOptions,
) -> Result<DevicePoint> {
    let label = &attack.label;
    let all = Basis::ALL;
    let states: Vec<Vec<PairStates>> = all.iter().map(|&a| all.iter().map(|&b| conditional(attack, flaws, a, b)).collect()).collect();
    let detect = |a: usize, b: usize| -> f64 {
        let (sig, _) = &states[a][b];
        0.5 * sig.iter().flatten().map(|s| s.trace().re).sum::<f64>()
    };
    // Per sifted basis: (qber, p_guess, holevo, h(X|E), game, ensemble, joint, priors).
    struct Sifted {
        qber: f64,
        p_guess: f64,
        holevo: f64,
        h_x_given_e: f64,
        game: f64,
        priors: [f64; 2],
        ens: [CMat; 2],
        joint: [[f64; 2]; 2],
    }
    let mut sifted = Vec::new();
    let mut y_undetected = false;
    for (i, basis) in all.iter().enumerate() {
        let p = detect(i, i);
        let undetected = p.is_nan() || p <= MIN_SIFTED_DETECTION;
        if undetected && *basis == Basis::Y {
            // An attack that never clicks Bob's Y measurement leaves the Y columns without
            // meaning, reported as for a fair coin (documented above).
            y_undetected = true;
            let half = CMat::identity(attack.eve_dim, attack.eve_dim) * c(1.0 / attack.eve_dim as f64, 0.0);
            sifted.push(Sifted {
                qber: 0.5,
                p_guess: 0.5,
                holevo: 0.0,
                h_x_given_e: 1.0,
                game: 0.5,
                priors: [0.5, 0.5],
                ens: [half.clone(), half],
                joint: [[0.25; 2]; 2],
            });
            continue;
        }
        if undetected {
            return Err(Error::input(format!(
                "attack `{label}`: Bob never detects a sifted {} round under this attack and device; nothing to judge",
                basis.name()
            )));
        }
        let (sig, _) = &states[i][i];
        let scale = c(0.5 / p, 0.0);
        let tau = [(&sig[0][0] + &sig[0][1]) * scale, (&sig[1][0] + &sig[1][1]) * scale];
        let priors = [tau[0].trace().re, tau[1].trace().re];
        let mut joint = [[0.0; 2]; 2];
        for x in 0..2 {
            for b in 0..2 {
                joint[x][b] = clamp_named(|| format!("P(Alice, Bob | click) in basis {}", basis.name()), 0.5 * sig[x][b].trace().re / p)?;
            }
        }
        // Unsnapped (clamped to [0, 1] only): entropies must not see the report's snap.
        let qber = clamp_named(|| format!("qber_{}", basis.name()), joint[0][1] + joint[1][0])?;
        let p_guess = clamp_named(|| format!("p_guess_{}", basis.name()), 0.5 * (1.0 + trace_norm(&(&tau[0] - &tau[1]))))?;
        let s_cond: f64 =
            (0..2).filter(|&x| priors[x] > 0.0).map(|x| priors[x] * von_neumann_entropy(&(&tau[x] * c(1.0 / priors[x], 0.0)))).sum();
        let holevo = (von_neumann_entropy(&(&tau[0] + &tau[1])) - s_cond).clamp(-ROUNDING_SLACK, 1.0 + ROUNDING_SLACK);
        let h_x_given_e = binary_entropy(priors[0].clamp(0.0, 1.0)) - holevo;
        let s = [&sig[0][0] * scale, &sig[1][1] * scale];
        let game = 0.5 * (s[0].trace().re + s[1].trace().re + trace_norm(&(&s[0] - &s[1])));
        let ens = [&tau[0] * c(1.0 / priors[0].max(f64::MIN_POSITIVE), 0.0), &tau[1] * c(1.0 / priors[1].max(f64::MIN_POSITIVE), 0.0)];
        sifted.push(Sifted { qber, p_guess, holevo, h_x_given_e, game, priors, ens, joint });
    }
    let (z, x, y) = (&sifted[0], &sifted[1], &sifted[2]);
    let hz = binary_entropy(z.qber);
    let hx = binary_entropy(x.qber);
    let weights = six_state_weights(x.qber, y.qber, z.qber);
    // A flawed detector need not act as a qubit channel, so the six-state QBERs may have no
    // Pauli weights; the BB84 bound (which six-state data also satisfy) is reported then.
    let qubit_like = weights.iter().all(|w| *w >= -BOUND_SLACK);
    let (bound_rate, margin) = match protocol {
        Protocol::SixState if qubit_like => {
            let h = six_state_entropy(&weights, BOUND_SLACK)?;
            (1.0 - h, z.h_x_given_e - (1.0 - h + hz))
        }
        _ => (1.0 - hx - hz, z.h_x_given_e - (1.0 - hx)),
    };
    let (accessible_z, accessible_x, accessible_converged, accessible_gap) =
        accessible_pair((&z.priors, &z.ens), (&x.priors, &x.ens), opts.accessible.as_ref())?;
    // Reported values snapped within the rounding slack; everything above computed unsnapped.
    let shown = |v: f64| snap(v, 0.0, 1.0);
    let evaluation = Evaluation {
        qber_z: shown(z.qber),
        qber_x: shown(x.qber),
        qber_y: shown(y.qber),
        p_guess_z: shown(z.p_guess),
        p_guess_x: shown(x.p_guess),
        p_guess_y: shown(y.p_guess),
        holevo_z: shown(z.holevo),
        holevo_x: shown(x.holevo),
        holevo_y: shown(y.holevo),
        h_x_given_e: shown(z.h_x_given_e),
        accessible_z,
        accessible_x,
        accessible_converged,
        accessible_gap,
        i_ab: shown(mutual_information(&z.joint)),
        game_win: 0.5 * (z.game + x.game),
        bound_rate,
        attack_rate: z.h_x_given_e - hz,
        individual_rate: accessible_z.map(|a| 1.0 - hz - a),
        margin: snap(margin, 0.0, f64::INFINITY),
        h_min_x_given_e: -z.p_guess.log2(),
        pauli_weights: weights,
        eve_dim: attack.eve_dim,
        protocol,
    };
    check_no_nan(label, &evaluation)?;

    // The campaign's model over the protocol's bases.
    let bases = protocol.bases().to_vec();
    assert_eq!(bases.len(), basis_prob.len(), "one probability per basis");
    let idx = |b: Basis| all.iter().position(|&a| a == b).expect("a basis of Basis::ALL");
    let mut cells = vec![vec![[0.0; 8]; bases.len()]; bases.len()];
    let mut detection = vec![vec![0.0; bases.len()]; bases.len()];
    let (mut p_click, mut p_alarm) = (0.0, 0.0);
    for (ia, &ba) in bases.iter().enumerate() {
        let (sig_aa, _) = &states[idx(ba)][idx(ba)];
        let diff = (&sig_aa[0][0] + &sig_aa[0][1]) - (&sig_aa[1][0] + &sig_aa[1][1]);
        let (vals, vecs) = hermitian_eigen(&diff);
        let d = attack.eve_dim;
        let mut m0 = CMat::zeros(d, d);
        for (i, v) in vals.iter().enumerate() {
            if *v > 0.0 {
                let col = vecs.column(i);
                m0 += col * col.adjoint();
            }
        }
        let povm = [m0.clone(), CMat::identity(d, d) - m0];
        for (ib, &bb) in bases.iter().enumerate() {
            let (sig, alarm) = &states[idx(ba)][idx(bb)];
            let pd = detect(idx(ba), idx(bb));
            detection[ia][ib] = pd;
            p_click += basis_prob[ia] * basis_prob[ib] * pd;
            p_alarm += basis_prob[ia] * basis_prob[ib] * 0.5 * (alarm[0] + alarm[1]);
            if pd <= MIN_SIFTED_DETECTION {
                continue; // weight zero: the pair never shows in a detected round
            }
            for xx in 0..2 {
                for b in 0..2 {
                    for (g, m) in povm.iter().enumerate() {
                        cells[ia][ib][cell(xx, b, g)] = (0.5 * (m * &sig[xx][b]).trace().re / pd).max(0.0);
                    }
                }
            }
            let sum: f64 = cells[ia][ib].iter().sum();
            for p in cells[ia][ib].iter_mut() {
                *p /= sum;
            }
        }
    }
    let alarm_odds = if p_alarm > ROUNDING_SLACK { p_alarm / p_click } else { 0.0 };
    let mut note = Vec::new();
    if p_click < 1.0 - ROUNDING_SLACK {
        note.push(format!(
            "Bob detects {:.4} of the signals the honest device would; Eve can hide this only on a line losing at least {:.2} dB, which she replaces by a less lossy one (signals count detected rounds)",
            p_click,
            -10.0 * p_click.log10()
        ));
    }
    if y_undetected {
        note.push("Bob never detects a sifted Y round (the Y columns read as a fair coin)".to_string());
    }
    if alarm_odds > 0.0 {
        note.push(format!("the blinding monitor fires {alarm_odds:.3e} times per detected signal; any alarm aborts the block"));
    }
    let model = SignalModel { bases, basis_prob: basis_prob.to_vec(), cells, detection: Some(detection), alarm_odds };
    Ok(DevicePoint { evaluation, model, detection_ratio: p_click, alarm_odds, note: note.join("; ") })
}

/// The error a device attack gives where a setup's link cannot carry it.
pub fn unsupported_link(label: &str) -> Error {
    Error::new(
        ErrorKind::Input,
        format!(
            "attack `{label}` attacks Bob's detection device and is evaluated on the single-photon model: \
             the setup needs the default [source] (single photons) and no dark counts or misalignment"
        ),
    )
}
