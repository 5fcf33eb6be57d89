//! A rule program written in Rust: the test double of `tests/rule_files.rs` and of the
//! `rules` benchmark (protocol: `docs/rule-programs.md`). `cargo test` builds it.
//!
//! Modes (`--mode <mode>`, default `finite-uncertainty`):
//! - `finite-uncertainty`: answers the built-in rule's length, from the block's fields;
//! - `zero`: answers 0 key bits for every block (the cheapest possible program);
//! - failures at trial T of any point (`--at T`): `crash` (exits with status 3), `hang`
//!   (stops answering; both after writing the answers before T), `garbage` (writes a line that is not JSON), `nan` (answers NaN),
//!   `swap` (answers two blocks in the wrong order), `short` (one answer too few in the
//!   batch, then exits), `extra` (one answer too many after the last batch), `error` (an
//!   error object), `oversize` (answers n + 1 key bits, one more than the block has, and
//!   lets the setup's threshold decide the abort);
//! - `--stderr` writes one line to stderr per batch; `--version` prints a version.

use qkd_audit::audit::rules::{BlockStats, KeyRule, RuleParams};
use serde::Deserialize;
use std::io::{BufRead, Write};

#[derive(Deserialize)]
struct Request {
    version: u64,
    blocks: Vec<Block>,
}

#[derive(Deserialize)]
struct Block {
    point: u64,
    trial: u64,
    n: u64,
    k: u64,
    m: u64,
    e_z: Option<f64>,
    e_x: Option<f64>,
    abort_qber: f64,
    f: f64,
    eps_sec: f64,
    eps_cor: f64,
}

fn main() {
    let args: Vec<String> = std::env::args().skip(1).collect();
    if args.iter().any(|a| a == "--version") {
        println!("rule_double 1.0");
        return;
    }
    let value = |flag: &str| args.iter().position(|a| a == flag).and_then(|i| args.get(i + 1)).cloned();
    let mode = value("--mode").unwrap_or_else(|| "finite-uncertainty".into());
    let at: u64 = value("--at").and_then(|v| v.parse().ok()).unwrap_or(u64::MAX);
    let to_stderr = args.iter().any(|a| a == "--stderr");
    let stdin = std::io::stdin();
    let mut out = std::io::BufWriter::new(std::io::stdout().lock());
    for line in stdin.lock().lines() {
        let line = line.expect("stdin");
        let req: Request = serde_json::from_str(&line).expect("a request");
        assert_eq!(req.version, 1);
        if to_stderr {
            eprintln!("batch of {} blocks", req.blocks.len());
        }
        let mut answers: Vec<String> = Vec::with_capacity(req.blocks.len());
        for b in &req.blocks {
            if b.trial == at {
                match mode.as_str() {
                    "crash" => {
                        answers.iter().for_each(|a| writeln!(out, "{a}").unwrap());
                        out.flush().unwrap();
                        eprintln!("rule_double: crashing as asked");
                        std::process::exit(3);
                    }
                    "hang" => {
                        answers.iter().for_each(|a| writeln!(out, "{a}").unwrap());
                        out.flush().unwrap();
                        std::thread::sleep(std::time::Duration::from_secs(3600));
                    }
                    "garbage" => answers.push("this is not json".into()),
                    "nan" => answers.push(format!("{{\"point\":{},\"trial\":{},\"key_bits\":NaN}}", b.point, b.trial)),
                    "error" => answers.push("{\"error\":{\"message\":\"cannot size the key\"}}".into()),
                    _ => {}
                }
                if ["garbage", "nan", "error"].contains(&mode.as_str()) {
                    continue;
                }
            }
            let key_bits = match mode.as_str() {
                "zero" => 0,
                "oversize" if b.trial == at => b.n + 1,
                _ => {
                    let obs = BlockStats {
                        n: b.n,
                        k: b.k,
                        m: b.m,
                        e_z: b.e_z.unwrap_or(f64::NAN),
                        e_x: b.e_x.unwrap_or(f64::NAN),
                        ..Default::default()
                    };
                    let params = RuleParams {
                        abort_qber: b.abort_qber,
                        ec_efficiency: b.f,
                        epsilon_sec: b.eps_sec,
                        epsilon_cor: b.eps_cor,
                        mismatch: 1.0,
                        blinding_catch: 1.0,
                    };
                    KeyRule::FiniteUncertainty.length(&obs, &params).length
                }
            };
            answers.push(format!("{{\"point\":{},\"trial\":{},\"key_bits\":{key_bits},\"note\":\"n={}\"}}", b.point, b.trial, b.n));
        }
        if mode == "swap" && answers.len() >= 2 && req.blocks.iter().any(|b| b.trial == at) {
            answers.swap(0, 1);
        }
        if mode == "short" && req.blocks.iter().any(|b| b.trial == at) {
            answers.pop();
            for a in &answers {
                writeln!(out, "{a}").unwrap();
            }
            out.flush().unwrap();
            return;
        }
        for a in &answers {
            writeln!(out, "{a}").unwrap();
        }
        out.flush().unwrap();
    }
    if mode == "extra" {
        writeln!(out, "{{\"point\":0,\"trial\":0,\"key_bits\":1}}").unwrap();
        out.flush().unwrap();
    }
}
