//! Attack hunting: the searches reach the proven bounds and never exceed them.

use qkd_audit::protocol::Protocol;
use qkd_audit::quantum::measures::binary_entropy;
use qkd_audit::search::game::hunt_game;
use qkd_audit::search::hunt::{bound, hunt, hunt_each, HuntOptions, Objective};
use std::process::Command;

fn opts(objective: Objective, protocol: Protocol) -> HuntOptions {
    HuntOptions { protocol, objective, eve_dim: 4, starts: 8, seed: 11, max_iters: 100 }
}

#[test]
fn holevo_hunt_reaches_the_collective_bound_and_never_exceeds_it() {
    // BB84, d_E = 4: the optimal collective attack leaves Eve h(Q) (Shor & Preskill 2000;
    // REFERENCES.md §5 [N]).
    for p in hunt(&opts(Objective::Holevo, Protocol::Bb84), &[0.02, 0.05, 0.10]).unwrap() {
        assert!((p.bound - binary_entropy(p.q)).abs() < 1e-15);
        assert!(p.value >= p.bound - 1e-3, "Q = {}: {} vs {}", p.q, p.value, p.bound);
        assert!(p.value <= p.bound + 1e-9 && p.value <= p.bound_at_attack + 1e-9, "Q = {}: {} exceeds {}", p.q, p.value, p.bound);
        assert!(p.eval.qber_z <= p.q + 1e-12 && p.eval.qber_x <= p.q + 1e-12);
    }
}

#[test]
fn accessible_hunt_reaches_the_optimal_individual_attack_and_never_exceeds_it() {
    // Fuchs, Gisin, Griffiths, Niu, Peres (PRA 56, 1163, 1997): 1 − h(½ + √(Q(1−Q))).
    for p in hunt(&opts(Objective::Accessible, Protocol::Bb84), &[0.02, 0.05, 0.10]).unwrap() {
        assert!(p.value >= p.bound - 1e-3, "Q = {}: {} vs {}", p.q, p.value, p.bound);
        assert!(p.value <= p.bound + 1e-9, "Q = {}: {} exceeds {}", p.q, p.value, p.bound);
    }
}

#[test]
fn six_state_holevo_hunt_approaches_the_six_state_bound() {
    let p = &hunt(&opts(Objective::Holevo, Protocol::SixState), &[0.05]).unwrap()[0];
    assert!((p.bound - bound(Objective::Holevo, Protocol::SixState, 0.05).unwrap()).abs() < 1e-15);
    assert!(p.value >= p.bound - 1e-3 && p.value <= p.bound + 1e-9, "{} vs {}", p.value, p.bound);
    assert!(p.eval.qber_y <= 0.05 + 1e-12);
}

#[test]
fn guessing_game_hunt_reaches_the_monogamy_bound() {
    // Tomamichel, Fehr, Kaniewski, Wehner (NJP 15, 103002, 2013): (½ + 1/(2√2))ⁿ.
    for n in [1, 2] {
        let r = hunt_game(n, 2, 2, 6, 3, 300).unwrap();
        assert!((r.value - r.bound).abs() < 1e-6, "n = {n}: {} vs {}", r.value, r.bound);
        assert!(r.value <= r.bound + 1e-9, "n = {n}: {} exceeds {}", r.value, r.bound);
    }
}

#[test]
fn saved_attacks_reproduce_their_objective_under_eval() {
    let dir = tempfile::tempdir().unwrap();
    let bin = env!("CARGO_BIN_EXE_qkd-audit");
    let out = Command::new(bin)
        .args(["hunt", "--objective", "guess", "--q", "0.05", "--starts", "4", "--out-dir", "h"])
        .current_dir(dir.path())
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(0), "{}", String::from_utf8_lossy(&out.stderr));
    let csv = std::fs::read_to_string(dir.path().join("h/hunt.csv")).unwrap();
    let mut rdr = csv::Reader::from_reader(csv.as_bytes());
    let h = rdr.headers().unwrap().clone();
    let row = rdr.records().next().unwrap().unwrap();
    let value: f64 = row[h.iter().position(|x| x == "value").unwrap()].parse().unwrap();
    let file = row[h.iter().position(|x| x == "attack_file").unwrap()].to_string();
    let eval = Command::new(bin).args(["eval", "--attack-file", &format!("h/{file}"), "--json"]).current_dir(dir.path()).output().unwrap();
    assert_eq!(eval.status.code(), Some(0), "{}", String::from_utf8_lossy(&eval.stderr));
    let v: serde_json::Value = serde_json::from_slice(&eval.stdout).unwrap();
    assert!((v["p_guess_z"].as_f64().unwrap() - value).abs() < 1e-9);
    // A campaign accepts the saved attack file unchanged.
    std::fs::write(
        dir.path().join("c.toml"),
        format!("name = \"uses-hunted\"\ntrials = 5\n[setup]\nsignals = 100000\n[[attacks]]\nfile = \"h/{file}\"\n"),
    )
    .unwrap();
    let run = Command::new(bin).args(["run", "c.toml", "-q"]).current_dir(dir.path()).output().unwrap();
    assert!(matches!(run.status.code(), Some(0) | Some(1)), "{}", String::from_utf8_lossy(&run.stderr));
    assert!(dir.path().join("results/uses-hunted/attack_vs_bound.csv").exists());
    // The folder is not replaced without --force.
    let again = Command::new(bin)
        .args(["hunt", "--objective", "guess", "--q", "0.05", "--starts", "1", "--out-dir", "h"])
        .current_dir(dir.path())
        .output()
        .unwrap();
    assert_eq!(again.status.code(), Some(2));
}

#[test]
fn an_infeasible_target_keeps_the_other_targets_results() {
    // Regression: `--q 0.05,0` discarded every result because Q = 0 has no feasible start.
    let o = HuntOptions { starts: 2, max_iters: 20, ..opts(Objective::Guess, Protocol::Bb84) };
    let out = hunt_each(&o, &[0.05, 0.0]).unwrap();
    assert!(out[0].is_ok());
    assert!(out[1].as_ref().unwrap_err().message().contains("no start reached a feasible attack"));
    let dir = tempfile::tempdir().unwrap();
    let run = Command::new(env!("CARGO_BIN_EXE_qkd-audit"))
        .args(["hunt", "--objective", "guess", "--q", "0.05,0", "--starts", "2", "--iters", "20", "--out-dir", "h"])
        .current_dir(dir.path())
        .output()
        .unwrap();
    assert_eq!(run.status.code(), Some(0), "{}", String::from_utf8_lossy(&run.stderr));
    let csv = std::fs::read_to_string(dir.path().join("h/hunt.csv")).unwrap();
    assert_eq!(csv.lines().count(), 3, "{csv}");
    assert!(csv.contains("none: no start reached a feasible attack") && dir.path().join("h/attack_q0.05.toml").exists());
}
