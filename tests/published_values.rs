//! Published and independently derived check values. Each test names its source; the
//! provenance tags of ../shared/REFERENCES.md are repeated as [V] (checked against the
//! source), [N] (recomputed from the stated formula) or [M] (from memory).

use approx::assert_abs_diff_eq;
use qkd_audit::attack::{Attack, Value};
use qkd_audit::exact::bounds::{bb84_threshold, fggnp_information, individual_threshold, six_state_rate, six_state_threshold};
use qkd_audit::exact::eval::{bob_fidelity, evaluate, eve_clone_fidelity, EvalOptions};
use qkd_audit::protocol::{Basis, Protocol};
use qkd_audit::quantum::measures::binary_entropy;
use qkd_audit::quantum::state::Ket;
use std::collections::BTreeMap;

fn attack(family: &str, params: &[(&str, Value)]) -> Attack {
    let given: BTreeMap<String, Value> = params.iter().map(|(k, v)| (k.to_string(), v.clone())).collect();
    Attack::builtin(family, &given).unwrap()
}

fn num(x: f64) -> Value {
    Value::Num(x)
}

fn text(s: &str) -> Value {
    Value::Text(s.into())
}

#[test]
fn bb84_zero_rate_threshold() {
    // 0.1100278644: Kern & Renes, QIC 8, 756 (2008), arXiv:0712.1494, introduction: 11.0028 %
    // for BB84 (Shor–Preskill) [V]; digits recomputed [N].
    assert_abs_diff_eq!(bb84_threshold(1.0).unwrap(), 0.1100278644, epsilon = 1e-9);
    // With f = 1.22 and 1.16: REFERENCES.md §1 [N].
    assert_abs_diff_eq!(bb84_threshold(1.22).unwrap(), 0.0942351660, epsilon = 1e-8);
    assert_abs_diff_eq!(bb84_threshold(1.16).unwrap(), 0.0981060381, epsilon = 1e-8);
}

#[test]
fn six_state_zero_rate_threshold_and_rate() {
    // 0.1261930833: Kern & Renes 2008 (12.6193 %) and Kato & Tamaki, arXiv:1008.4663 (12.619 %)
    // [V]; H. Lo, QIC 1, 81 (2001); digits recomputed [N].
    assert_abs_diff_eq!(six_state_threshold(1.0).unwrap(), 0.1261930833, epsilon = 1e-9);
    // r₆(0.05) = 0.4968162683, REFERENCES.md §2 [N].
    assert_abs_diff_eq!(six_state_rate(0.05, 0.05, 0.05, 1.0).unwrap(), 0.4968162683, epsilon = 1e-9);
}

#[test]
fn full_intercept_resend() {
    // QBER 25 %, guessing probability 0.75, I_AE = 0.5: Bennett et al., J. Cryptology 5, 3
    // (1992); Gisin et al., RMP 74, 145 (2002) §VI [M]; recomputed [N].
    let e = evaluate(&attack("intercept-resend", &[]), &EvalOptions::full(Protocol::Bb84)).unwrap();
    assert_abs_diff_eq!(e.qber_z, 0.25, epsilon = 1e-12);
    assert_abs_diff_eq!(e.qber_x, 0.25, epsilon = 1e-12);
    assert_abs_diff_eq!(e.p_guess_z, 0.75, epsilon = 1e-12);
    assert_abs_diff_eq!(e.accessible_z.unwrap(), 0.5, epsilon = 1e-9);
    assert_abs_diff_eq!(e.holevo_z, 0.5, epsilon = 1e-12);
}

#[test]
fn partial_intercept_resend() {
    // Fraction p: QBER p/4, p_guess ½ + p/4, I_AE = p/2 (REFERENCES.md §3 [N, M]).
    for &p in &[0.0, 0.1, 0.37, 0.5, 0.9] {
        let e = evaluate(&attack("intercept-resend", &[("fraction", num(p))]), &EvalOptions::full(Protocol::Bb84)).unwrap();
        assert_abs_diff_eq!(e.qber_z, p / 4.0, epsilon = 1e-12);
        assert_abs_diff_eq!(e.qber_x, p / 4.0, epsilon = 1e-12);
        assert_abs_diff_eq!(e.p_guess_z, 0.5 + p / 4.0, epsilon = 1e-12);
        assert_abs_diff_eq!(e.accessible_z.unwrap(), p / 2.0, epsilon = 1e-9);
    }
}

#[test]
fn intercept_resend_over_the_six_state_bases() {
    // Eve measures in Z, X or Y with probability 1/3 each: QBER 1/3 in every basis (Bruß,
    // "Optimal eavesdropping in quantum cryptography with six states", PRL 81, 3018, 1998).
    // Derived here [N]: she holds the key bit exactly when she chose Z (1/3) and nothing
    // otherwise, so p_guess = 1/3 + (2/3)(1/2) = 2/3 and her information is 1/3 bit.
    let a = attack("intercept-resend", &[("basis", text("random-zxy"))]);
    for protocol in [Protocol::Bb84, Protocol::SixState] {
        let e = evaluate(&a, &EvalOptions::full(protocol)).unwrap();
        for q in [e.qber_z, e.qber_x, e.qber_y] {
            assert_abs_diff_eq!(q, 1.0 / 3.0, epsilon = 1e-12);
        }
        assert_abs_diff_eq!(e.p_guess_z, 2.0 / 3.0, epsilon = 1e-12);
        assert_abs_diff_eq!(e.holevo_z, 1.0 / 3.0, epsilon = 1e-12);
        assert_abs_diff_eq!(e.accessible_z.unwrap(), 1.0 / 3.0, epsilon = 1e-9);
    }
}

#[test]
fn breidbart_intercept_resend() {
    // QBER 0.25 in both bases, p_guess cos²(π/8) = 0.8535533906, I = 0.3991239633:
    // Bennett et al. 1992 [M]; REFERENCES.md §3 [N].
    let e = evaluate(&attack("intercept-resend", &[("basis", text("breidbart"))]), &EvalOptions::full(Protocol::Bb84)).unwrap();
    assert_abs_diff_eq!(e.qber_z, 0.25, epsilon = 1e-12);
    assert_abs_diff_eq!(e.qber_x, 0.25, epsilon = 1e-12);
    assert_abs_diff_eq!(e.p_guess_z, 0.8535533906, epsilon = 1e-9);
    assert_abs_diff_eq!(e.accessible_z.unwrap(), 0.3991239633, epsilon = 1e-9);
}

#[test]
fn universal_cloner_at_symmetric_point() {
    // QBER 1/6 and clone fidelity 5/6 for every input: Bužek & Hillery, PRA 54, 1844 (1996)
    // [V: abstract; value M]; Cerf, PRL 84, 4497 (2000). Eve's Helstrom 5/6, I = 0.3499775784,
    // χ = 0.557496: REFERENCES.md §6 [N].
    let a = attack("cloner", &[("kind", text("universal"))]);
    let e = evaluate(&a, &EvalOptions::full(Protocol::Bb84)).unwrap();
    assert_abs_diff_eq!(e.qber_z, 1.0 / 6.0, epsilon = 1e-12);
    assert_abs_diff_eq!(e.qber_x, 1.0 / 6.0, epsilon = 1e-12);
    assert_abs_diff_eq!(e.qber_y, 1.0 / 6.0, epsilon = 1e-12);
    assert_abs_diff_eq!(e.p_guess_z, 5.0 / 6.0, epsilon = 1e-9);
    assert_abs_diff_eq!(1.0 - binary_entropy(e.p_guess_z), 0.3499775784, epsilon = 1e-9);
    let acc = e.accessible_z.unwrap();
    assert!(acc >= 0.3499775784 - 1e-9 && acc <= e.holevo_z + 1e-9, "accessible {acc}");
    assert_abs_diff_eq!(e.holevo_z, 0.557496, epsilon = 1e-6);
    let mut rng = <rand_chacha::ChaCha8Rng as rand::SeedableRng>::seed_from_u64(5);
    for _ in 0..50 {
        let psi = Ket::haar(2, &mut rng);
        assert_abs_diff_eq!(eve_clone_fidelity(&a, psi.vector()), 5.0 / 6.0, epsilon = 1e-10);
        assert_abs_diff_eq!(bob_fidelity(&a, psi.vector()), 5.0 / 6.0, epsilon = 1e-10);
    }
}

#[test]
fn phase_covariant_cloner_at_symmetric_point() {
    // QBER 0.1464466094 and clone fidelity ½ + 1/√8 on the x–z great circle: Bruß, Cinchetti,
    // D'Ariano, Macchiavello, PRA 62, 012302 (2000) [M]; REFERENCES.md §6 [N].
    let a = attack("cloner", &[("kind", text("phase-covariant"))]);
    let e = evaluate(&a, &EvalOptions::full(Protocol::Bb84)).unwrap();
    assert_abs_diff_eq!(e.qber_z, 0.1464466094, epsilon = 1e-9);
    assert_abs_diff_eq!(e.qber_x, 0.1464466094, epsilon = 1e-9);
    let f = 0.5 + 1.0 / 8f64.sqrt();
    for t in 0..12 {
        let angle = std::f64::consts::PI * t as f64 / 12.0;
        let psi = qkd_audit::numeric::linalg::CVec::from_vec(vec![
            qkd_audit::numeric::linalg::c(angle.cos(), 0.0),
            qkd_audit::numeric::linalg::c(angle.sin(), 0.0),
        ]);
        assert_abs_diff_eq!(eve_clone_fidelity(&a, &psi), f, epsilon = 1e-10);
        assert_abs_diff_eq!(bob_fidelity(&a, &psi), f, epsilon = 1e-10);
    }
    // The optimal collective attack: margin 0 for every D (REFERENCES.md §5 [N]).
    assert_abs_diff_eq!(e.margin, 0.0, epsilon = 1e-10);
}

#[test]
fn optimal_collective_attack_conditional_entropy() {
    // H(X|E) = 1 − h(D) for the phase-covariant Pauli attack; χ(A:E) = h(D).
    // REFERENCES.md §5 table [N]: H(X|E)(0.05) = 0.7136030429, χ(0.10) = 0.4689955936;
    // Shor & Preskill, PRL 85, 441 (2000) for the saturated rate.
    for &d in &[0.0, 0.01, 0.05, 0.1, 0.1100279, 0.2, 0.5] {
        let e = evaluate(&attack("cloner", &[("kind", text("phase-covariant")), ("qber", num(d))]), &EvalOptions::fast(Protocol::Bb84))
            .unwrap();
        assert_abs_diff_eq!(e.h_x_given_e, 1.0 - binary_entropy(d), epsilon = 1e-10);
        assert_abs_diff_eq!(e.margin, 0.0, epsilon = 1e-10);
        assert_abs_diff_eq!(e.attack_rate, e.bound_rate, epsilon = 1e-10);
    }
    let e = evaluate(&attack("cloner", &[("qber", num(0.05))]), &EvalOptions::fast(Protocol::Bb84)).unwrap();
    assert_abs_diff_eq!(e.h_x_given_e, 0.7136030429, epsilon = 1e-8);
    // Per-round guessing probability ½ + √(D(1−D)) = 0.7179449472, H_min = 0.478055 [N].
    assert_abs_diff_eq!(e.p_guess_z, 0.7179449472, epsilon = 1e-8);
    assert_abs_diff_eq!(e.h_min_x_given_e, 0.478055, epsilon = 1e-6);
    let e = evaluate(&attack("cloner", &[("qber", num(0.10))]), &EvalOptions::fast(Protocol::Bb84)).unwrap();
    assert_abs_diff_eq!(e.holevo_z, 0.4689955936, epsilon = 1e-8);
}

#[test]
fn fggnp_optimal_individual_attack_curve() {
    // Fuchs, Gisin, Griffiths, Niu, Peres, PRA 56, 1163 (1997) [V: abstract; formula M]:
    // QBER D in Z and X, p_guess = ½ + √(D(1−D)), accessible = 1 − h(½ + √(D(1−D))),
    // Holevo below h(D). REFERENCES.md §4: I_E(0.10) = 0.2780719051 [N].
    assert_abs_diff_eq!(fggnp_information(0.10), 0.2780719051, epsilon = 1e-9);
    for i in 1..=20 {
        let d = 0.5 * i as f64 / 20.0 - 1e-3;
        let e = evaluate(&attack("entangling-probe", &[("qber", num(d))]), &EvalOptions::full(Protocol::Bb84)).unwrap();
        assert_abs_diff_eq!(e.qber_z, d, epsilon = 1e-12);
        assert_abs_diff_eq!(e.qber_x, d, epsilon = 1e-12);
        assert_abs_diff_eq!(e.p_guess_z, 0.5 + (d * (1.0 - d)).sqrt(), epsilon = 1e-10);
        assert_abs_diff_eq!(e.p_guess_x, 0.5 + (d * (1.0 - d)).sqrt(), epsilon = 1e-10);
        assert_abs_diff_eq!(e.accessible_z.unwrap(), fggnp_information(d), epsilon = 1e-8);
        assert!(e.holevo_z < binary_entropy(d), "Holevo {} not below h(D) at D = {d}", e.holevo_z);
    }
}

#[test]
fn individual_attack_limit() {
    // D_c = (1 − 1/√2)/2 = 0.1464466094 where 1 − h(D) = I_E(D): Fuchs et al. 1997; Gisin et al.
    // RMP 2002 "≈ 15 %" [V]; digits [N].
    assert_abs_diff_eq!(individual_threshold(1.0).unwrap(), 0.1464466094, epsilon = 1e-9);
}

#[test]
fn pauli_channel_qbers() {
    // Q_Z = p_X + p_Y, Q_X = p_Z + p_Y, Q_Y = p_X + p_Z: common practice.
    let e = evaluate(&attack("pauli", &[("px", num(0.1)), ("py", num(0.05)), ("pz", num(0.15))]), &EvalOptions::fast(Protocol::SixState))
        .unwrap();
    assert_abs_diff_eq!(e.qber_z, 0.15, epsilon = 1e-12);
    assert_abs_diff_eq!(e.qber_x, 0.20, epsilon = 1e-12);
    assert_abs_diff_eq!(e.qber_y, 0.25, epsilon = 1e-12);
    assert_abs_diff_eq!(e.pauli_weights[0], 0.7, epsilon = 1e-12);
    // Six-state symmetric attack: H(X|E) at Q = 5 % is 0.783213, REFERENCES.md §2 [N].
    let q = 0.05;
    let e = evaluate(
        &attack("pauli", &[("px", num(q / 2.0)), ("py", num(q / 2.0)), ("pz", num(q / 2.0))]),
        &EvalOptions::fast(Protocol::SixState),
    )
    .unwrap();
    assert_abs_diff_eq!(e.h_x_given_e, 0.783213, epsilon = 1e-6);
    assert_abs_diff_eq!(e.margin, 0.0, epsilon = 1e-10);
    assert_abs_diff_eq!(e.bound_rate, 0.4968162683, epsilon = 1e-9);
}

#[test]
fn game_value_of_breidbart_measurement_reaches_the_bound() {
    // Eve measuring in the Breidbart basis and Bob perfect would win with cos²(π/8); with
    // resending, Bob is disturbed. The guessing-game constant ½ + 1/(2√2) = 0.8535533906:
    // Tomamichel, Fehr, Kaniewski, Wehner, NJP 15, 103002 (2013) [M theorem; N digits].
    assert_abs_diff_eq!(qkd_audit::exact::bounds::game_bound(), 0.8535533906, epsilon = 1e-10);
    let e = evaluate(&attack("intercept-resend", &[("basis", text("breidbart"))]), &EvalOptions::fast(Protocol::Bb84)).unwrap();
    assert!(e.game_win <= qkd_audit::exact::bounds::game_bound() + 1e-12);
    let _ = Basis::Z;
}
