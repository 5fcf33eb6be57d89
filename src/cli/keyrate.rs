//! The `keyrate` subcommand: asymptotic key rate per pulse against distance.

use super::common::{note, write_stdout, Outcome};
use crate::error::{Error, Result};
use std::path::PathBuf;

/// Options of `keyrate`.
#[derive(clap::Args, Debug)]
pub struct KeyrateArgs {
    /// Setup file with a source table (weak-coherent: the weak-pulse rules; single-photon: the
    /// single-photon rate), a channel table (attenuation, dB/km) and a detector table; default: the standard parameter set of Ma, Qi, Zhao, Lo (2005): 0.21 dB/km,
    /// η_Bob = 0.045, Y₀ = 1.7e-6, e_d = 0.033, μ = 0.48, weak decoy ν = 0.05.
    #[arg(long, value_name = "FILE")]
    pub setup: Option<PathBuf>,
    /// First distance, km.
    #[arg(long, default_value_t = 0.0)]
    pub from_km: f64,
    /// Last distance, km.
    #[arg(long, default_value_t = 200.0)]
    pub to_km: f64,
    /// Number of distances.
    #[arg(long, default_value_t = 201)]
    pub steps: usize,
    /// Optimise the signal intensity μ at each distance (otherwise the setup's μ).
    #[arg(long)]
    pub optimize_mu: bool,
    /// Largest signal intensity μ the optimisation searches, photons per pulse (the search
    /// starts at 1e-6). An optimum at this limit is flagged: the rule would take brighter
    /// pulses, and its maximum distance is the limit's, not the rule's.
    #[arg(long, default_value_t = 1.0, value_name = "PHOTONS")]
    pub mu_max: f64,
    /// Error-correction efficiency f (default: the setup's, or 1.22 with the default link).
    #[arg(long, value_name = "F")]
    pub f_ec: Option<f64>,
    /// Sifting factor q: fraction of detections kept (default: with --setup, the chance that
    /// Alice's and Bob's bases match, Σ P(basis)², e.g. 0.82 for P(Z) = 0.9; otherwise ½, for
    /// symmetric BB84).
    #[arg(long)]
    pub sifting: Option<f64>,
    /// Output CSV (default: stdout).
    #[arg(short, long, value_name = "FILE")]
    pub output: Option<PathBuf>,
    /// Also write an SVG plot of rate against distance.
    #[arg(long, value_name = "FILE")]
    pub svg: Option<PathBuf>,
    /// Also write a self-contained HTML page: the figure, each rule's maximum distance and the
    /// table.
    #[arg(long, value_name = "FILE")]
    pub html: Option<PathBuf>,
    /// Replace output files that exist.
    #[arg(long)]
    pub force: bool,
}

/// Runs `qkd-audit keyrate`.
pub fn cmd_keyrate(a: KeyrateArgs) -> Result<Outcome> {
    use crate::exact::keyrate::{at_search_limit, max_distance, optimal_mu, rate_table, RateParams, RateRule, MU_MIN};
    use crate::protocol::optical::Link;
    crate::error::check_range("--from-km", a.from_km, 0.0, 1000.0)?;
    crate::error::check_range("--to-km", a.to_km, a.from_km, 1000.0)?;
    if a.steps == 0 || a.steps > 1_000_000 {
        return Err(Error::input_key("--steps", format!("{} is outside [1, 1000000]", a.steps)));
    }
    // Output problems (an existing file, an unwritable folder, another run) show before the work.
    let svg_target = a.svg.as_deref().map(|o| crate::output::prepare_file(o, a.force)).transpose()?;
    let csv_target = a.output.as_deref().map(|o| crate::output::prepare_file(o, a.force)).transpose()?;
    let html_target = a.html.as_deref().map(|o| crate::output::prepare_file(o, a.force)).transpose()?;
    let (link, f_default, sifting_default) = match &a.setup {
        Some(p) => {
            let s = crate::audit::setup::Setup::load(p)?;
            let matched: f64 = s.basis_probabilities().iter().map(|p| p * p).sum();
            (s.link, s.ec_efficiency, matched)
        }
        None => (Link::reference_parameter_set(), 1.22, 0.5),
    };
    let sifting = a.sifting.unwrap_or(sifting_default);
    crate::error::check_range("--sifting", sifting, 1e-6, 1.0)?;
    if link.attenuation_db_per_km.is_none() {
        return Err(Error::input_key(
            "channel.attenuation_db_per_km",
            "keyrate sweeps distance: give the channel as length_km and attenuation_db_per_km",
        ));
    }
    let f_ec = a.f_ec.unwrap_or(f_default);
    crate::error::check_range("--f-ec", f_ec, 1.0, 3.0)?;
    let ints = link.source.intensities();
    let nu = ints.iter().skip(1).map(|x| x.0).filter(|m| *m > 0.0).fold(f64::NAN, f64::min);
    let mut rules = if ints.is_empty() {
        vec![RateRule::SinglePhoton]
    } else {
        vec![RateRule::NaiveSinglePhoton, RateRule::GllpNoDecoy, RateRule::DecoyIdeal]
    };
    if nu.is_finite() {
        rules.push(RateRule::DecoyVacuumWeak);
    }
    crate::error::check_range("--mu-max", a.mu_max, 1e-3, 100.0)?;
    let params = RateParams { sifting, f_ec, nu: if nu.is_finite() { nu } else { 0.0 }, mu_max: a.mu_max };
    // A single-photon source has no intensity to set or optimise.
    let mu = if a.optimize_mu || ints.is_empty() { None } else { Some(ints[0].0) };
    let distances: Vec<f64> = if a.steps == 1 {
        vec![a.from_km]
    } else {
        (0..a.steps).map(|i| a.from_km + (a.to_km - a.from_km) * i as f64 / (a.steps - 1) as f64).collect()
    };
    let rows = rate_table(&link, &distances, &rules, mu, &params);
    let mut w = csv::Writer::from_writer(Vec::new());
    let io = |e: csv::Error| Error::new(crate::error::ErrorKind::Io, e.to_string());
    w.write_record([
        "distance_km",
        "transmittance",
        "rule",
        "mu_photons_per_pulse",
        "mu_at_search_limit",
        "gain_per_pulse",
        "error_rate",
        "rate_bits_per_pulse",
    ])
    .map_err(io)?;
    for r in &rows {
        w.write_record([
            crate::exact::sweep::fmt_num(r.distance_km),
            crate::exact::sweep::fmt_num(r.transmittance),
            r.rule.name().to_string(),
            crate::exact::sweep::fmt_num(r.mu),
            r.mu_at_search_limit.to_string(),
            crate::exact::sweep::fmt_num(r.gain),
            crate::exact::sweep::fmt_num(r.error_rate),
            crate::exact::sweep::fmt_num(r.rate_bits_per_pulse),
        ])
        .map_err(io)?;
    }
    let csv_text = String::from_utf8(w.into_inner().map_err(|e| Error::input(e.to_string()))?).expect("csv is UTF-8");
    let mut table = format!(
        "maximum distance per rule ({}; f = {f_ec}, q = {}):\n",
        if ints.is_empty() {
            "single photons".to_string()
        } else if a.optimize_mu {
            format!("μ optimised over [{MU_MIN:e}, {}] photons per pulse", a.mu_max)
        } else {
            format!("μ = {}", ints[0].0)
        },
        crate::exact::sweep::fmt_num(sifting)
    );
    for &rule in &rules {
        let d = max_distance(rule, &link, mu, &params)?;
        // Just inside the maximum distance, is the optimum pinned to the top of the range?
        let pinned = match d {
            Some(d) if mu.is_none() && rule != RateRule::SinglePhoton => {
                at_search_limit(optimal_mu(rule, &link.at_distance((d - 1e-3).max(0.0)), &params).0, &params)
            }
            _ => false,
        };
        table.push_str(&format!(
            "  {:<22} {}{}\n",
            rule.name(),
            d.map_or("no key at 0 km".to_string(), |d| format!("{d:.2} km")),
            if pinned {
                format!(" (optimum at the search limit μ = {}: the range sets this distance; raise --mu-max)", a.mu_max)
            } else {
                String::new()
            }
        ));
    }
    let figure = crate::audit::report::plots::keyrate_figure(&rows, &rules);
    if let Some(t) = svg_target {
        t.commit(figure.svg.as_bytes())?;
    }
    if let Some(t) = html_target {
        let page = crate::audit::report::html::keyrate_page(&figure, &table, &csv_text)?;
        t.commit(page.as_bytes())?;
    }
    match csv_target {
        Some(t) => {
            t.commit(csv_text.as_bytes())?;
            write_stdout(&mut std::io::stdout().lock(), &table)?;
        }
        None => {
            write_stdout(&mut std::io::stdout().lock(), &csv_text)?;
            note(table.trim_end());
        }
    }
    Ok(Outcome::Clean)
}
