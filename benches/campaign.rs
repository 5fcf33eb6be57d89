//! Monte Carlo throughput. Targets (issue: finite-key audit campaigns), on 2 cores:
//! count-level ≥ 10⁶ trials/s, flat from 10³ to 10¹² signals per block; per-round ≥ 2.5 × 10⁸
//! signals/s per core; the default campaign in under 10 s. Results are recorded in DEVELOPERS.md.

use criterion::{criterion_group, criterion_main, BenchmarkId, Criterion, Throughput};
use qkd_audit::attack::{Attack, Value};
use qkd_audit::audit::sample::round::RoundSampler;
use qkd_audit::audit::sample::{sample_block, Sampler};
use qkd_audit::audit::setup::Setup;
use qkd_audit::audit::trial::judge;
use qkd_audit::audit::{run, Campaign};
use qkd_audit::exact::signal::SignalModel;
use qkd_audit::numeric::rng::trial_rng;
use qkd_audit::protocol::Protocol;
use rayon::prelude::*;
use std::collections::BTreeMap;

fn cloner() -> Attack {
    let mut g = BTreeMap::new();
    g.insert("qber".to_string(), Value::Num(0.03));
    Attack::builtin("cloner", &g).unwrap()
}

fn count_level(c: &mut Criterion) {
    let attack = cloner();
    let model = SignalModel::new(&attack, Protocol::Bb84, &[0.8, 0.2]);
    let mut group = c.benchmark_group("count-level trials (2 threads, sample + judge)");
    let trials = 20_000u64;
    group.throughput(Throughput::Elements(trials));
    for exp in [3u32, 6, 9, 12] {
        let setup = Setup { signals: 10u64.pow(exp), basis_z_probability: 0.8, ..Setup::default() };
        let ts = |z: u64| setup.test_sample.size(z);
        group.bench_with_input(BenchmarkId::from_parameter(format!("1e{exp} signals")), &setup, |b, setup| {
            b.iter(|| {
                (0..trials)
                    .into_par_iter()
                    .map(|t| {
                        let mut rng = trial_rng(1, 0, t);
                        let counts = sample_block(Sampler::Count, &model, setup.signals, &ts, &mut rng);
                        judge(&counts, setup.key_rule.clone(), &setup.rule_params(), 0.8).length
                    })
                    .sum::<u64>()
            })
        });
    }
    group.finish();
}

fn per_round(c: &mut Criterion) {
    // One core: the target is ≥ 2.5e8 signals/s per core (half of ChaCha8's stream rate).
    let attack = cloner();
    let model = SignalModel::new(&attack, Protocol::Bb84, &[0.5, 0.5]);
    let sampler = RoundSampler::new(&model);
    let mut group = c.benchmark_group("per-round signals (1 thread)");
    let signals = 20_000_000u64;
    group.throughput(Throughput::Elements(signals));
    group.bench_function("1 block of 2e7", |b| b.iter(|| sampler.sample(signals, &|z| z / 10, &mut trial_rng(2, 0, 0), None).sifted[0]));
    // The stream itself, for the ratio.
    group.bench_function("ChaCha8 words, 2e7", |b| {
        use rand::RngCore;
        b.iter(|| {
            let mut rng = trial_rng(2, 0, 0);
            let mut buf = [0u8; 2048];
            let mut x = 0u64;
            for _ in 0..signals / 256 {
                rng.fill_bytes(&mut buf);
                x ^= u64::from(buf[0]);
            }
            x
        })
    });
    group.finish();
}

fn demo_campaign(c: &mut Criterion) {
    let mut group = c.benchmark_group("campaign");
    group.sample_size(10);
    for name in ["decoy", "single-photon"] {
        let campaign = Campaign::demo_named(name).unwrap();
        group.bench_function(format!("built-in demo {name}"), |b| b.iter(|| run(&campaign, &|| {}).unwrap().len()));
    }
    group.finish();
}

fn link_vs_single_photon(c: &mut Criterion) {
    // Trials per second of the weak-coherent sampler against the single-photon one (target:
    // within 2x), both judged once.
    use qkd_audit::attack::pulse::PulseAttack;
    use qkd_audit::exact::pulses::PulseModel;
    let campaign = Campaign::demo_named("decoy").unwrap();
    let setup = campaign.setup.clone();
    let lm = PulseModel::new(&setup.link, Some(&PulseAttack::PhotonNumberSplitting { fraction: 0.5 }), &setup.basis_probabilities());
    let sp = SignalModel::new(&cloner(), Protocol::Bb84, &setup.basis_probabilities());
    let sp_setup =
        Setup { key_rule: qkd_audit::audit::rules::KeyRule::FiniteUncertainty.into(), link: Default::default(), ..setup.clone() };
    let trials = 20_000u64;
    let mut group = c.benchmark_group("trials per second, link vs single photon (2 threads)");
    group.throughput(Throughput::Elements(trials));
    let ts = |z: u64| z / 20;
    group.bench_function("weak-coherent + decoy-finite", |b| {
        b.iter(|| {
            (0..trials)
                .into_par_iter()
                .map(|t| {
                    judge(
                        &qkd_audit::audit::sample::pulses::sample(&lm, setup.signals, &ts, &mut trial_rng(3, 0, t)),
                        setup.key_rule.clone(),
                        &setup.rule_params(),
                        0.5,
                    )
                    .length
                })
                .sum::<u64>()
        })
    });
    group.bench_function("single-photon + finite-uncertainty", |b| {
        b.iter(|| {
            (0..trials)
                .into_par_iter()
                .map(|t| {
                    judge(
                        &sample_block(Sampler::Count, &sp, setup.signals, &ts, &mut trial_rng(3, 0, t)),
                        sp_setup.key_rule.clone(),
                        &sp_setup.rule_params(),
                        0.8,
                    )
                    .length
                })
                .sum::<u64>()
        })
    });
    group.finish();
}

fn keyrate(c: &mut Criterion) {
    use qkd_audit::exact::keyrate::{rate_table, RateParams, RateRule};
    let campaign = Campaign::demo_named("decoy").unwrap();
    let link = campaign.setup.link.clone();
    let distances: Vec<f64> = (0..1000).map(|i| 0.2 * i as f64).collect();
    let p = RateParams { sifting: 0.5, f_ec: 1.22, nu: 0.1, mu_max: 1.0 };
    let mut group = c.benchmark_group("keyrate");
    group.bench_function("1000 distances, 4 rules, mu optimised (2 threads)", |b| {
        b.iter(|| rate_table(&link, &distances, &RateRule::ALL, None, &p).len())
    });
    group.finish();
}

criterion_group! {
    name = benches;
    config = Criterion::default().sample_size(10).measurement_time(std::time::Duration::from_secs(3)).warm_up_time(std::time::Duration::from_millis(500));
    targets = count_level, per_round, demo_campaign, link_vs_single_photon, keyrate
}
criterion_main!(benches);
