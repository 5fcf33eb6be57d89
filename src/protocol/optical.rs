//! Optical links: the source (ideal single photons, or phase-randomised weak coherent
//! pulses with up to two decoy intensities), the channel (fibre or a fixed loss) and Bob's
//! threshold detectors (efficiency, dark counts, misalignment; double clicks get a random
//! bit, so a squashing model to qubits applies). Computes the exact expected statistics
//! per intensity (gains and error rates) in the standard model of Ma, Qi, Zhao and Lo
//! (PRA 72, 012326, 2005), with the first-order forms used there:
//! `Y_n = Y₀ + η_n − Y₀η_n`, `η_n = 1 − (1 − η)ⁿ`, `e_n = (e₀Y₀ + e_d η_n)/Y_n`,
//! `Q_μ = Y₀ + 1 − e^{−ημ}`, `E_μQ_μ = e₀Y₀ + e_d(1 − e^{−ημ})`, e₀ = ½, where η is the
//! overall transmittance (channel × Bob's efficiency) and Y₀ the dark-count probability per
//! gate. No attack or key-length logic lives here.

use crate::error::{check_range, Error};
use crate::input::{number as num, unknown_keys, Problems};
use crate::protocol::detector::DetectorFlaws;
use serde::Serialize;

/// Error rate of a dark count (random bit).
pub const E0: f64 = 0.5;

/// What Alice sends.
#[derive(Clone, Debug, PartialEq, Serialize)]
#[serde(tag = "kind", rename_all = "kebab-case")]
pub enum Source {
    /// One photon per signal.
    SinglePhoton,
    /// Phase-randomised weak coherent pulses (Poisson photon number).
    WeakCoherent {
        /// Signal intensity μ (mean photon number per pulse).
        intensity: f64,
        /// Probability of sending the signal intensity.
        probability: f64,
        /// Decoy intensities with their probabilities (at most two; one may be 0 = vacuum).
        decoys: Vec<(f64, f64)>,
    },
}

/// The photon-number distribution of one kind of pulse.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
#[serde(tag = "kind", rename_all = "kebab-case")]
pub enum Photons {
    /// Exactly one photon.
    Single,
    /// Poisson with this mean (a phase-randomised coherent pulse of intensity μ).
    Poisson {
        /// Mean photon number μ.
        mean: f64,
    },
}

impl Photons {
    /// Probability of `n` photons.
    pub fn probability(self, n: u32) -> f64 {
        match self {
            Photons::Single => f64::from(u8::from(n == 1)),
            Photons::Poisson { mean } => poisson(mean, n),
        }
    }
    /// Mean photon number.
    pub fn mean(self) -> f64 {
        match self {
            Photons::Single => 1.0,
            Photons::Poisson { mean } => mean,
        }
    }
    /// Probability of two or more photons.
    pub fn multi_photon_probability(self) -> f64 {
        match self {
            Photons::Single => 0.0,
            Photons::Poisson { mean } => 1.0 - (1.0 + mean) * (-mean).exp(),
        }
    }
}

impl Source {
    /// The kinds of pulse the source sends (signal first) with their probabilities: one
    /// single-photon setting, or one Poisson setting per intensity.
    pub fn settings(&self) -> Vec<(Photons, f64)> {
        match self {
            Source::SinglePhoton => vec![(Photons::Single, 1.0)],
            Source::WeakCoherent { .. } => self.intensities().into_iter().map(|(mean, p)| (Photons::Poisson { mean }, p)).collect(),
        }
    }

    /// The intensities in order (signal first) with their probabilities; a single-photon
    /// source has none.
    pub fn intensities(&self) -> Vec<(f64, f64)> {
        match self {
            Source::SinglePhoton => Vec::new(),
            Source::WeakCoherent { intensity, probability, decoys } => {
                let mut v = vec![(*intensity, *probability)];
                v.extend(decoys.iter().copied());
                v
            }
        }
    }
}

/// The optical link.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Link {
    /// Source.
    pub source: Source,
    /// Channel loss in dB (fibre length × attenuation, or a fixed loss).
    pub channel_loss_db: f64,
    /// Fibre length in km, when given (for reports).
    pub length_km: Option<f64>,
    /// Fibre attenuation in dB/km, when given.
    pub attenuation_db_per_km: Option<f64>,
    /// Bob's detection efficiency η_Bob.
    pub detector_efficiency: f64,
    /// Dark-count probability per gate Y₀.
    pub dark_count_probability: f64,
    /// Misalignment error e_d: probability that a photon hits the wrong detector.
    pub misalignment: f64,
    /// Implementation flaws of Bob's detectors (efficiency mismatch, blinding) and their
    /// countermeasures; the ideal device by default. Only the device attacks read them.
    #[serde(skip_serializing_if = "DetectorFlaws::is_ideal")]
    pub flaws: DetectorFlaws,
}

impl Default for Link {
    fn default() -> Self {
        Link {
            source: Source::SinglePhoton,
            channel_loss_db: 0.0,
            length_km: None,
            attenuation_db_per_km: None,
            detector_efficiency: 1.0,
            dark_count_probability: 0.0,
            misalignment: 0.0,
            flaws: DetectorFlaws::default(),
        }
    }
}

impl Link {
    /// The standard parameter set used by Ma, Qi, Zhao, Lo (PRA 72, 012326, 2005), taken from
    /// the experiment of Gobby, Yuan, Shields (APL 84, 3762, 2004) [from memory, REFERENCES.md
    /// §9]: 0.21 dB/km, η_Bob = 4.5 %, Y₀ = 1.7 × 10⁻⁶, e_d = 3.3 %, with μ = 0.48 and a weak
    /// decoy ν = 0.05 and a vacuum decoy (5 % each), at 0 km.
    pub fn reference_parameter_set() -> Link {
        Link {
            source: Source::WeakCoherent { intensity: 0.48, probability: 0.9, decoys: vec![(0.05, 0.05), (0.0, 0.05)] },
            channel_loss_db: 0.0,
            length_km: Some(0.0),
            attenuation_db_per_km: Some(0.21),
            detector_efficiency: 0.045,
            dark_count_probability: 1.7e-6,
            misalignment: 0.033,
            flaws: DetectorFlaws::default(),
        }
    }

    /// True for the ideal single-photon link (no loss, perfect detectors), where the
    /// qubit-level campaign applies unchanged; every other link is simulated with the
    /// link model (`sim::link`).
    pub fn is_ideal_single_photon(&self) -> bool {
        matches!(self.source, Source::SinglePhoton)
            && self.channel_loss_db == 0.0
            && self.detector_efficiency == 1.0
            && self.dark_count_probability == 0.0
            && self.misalignment == 0.0
    }

    /// Channel transmittance `10^{−loss/10}`.
    pub fn channel_transmittance(&self) -> f64 {
        10f64.powf(-self.channel_loss_db / 10.0)
    }

    /// Overall transmittance η = channel × Bob's efficiency.
    pub fn transmittance(&self) -> f64 {
        self.channel_transmittance() * self.detector_efficiency
    }

    /// The same link at another fibre length (attenuation taken from the link, default
    /// 0.2 dB/km if the link was given as a fixed loss).
    pub fn at_distance(&self, km: f64) -> Link {
        let att = self.attenuation_db_per_km.unwrap_or(0.2);
        Link { channel_loss_db: att * km, length_km: Some(km), attenuation_db_per_km: Some(att), ..self.clone() }
    }

    /// The same link with the signal intensity set to `mu` (no decoys).
    pub fn at_mu(&self, mu: f64) -> Link {
        Link { source: Source::WeakCoherent { intensity: mu, probability: 1.0, decoys: vec![] }, ..self.clone() }
    }

    /// Expected statistics of intensity μ (per pulse, either basis).
    pub fn stats(&self, mu: f64) -> IntensityStats {
        gains(mu, self.transmittance(), self.dark_count_probability, self.misalignment)
    }

    /// Parses the `[source]`, `[channel]` and `[detector]` tables of a setup file, reporting
    /// every problem found (keys named with their table, e.g. `channel.loss_db`).
    pub fn parse_all(
        source: Option<&toml::Value>,
        channel: Option<&toml::Value>,
        detector: Option<&toml::Value>,
    ) -> std::result::Result<Link, Vec<Error>> {
        let mut p = Problems::new();
        let mut link = Link::default();
        if let Some(s) = source {
            match s.as_table() {
                None => p.push(Error::input_key("source", "must be a table")),
                Some(t) => match parse_source(t) {
                    Ok(src) => link.source = src,
                    Err(errs) => p.nested("source", errs),
                },
            }
        }
        if let Some(c) = channel {
            match c.as_table() {
                None => p.push(Error::input_key("channel", "must be a table")),
                Some(t) => parse_channel(t, &mut link, &mut p),
            }
        }
        if let Some(d) = detector {
            match d.as_table() {
                None => p.push(Error::input_key("detector", "must be a table")),
                Some(t) => parse_detector(t, &mut link, &mut p),
            }
        }
        p.finish(link)
    }
}

fn parse_channel(t: &toml::Table, link: &mut Link, p: &mut Problems) {
    p.nested("channel", unknown_keys(t, &["length_km", "attenuation_db_per_km", "loss_db"], "this table"));
    let att = t
        .get("attenuation_db_per_km")
        .map(|a| num(a, "channel.attenuation_db_per_km").and_then(|x| check_range("channel.attenuation_db_per_km", x, 0.0, 10.0)));
    match (t.get("loss_db"), t.get("length_km")) {
        (Some(_), Some(_)) => {
            p.push(Error::input_key("channel.loss_db", "give loss_db or length_km (with attenuation_db_per_km), not both"))
        }
        (Some(l), None) => {
            if let Some(x) = p.check(num(l, "channel.loss_db").and_then(|x| check_range("channel.loss_db", x, 0.0, 100.0))) {
                link.channel_loss_db = x;
            }
            // An attenuation beside loss_db does not change this link's loss; it is kept
            // for commands that sweep distance (`keyrate`).
            if let Some(a) = att {
                link.attenuation_db_per_km = p.check(a);
            }
        }
        (None, Some(l)) => {
            let km = p.check(num(l, "channel.length_km").and_then(|x| check_range("channel.length_km", x, 0.0, 1000.0)));
            let att = match att {
                Some(a) => p.check(a),
                None => {
                    p.push(Error::input_key("channel.length_km", "needs attenuation_db_per_km (dB/km) beside it"));
                    None
                }
            };
            if let (Some(km), Some(att)) = (km, att) {
                link.length_km = Some(km);
                link.attenuation_db_per_km = Some(att);
                link.channel_loss_db = km * att;
            }
        }
        (None, None) => {
            if let Some(a) = att {
                link.attenuation_db_per_km = p.check(a);
            }
        }
    }
}

fn parse_detector(t: &toml::Table, link: &mut Link, p: &mut Problems) {
    let mut keys = vec!["efficiency", "dark_count_probability", "misalignment"];
    keys.extend_from_slice(crate::protocol::detector::KEYS);
    p.nested("detector", unknown_keys(t, &keys, "this table"));
    link.flaws = DetectorFlaws::parse(t, p);
    if let Some(v) = t.get("efficiency") {
        let e = num(v, "detector.efficiency").and_then(|e| {
            if !(e > 0.0 && e <= 1.0) {
                // A datasheet's percentage is the commonest slip: say so.
                let hint = if e > 1.0 && e <= 100.0 {
                    format!("; a percentage is written as a fraction: {e} % is {}", e / 100.0)
                } else {
                    String::new()
                };
                return Err(Error::input_key("detector.efficiency", format!("{e} is outside the allowed range (0, 1]{hint}")));
            }
            Ok(e)
        });
        if let Some(e) = p.check(e) {
            link.detector_efficiency = e;
        }
    }
    if let Some(v) = t.get("dark_count_probability") {
        let key = "detector.dark_count_probability";
        if let Some(x) = p.check(num(v, key).and_then(|x| check_range(key, x, 0.0, 0.1))) {
            link.dark_count_probability = x;
        }
    }
    if let Some(v) = t.get("misalignment") {
        let key = "detector.misalignment";
        if let Some(x) = p.check(num(v, key).and_then(|x| check_range(key, x, 0.0, 0.5))) {
            link.misalignment = x;
        }
    }
}

/// A list of numbers, each checked by `check`; errors name `key[i]`.
fn number_list(v: &toml::Value, key: &str, p: &mut Problems, check: impl Fn(f64) -> std::result::Result<f64, String>) -> Option<Vec<f64>> {
    let Some(a) = v.as_array() else {
        p.push(Error::input_key(key, "must be a list of numbers"));
        return None;
    };
    let mut out = Vec::new();
    let mut ok = true;
    for (i, x) in a.iter().enumerate() {
        let k = format!("{key}[{i}]");
        match p.check(num(x, &k).and_then(|x| check(x).map_err(|m| Error::input_key(k.clone(), m)))) {
            Some(x) => out.push(x),
            None => ok = false,
        }
    }
    ok.then_some(out)
}

fn parse_source(t: &toml::Table) -> std::result::Result<Source, Vec<Error>> {
    let mut p = Problems::new();
    p.nested("", unknown_keys(t, &["kind", "intensity", "probability", "decoys", "decoy_probabilities"], "this table"));
    let source = match t.get("kind").and_then(|v| v.as_str()) {
        Some("single-photon") => {
            for k in
                t.keys().filter(|k| *k != "kind" && ["intensity", "probability", "decoys", "decoy_probabilities"].contains(&k.as_str()))
            {
                p.push(Error::input_key(k.clone(), "a single-photon source takes no other keys"));
            }
            Some(Source::SinglePhoton)
        }
        Some("weak-coherent") => weak_coherent(t, &mut p),
        _ => {
            p.push(Error::input_key("kind", "missing or unknown: single-photon or weak-coherent"));
            None
        }
    };
    match source {
        Some(s) if p.is_empty() => Ok(s),
        _ => p.finish(Source::SinglePhoton),
    }
}

fn weak_coherent(t: &toml::Table, p: &mut Problems) -> Option<Source> {
    let intensity = match t.get("intensity") {
        Some(v) => p.check(num(v, "intensity").and_then(|x| {
            if !(x > 0.0 && x <= 10.0) {
                return Err(Error::input_key("intensity", format!("{x} is outside (0, 10] photons per pulse")));
            }
            Ok(x)
        })),
        None => {
            p.push(Error::input_key("intensity", "missing: the signal's mean photon number per pulse"));
            None
        }
    };
    // Decoys are checked against the signal intensity only when that is valid.
    let below = intensity.unwrap_or(f64::INFINITY);
    let decoys =
        match t.get("decoys") {
            None => Some(Vec::new()),
            Some(v) => number_list(v, "decoys", p, |d| {
                if d >= 0.0 && d < below {
                    Ok(d)
                } else {
                    Err(format!("{d} is outside [0, intensity = {below})"))
                }
            }),
        };
    if let Some(d) = &decoys {
        if d.len() > 2 {
            p.push(Error::input_key("decoys", "at most two decoy intensities"));
        } else if d.len() == 2 && d[0] == d[1] {
            p.push(Error::input_key("decoys", "the two decoy intensities must differ"));
        }
    }
    let probs = match t.get("decoy_probabilities") {
        None if decoys.as_ref().is_some_and(|d| d.is_empty()) => Some(Vec::new()),
        None if decoys.is_some() => {
            p.push(Error::input_key("decoy_probabilities", "missing: one probability per decoy"));
            None
        }
        None => None,
        Some(v) => {
            number_list(v, "decoy_probabilities", p, |x| if x > 0.0 && x < 1.0 { Ok(x) } else { Err(format!("{x} is outside (0, 1)")) })
        }
    };
    let (Some(intensity), Some(decoys), Some(probs)) = (intensity, decoys, probs) else {
        return None;
    };
    if probs.len() != decoys.len() {
        p.push(Error::input_key("decoy_probabilities", format!("has {} entries for {} decoys", probs.len(), decoys.len())));
        return None;
    }
    let probability = 1.0 - probs.iter().sum::<f64>();
    if probability <= 0.0 {
        p.push(Error::input_key("decoy_probabilities", "sum to 1 or more: nothing is left for the signal"));
        return None;
    }
    if let Some(v) = t.get("probability") {
        // The signal probability is implied by the decoys'; a stated value may differ from
        // 1 − Σ only by decimal rounding of the inputs.
        const IMPLIED_PROBABILITY_SLACK: f64 = 1e-9;
        if let Some(x) = p.check(num(v, "probability")) {
            if (x - probability).abs() > IMPLIED_PROBABILITY_SLACK {
                p.push(Error::input_key("probability", format!("{x} does not equal 1 minus the decoy probabilities ({probability})")));
            }
        }
    }
    Some(Source::WeakCoherent { intensity, probability, decoys: decoys.into_iter().zip(probs).collect() })
}

/// Expected statistics of one intensity.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct IntensityStats {
    /// Intensity μ.
    pub mu: f64,
    /// Gain Q_μ: probability that a pulse gives a detection.
    pub gain: f64,
    /// Error rate E_μ of detections.
    pub error_rate: f64,
    /// Single-photon gain Q₁ = Y₁ μ e^{−μ}.
    pub single_gain: f64,
    /// Single-photon yield Y₁.
    pub y1: f64,
    /// Single-photon error rate e₁.
    pub e1: f64,
}

/// Gains and error rates for intensity `mu`, overall transmittance `eta`, dark-count
/// probability `y0` and misalignment `e_d` (module doc for the formulas).
pub fn gains(mu: f64, eta: f64, y0: f64, e_d: f64) -> IntensityStats {
    let click = 1.0 - (-eta * mu).exp();
    let gain = y0 + click;
    let error_rate = if gain > 0.0 { (E0 * y0 + e_d * click) / gain } else { 0.0 };
    let y1 = y0 + eta - y0 * eta;
    let e1 = if y1 > 0.0 { (E0 * y0 + e_d * eta) / y1 } else { 0.0 };
    IntensityStats { mu, gain, error_rate, single_gain: y1 * mu * (-mu).exp(), y1, e1 }
}

/// Poisson probability of `n` photons at intensity `mu`.
pub fn poisson(mu: f64, n: u32) -> f64 {
    let mut p = (-mu).exp();
    for k in 1..=n {
        p *= mu / k as f64;
    }
    p
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    /// The standard parameter set of Ma, Qi, Zhao, Lo (2005), from the GYS experiment
    /// (Gobby, Yuan, Shields, APL 84, 3762, 2004) [M]: 0.21 dB/km, e_d = 3.3 %,
    /// Y₀ = 1.7e-6, η_Bob = 4.5 %.
    pub(crate) fn gys(km: f64) -> Link {
        Link::reference_parameter_set().at_distance(km)
    }

    #[test]
    fn gys_gains_at_50_km() {
        // REFERENCES.md §9 table [N]: L = 50 km, μ = 0.48: Q_μ = 1.924950e-3, E_μ = 0.033412,
        // η = 4.010629e-3, Y₁ = 4.012322e-3, e₁ = 0.033198.
        let l = gys(50.0);
        assert_relative_eq!(l.transmittance(), 4.010629e-3, max_relative = 1e-6);
        let s = l.stats(0.48);
        assert_relative_eq!(s.gain, 1.924950e-3, max_relative = 1e-6);
        assert!((s.error_rate - 0.033412).abs() < 1e-6, "{}", s.error_rate);
        assert_relative_eq!(s.y1, 4.012322e-3, max_relative = 1e-6);
        assert!((s.e1 - 0.033198).abs() < 1e-6, "{}", s.e1);
    }

    #[test]
    fn closed_forms_match_photon_number_sums() {
        // Q_μ = Σ Y_n P_n with the exact yields equals 1 − (1 − Y₀)e^{−ημ}; the first-order
        // form differs only by the Y₀(1 − e^{−ημ}) cross term.
        let (mu, eta, y0): (f64, f64, f64) = (0.6, 0.02, 1e-5);
        let exact: f64 =
            (0..60).map(|n| poisson(mu, n) * (y0 + (1.0 - (1.0 - eta).powi(n as i32)) - y0 * (1.0 - (1.0 - eta).powi(n as i32)))).sum();
        assert_relative_eq!(exact, 1.0 - (1.0 - y0) * (-eta * mu).exp(), max_relative = 1e-12);
        let s = gains(mu, eta, y0, 0.01);
        assert!((s.gain - exact).abs() <= y0 * (1.0 - (-eta * mu).exp()) * 1.000001);
    }
}
