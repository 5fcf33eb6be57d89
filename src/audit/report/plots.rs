//! The report's figures, as SVG (drawn with [`super::svg`]), each with the caption that says
//! what to look at. One figure per question:
//! - `key_length_<attack>.svg`: key length against attack strength, one panel per rule, over
//!   three shaded regions (below the achievable bound: secure; between it and the capacity,
//!   what the attack leaves secret: inconclusive; above the capacity: leaks), the first
//!   leaking point ringed and labelled with its excess, points without key marked ×;
//! - `abort_leak_<attack>.svg`: abort probability and each rule's leak probability against
//!   the swept parameter, markers at measured points only, 95 % Clopper–Pearson intervals as
//!   error bars, series staggered sideways so none hides another, legend above the data;
//! - `setup_<key>_<attack>.svg` (campaigns with setup sweeps): per swept setup key, one row
//!   of two panels per rule — mean key length with the 5–95 % trial spread, and leak
//!   probability with 95 % Clopper–Pearson intervals — against the swept key, one series per
//!   value of the other coordinates (attack sweep value, other swept keys); the two figures
//!   above then show the entry's first swept setup only, and say so;
//! - `eve_information.svg`: Eve's information against QBER, one panel per attack with the
//!   protocol's bounds labelled for what they cover (single photons); link-level points
//!   (Eve's exact knowledge of a fraction of the key) drawn as open squares and flagged;
//! - `keyrate_svg`: key rate against distance, rules not secure under photon-number
//!   splitting dashed and labelled so;
//! - `hunt_svg`: a hunt's best value against its target QBER with the proven bound.
//!
//! Every number comes from the folder's evidence (or the keyrate and hunt rows); the bound
//! curves are the exact formulas of `exact::bounds`.

use super::evidence::{bits, sanitize, short, Evidence, Group, Row};
use super::svg::{Anchor, Key, LegendEntry, Panel, Shape, Svg, BAND_FILL, DASHES, FONT, INK, LEAK_FILL, PALETTE, SECURE_FILL, SHAPES};
use crate::audit::trial::Verdict;
use crate::error::Result;
use crate::exact::bounds::fggnp_information;
use crate::quantum::measures::binary_entropy;

/// A figure: its file name, a title, the caption that says what to look at, and the SVG.
#[derive(Clone, Debug)]
pub struct Figure {
    /// File name in the results folder.
    pub file: String,
    /// Title.
    pub title: String,
    /// What to look at.
    pub caption: String,
    /// SVG text.
    pub svg: String,
}

/// Figure width, px: fits the A4 page's printable width when scaled to it.
const WIDTH: f64 = 760.0;

/// Every figure of a campaign folder, in reading order: Eve's information, then per attack
/// the key length and (when swept) the abort and leak probability.
pub fn render(ev: &Evidence) -> Result<Vec<Figure>> {
    let mut out = vec![eve_information(ev)];
    for g in &ev.groups {
        out.push(key_length(ev, g));
        let swept = ev.first_setup_points(g.entry, &ev.rules()[0]).iter().filter(|r| r.sweep_value.is_some()).count();
        if swept >= 2 {
            out.push(abort_leak(ev, g));
        }
        for k in 0..ev.setup_keys.len() {
            out.push(setup_figure(ev, g, k));
        }
    }
    Ok(out)
}

fn x_of(r: &Row) -> f64 {
    r.sweep_value.unwrap_or(r.point as f64)
}

fn x_range(xs: &[f64]) -> (f64, f64) {
    let (lo, hi) = xs.iter().fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &x| (a.min(x), b.max(x)));
    if !(lo.is_finite() && hi.is_finite()) {
        (0.0, 1.0)
    } else if hi > lo {
        let pad = 0.04 * (hi - lo);
        (lo - pad, hi + pad)
    } else {
        (lo - 0.5, hi + 0.5)
    }
}

fn x_title(g: &Group) -> String {
    if g.sweep_param.is_empty() {
        "attack point".into()
    } else {
        format!("{} (attack strength)", g.sweep_param)
    }
}

fn attack_title(g: &Group) -> String {
    if g.fixed.is_empty() {
        g.attack.clone()
    } else {
        format!("{} ({})", g.attack, g.fixed)
    }
}

/// For a campaign with setup sweeps, the sentence that says which setup a figure against
/// attack strength shows (empty otherwise).
fn first_setup_note(ev: &Evidence, g: &Group) -> String {
    match ev.rows.iter().find(|r| r.entry == g.entry) {
        Some(r) if !r.setup.is_empty() => format!(
            " Drawn at the first swept setup only ({}), so that points of different setups never share a position; the \
             setup_… figures show every swept setup.",
            r.setup_words()
        ),
        _ => String::new(),
    }
}

/// ` at <first swept setup>` for the titles of the figures against attack strength.
fn first_setup_suffix(ev: &Evidence, g: &Group) -> String {
    match ev.rows.iter().find(|r| r.entry == g.entry) {
        Some(r) if !r.setup.is_empty() => format!(" at {}", r.setup_words()),
        _ => String::new(),
    }
}

/// Key length against attack strength, one panel per rule.
fn key_length(ev: &Evidence, g: &Group) -> Figure {
    let rules = ev.rules();
    let system = ev.system_rule();
    let cols = if rules.len() >= 2 { 2 } else { 1 };
    let panel_w = (WIDTH - 20.0) / cols as f64;
    let panel_h = 230.0;
    let title = format!("Key length against attack strength: {}{}", attack_title(g), first_setup_suffix(ev, g));
    let mut svg = Svg::new(WIDTH, 0.0, &title, "");
    svg.text(12.0, 22.0, &title, FONT + 2.0, Anchor::Start, true);
    let legend = [
        LegendEntry { key: Key::Fill(SECURE_FILL), label: "secure: ℓ ≤ achievable bound".into() },
        LegendEntry { key: Key::Fill(BAND_FILL), label: "inconclusive".into() },
        LegendEntry { key: Key::Fill(LEAK_FILL), label: "leaks: ℓ above the capacity".into() },
        LegendEntry { key: Key::Line { color: INK, dash: "", width: 2.0 }, label: "capacity (what the attack leaves secret)".into() },
        LegendEntry { key: Key::Line { color: INK, dash: DASHES[1], width: 1.5 }, label: "achievable bound".into() },
        LegendEntry {
            key: Key::MarkerBar { shape: Shape::Circle, color: PALETTE[0] },
            label: "key length ℓ: mean, bar 5–95 % of trials".into(),
        },
        LegendEntry { key: Key::Marker { shape: Shape::Diamond, color: PALETTE[3] }, label: "leaking point".into() },
        LegendEntry { key: Key::Marker { shape: Shape::Cross, color: PALETTE[5] }, label: "no key (aborted or ℓ = 0)".into() },
    ];
    let top = svg.legend(12.0, 46.0, WIDTH - 12.0, &legend) + 22.0;
    let rows_n = rules.len().div_ceil(cols);
    let mut first_leaks = Vec::new();
    for (i, rule) in rules.iter().enumerate() {
        let pts = ev.first_setup_points(g.entry, rule);
        if pts.is_empty() {
            continue;
        }
        let (col, row) = (i % cols, i / cols);
        let area = (col as f64 * panel_w + 80.0, top + row as f64 * (panel_h + 82.0), panel_w - 95.0, panel_h);
        let xs: Vec<f64> = pts.iter().map(|r| x_of(r)).collect();
        let xr = x_range(&xs);
        let ymax = pts
            .iter()
            .flat_map(|r| [r.key_length.2, r.mean_capacity, r.mean_achievable, r.key_length.0])
            .filter(|v| v.is_finite())
            .fold(0.0_f64, f64::max)
            .max(1.0)
            * 1.12;
        let p = Panel::new(area, (xr.0, xr.1, false), (0.0, ymax, false));
        // Bands over the points with a capacity (a point where every trial aborted has none):
        // from the panel's edge where the first or last point has one, else ending at the last
        // point that has one, so that an aborted stretch stays unshaded.
        let mut band_pts: Vec<(f64, f64, f64)> = pts
            .iter()
            .filter(|r| r.mean_capacity.is_finite() && r.mean_achievable.is_finite())
            .map(|r| (x_of(r), r.mean_achievable, r.mean_capacity))
            .collect();
        if !band_pts.is_empty() {
            if pts.first().is_some_and(|r| r.mean_capacity.is_finite()) {
                band_pts.insert(0, (xr.0, band_pts[0].1, band_pts[0].2));
            }
            let last = *band_pts.last().expect("non-empty");
            if pts.last().is_some_and(|r| r.mean_capacity.is_finite()) {
                band_pts.push((xr.1, last.1, last.2));
            }
            if band_pts.len() == 1 {
                let half = 0.02 * (xr.1 - xr.0);
                band_pts = vec![(last.0 - half, last.1, last.2), (last.0 + half, last.1, last.2)];
            }
            let bx: Vec<f64> = band_pts.iter().map(|b| b.0).collect();
            let ach: Vec<f64> = band_pts.iter().map(|b| b.1.max(0.0)).collect();
            let cap: Vec<f64> = band_pts.iter().map(|b| b.2.max(0.0)).collect();
            let zero = vec![0.0; bx.len()];
            let top = vec![ymax; bx.len()];
            p.band(&mut svg, &bx, &zero, &top, LEAK_FILL);
            p.band(&mut svg, &bx, &zero, &cap, BAND_FILL);
            p.band(&mut svg, &bx, &zero, &ach, SECURE_FILL);
            let line = |v: &[f64]| bx.iter().zip(v).map(|(&x, &y)| p.at(x, y)).collect::<Vec<_>>();
            svg.polyline(&line(&cap), INK, 2.0, "");
            svg.polyline(&line(&ach), INK, 1.5, DASHES[1]);
        }
        let cell = crate::audit::stats::point_verdict(pts.iter().map(|r| r.verdict)).to_string();
        let panel_title = format!("{rule}{}: {cell}", if *rule == system { " (system's rule)" } else { "" });
        p.frame(&mut svg, &panel_title, &x_title(g), "key bits per block");
        for r in &pts {
            let x = x_of(r);
            let (px, _) = p.at(x, 0.0);
            if r.key_length.0 <= 0.0 || r.key_length.0.is_nan() {
                svg.marker(Shape::Cross, px, p.y.px(0.0), 5.0, PALETTE[5]);
                continue;
            }
            svg.error_bar(px, p.y.px(r.key_length.1), p.y.px(r.key_length.2), PALETTE[0]);
            if r.verdict == Verdict::Leak {
                svg.marker(Shape::Diamond, px, p.y.px(r.key_length.0), 6.0, PALETTE[3]);
            } else {
                svg.marker(Shape::Circle, px, p.y.px(r.key_length.0), 4.5, PALETTE[0]);
            }
        }
        if let Some(first) = pts.iter().find(|r| r.verdict == Verdict::Leak) {
            let (px, py) = p.at(x_of(first), first.key_length.0);
            svg.marker(Shape::Halo, px, py, 10.0, INK);
            let text = format!("first leak: +{} bits ({})", bits(first.leak_excess()), first.excess_share());
            let ly = if py < area.1 + 40.0 { py + 30.0 } else { py - 16.0 };
            svg.label_in(area, px, ly, &text);
            first_leaks.push(format!("under `{rule}` from {} (+{} bits)", first.at(), bits(first.leak_excess())));
        }
        if let Some(nk) = pts.iter().find(|r| r.key_length.0.is_nan() || r.key_length.0 <= 0.0) {
            let (px, py) = p.at(x_of(nk), 0.0);
            let text = if nk.abort.0 >= 0.5 {
                format!("no key from {}: aborted in {}", short(x_of(nk)), super::evidence::pct(nk.abort.0))
            } else {
                format!("no key from {}: the rule gives ℓ = 0", short(x_of(nk)))
            };
            svg.label_in(area, px, py - 14.0, &text);
        }
    }
    let height = top + rows_n as f64 * (panel_h + 82.0);
    let svg = svg.finish_at(height, &format!("Key length per block against {} for every rule.", x_title(g)));
    let caption = format!(
        "Where do the key-length rules stay inside what {} leaves secret? Each panel is one rule: markers are the mean key length \
         over the trials (bars: 5 % to 95 % of trials), the solid line is the capacity (no privacy amplification can extract more \
         against this attack), the dashed line the achievable bound. A marker in the region above the capacity (orange) leaks. {}{}",
        g.attack,
        if first_leaks.is_empty() {
            "No rule leaks against this attack.".to_string()
        } else {
            format!("First leaks: {}.", first_leaks.join("; "))
        },
        first_setup_note(ev, g)
    );
    Figure { file: format!("key_length_{}.svg", g.stem), title, caption, svg }
}

/// Abort and leak probability against the swept parameter.
fn abort_leak(ev: &Evidence, g: &Group) -> Figure {
    let rules = ev.rules();
    let title = format!("Abort and leak probability: {}{}", attack_title(g), first_setup_suffix(ev, g));
    let mut svg = Svg::new(WIDTH, 0.0, &title, "");
    svg.text(12.0, 22.0, &title, FONT + 2.0, Anchor::Start, true);
    let mut legend =
        vec![LegendEntry { key: Key::MarkerBar { shape: SHAPES[1], color: PALETTE[0] }, label: "abort probability (all rules)".into() }];
    for (i, rule) in rules.iter().enumerate() {
        legend.push(LegendEntry {
            key: Key::MarkerBar { shape: SHAPES[(i + 2) % 6], color: PALETTE[(i + 1) % 6] },
            label: format!("leak probability, {rule}"),
        });
    }
    let top = svg.legend(12.0, 46.0, WIDTH - 12.0, &legend);
    svg.text(
        12.0,
        top,
        "bars: 95 % Clopper–Pearson interval over the trials; series offset sideways so that none hides another",
        FONT - 2.0,
        Anchor::Start,
        false,
    );
    let area = (80.0, top + 30.0, WIDTH - 110.0, 260.0);
    let base = ev.first_setup_points(g.entry, &rules[0]);
    let xs: Vec<f64> = base.iter().map(|r| x_of(r)).collect();
    let xr = x_range(&xs);
    let p = Panel::new(area, (xr.0, xr.1, false), (-0.03, 1.03, false));
    p.frame(&mut svg, "", &x_title(g), "probability");
    let series = rules.len() + 1;
    let step = (xr.1 - xr.0) * 0.012;
    let offset = |k: usize| (k as f64 - (series - 1) as f64 / 2.0) * step;
    for r in &base {
        let x = p.x.px(x_of(r) + offset(0));
        svg.error_bar(x, p.y.px(r.abort.1), p.y.px(r.abort.2), PALETTE[0]);
        svg.marker(SHAPES[1], x, p.y.px(r.abort.0), 4.5, PALETTE[0]);
    }
    for (i, rule) in rules.iter().enumerate() {
        let color = PALETTE[(i + 1) % 6];
        for r in ev.first_setup_points(g.entry, rule) {
            let x = p.x.px(x_of(r) + offset(i + 1));
            svg.error_bar(x, p.y.px(r.leak.1), p.y.px(r.leak.2), color);
            svg.marker(SHAPES[(i + 2) % 6], x, p.y.px(r.leak.0), 4.5, color);
        }
    }
    let height = area.1 + area.3 + 50.0;
    let svg = svg.finish_at(height, "Abort and leak probability with 95 % intervals at each measured point.");
    let caption = format!(
        "How often does the protocol catch {} (abort), and how often does a rule extract a key that leaks? Markers are measured \
         points only (no interpolation between sweep values); bars are 95 % Clopper–Pearson intervals over the trials. A rule is \
         safe against this attack where its leak probability stays at 0 or where the abort probability reaches 1 first.{}",
        g.attack,
        first_setup_note(ev, g)
    );
    Figure { file: format!("abort_leak_{}.svg", g.stem), title, caption, svg }
}

/// Most series a setup figure draws: one per marker shape other than the cross, which marks
/// points without key. More combinations of the other coordinates are thinned to this many,
/// evenly spaced and always including the first and the last, and the caption says so (the
/// per-point tables keep every point).
const MAX_SETUP_SERIES: usize = 5;

/// Marker shapes of a setup figure's series, all filled (the cross stays free for "no key",
/// the unfilled ring for "leaking point").
const SERIES_SHAPES: [Shape; MAX_SETUP_SERIES] = [Shape::Circle, Shape::Square, Shape::Triangle, Shape::Diamond, Shape::TriangleDown];

/// Smallest ratio of the largest to the smallest positive key length at which a setup
/// figure's key-length axis is logarithmic: two decades, where a linear axis flattens the
/// small keys onto zero (common practice).
const KEY_LOG_RATIO: f64 = 100.0;

/// Smallest ratio of a log sweep's last to first value drawn on a logarithmic axis: one
/// decade, so that the axis has at least one labelled tick.
const X_LOG_RATIO: f64 = 10.0;

/// Sideways offset between the series of a setup figure at one swept value, px.
const SERIES_STAGGER_PX: f64 = 5.0;

/// One series of a setup figure: the values of the other coordinates (attack sweep value,
/// other swept setup keys) that its points share, and their label.
struct Series {
    sweep: Option<u64>,
    others: Vec<u64>,
    label: String,
}

impl Series {
    fn of(r: &Row, key: usize) -> Series {
        let others: Vec<u64> = r.setup.iter().enumerate().filter(|(j, _)| *j != key).map(|(_, v)| v.1.to_bits()).collect();
        let mut parts = Vec::new();
        if let Some(v) = r.sweep_value.filter(|_| !r.sweep_param.is_empty()) {
            parts.push(format!("{} = {}", r.sweep_param, short(v)));
        }
        parts.extend(r.setup.iter().enumerate().filter(|(j, _)| *j != key).map(|(_, (k, v))| format!("{k} = {}", short(*v))));
        Series { sweep: r.sweep_value.map(f64::to_bits), others, label: parts.join(", ") }
    }

    fn holds(&self, r: &Row, key: usize) -> bool {
        let s = Series::of(r, key);
        s.sweep == self.sweep && s.others == self.others
    }
}

/// Mean key length and leak probability against one swept setup key for one attack entry:
/// one row of two panels per rule (key length left, leak probability right), one series per
/// combination of the other coordinates.
fn setup_figure(ev: &Evidence, g: &Group, key: usize) -> Figure {
    let sk = &ev.setup_keys[key];
    let rules = ev.rules();
    let system = ev.system_rule();
    let x_of = |r: &Row| r.setup[key].1;
    let x_title = if sk.unit.is_empty() || sk.unit == sk.key { sk.key.clone() } else { format!("{}, {}", sk.key, sk.unit) };
    // The series, in the table's order, thinned evenly to at most MAX_SETUP_SERIES.
    let mut all: Vec<Series> = Vec::new();
    for r in ev.points(g.entry, &rules[0]) {
        if !all.iter().any(|s| s.holds(r, key)) {
            all.push(Series::of(r, key));
        }
    }
    let total = all.len();
    let series: Vec<Series> = if total > MAX_SETUP_SERIES {
        let keep: Vec<usize> =
            (0..MAX_SETUP_SERIES).map(|i| (i * (total - 1) + (MAX_SETUP_SERIES - 1) / 2) / (MAX_SETUP_SERIES - 1)).collect();
        all.into_iter().enumerate().filter(|(i, _)| keep.contains(i)).map(|(_, s)| s).collect()
    } else {
        all
    };
    let single = series.len() == 1;
    let of_series = |rule: &str, s: &Series| {
        let mut v: Vec<&Row> = ev.points(g.entry, rule).into_iter().filter(|r| s.holds(r, key) && x_of(r).is_finite()).collect();
        v.sort_by(|a, b| x_of(a).total_cmp(&x_of(b)));
        v
    };
    let shown: Vec<&Row> = rules.iter().flat_map(|rule| series.iter().flat_map(move |s| of_series(rule, s))).collect();
    // Horizontal axis: logarithmic for a log sweep spanning a decade or more.
    let xs: Vec<f64> = shown.iter().map(|r| x_of(r)).collect();
    let (xlo, xhi) = xs.iter().fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &x| (a.min(x), b.max(x)));
    let x_log = sk.log() && xlo > 0.0 && xhi / xlo >= X_LOG_RATIO;
    let xr = if x_log {
        let pad = (xhi / xlo).powf(0.04);
        (xlo / pad, xhi * pad)
    } else {
        x_range(&xs)
    };
    // Vertical axis of the key-length panels, shared by every rule so that rules compare.
    let key_values = || {
        shown
            .iter()
            .flat_map(|r| [r.key_length.0, r.key_length.1, r.key_length.2, r.mean_capacity, r.mean_achievable])
            .filter(|v| v.is_finite() && *v > 0.0)
    };
    let kmax = key_values().fold(0.0_f64, f64::max);
    let kmin = key_values().fold(f64::INFINITY, f64::min);
    let y_log = kmax > 0.0 && kmax / kmin >= KEY_LOG_RATIO;
    let (ylo, yhi) = if y_log {
        let lo = 10f64.powf(kmin.log10().floor());
        (lo, 10f64.powf(kmax.log10().ceil()).max(lo * 10.0))
    } else {
        (0.0, kmax.max(1.0) * 1.12)
    };
    // A key length on the axis: 0 bits (or none) at the floor of a logarithmic axis.
    let ky = |v: f64| if v.is_finite() && v > ylo { v } else { ylo };

    // Title font advance, px per character (DejaVu Sans Bold at 16 px), to keep the title
    // inside the figure: a long one drops the attack's fixed parameters.
    const TITLE_CHAR_WIDTH: f64 = 9.6;
    let full = format!("Key length and leak probability against {}: {}", sk.key, attack_title(g));
    let title = if full.chars().count() as f64 * TITLE_CHAR_WIDTH > WIDTH - 24.0 {
        format!("Key length and leak probability against {}: {}", sk.key, g.attack)
    } else {
        full
    };
    let mut svg = Svg::new(WIDTH, 0.0, &title, "");
    svg.text(12.0, 22.0, &title, FONT + 2.0, Anchor::Start, true);
    let mut legend = Vec::new();
    if single {
        legend.extend([
            LegendEntry { key: Key::Fill(SECURE_FILL), label: "secure: ℓ ≤ achievable bound".into() },
            LegendEntry { key: Key::Fill(BAND_FILL), label: "inconclusive".into() },
            LegendEntry { key: Key::Fill(LEAK_FILL), label: "leaks: ℓ above the capacity".into() },
            LegendEntry { key: Key::Line { color: INK, dash: "", width: 2.0 }, label: "capacity (what the attack leaves secret)".into() },
            LegendEntry { key: Key::Line { color: INK, dash: DASHES[1], width: 1.5 }, label: "achievable bound".into() },
        ]);
    }
    for (i, s) in series.iter().enumerate() {
        let label = if s.label.is_empty() {
            "mean key length ℓ (bar: 5–95 % of trials); leak probability".to_string()
        } else {
            s.label.clone()
        };
        legend.push(LegendEntry { key: Key::MarkerBar { shape: SERIES_SHAPES[i], color: PALETTE[i] }, label });
    }
    if !single {
        legend.push(LegendEntry {
            key: Key::Line { color: INK, dash: "", width: 1.5 },
            label: "capacity, one line per series in its colour and dash".into(),
        });
    }
    legend.push(LegendEntry { key: Key::Marker { shape: Shape::Halo, color: INK }, label: "leaking point (ringed)".into() });
    legend.push(LegendEntry {
        key: Key::Marker { shape: Shape::Cross, color: INK },
        label: if y_log { "no key (aborted or ℓ = 0), at the axis floor".into() } else { "no key (aborted or ℓ = 0)".into() },
    });
    let top = svg.legend(12.0, 46.0, WIDTH - 12.0, &legend);
    svg.text(
        12.0,
        top,
        "left: mean key length, bars 5–95 % of trials; right: leak probability, bars 95 % Clopper–Pearson interval",
        FONT - 2.0,
        Anchor::Start,
        false,
    );
    let top = top + 34.0;
    let panel_w = (WIDTH - 20.0) / 2.0;
    let panel_h = 190.0;
    let n = series.len();
    let stagger = |i: usize| (i as f64 - (n as f64 - 1.0) / 2.0) * SERIES_STAGGER_PX;
    let mut first_leaks = Vec::new();
    for (row, rule) in rules.iter().enumerate() {
        let y0 = top + row as f64 * (panel_h + 82.0);
        let kp = Panel::new((80.0, y0, panel_w - 95.0, panel_h), (xr.0, xr.1, x_log), (ylo, yhi, y_log));
        let lp = Panel::new((panel_w + 80.0, y0, panel_w - 95.0, panel_h), (xr.0, xr.1, x_log), (-0.03, 1.03, false));
        let pts_all: Vec<&Row> = series.iter().flat_map(|s| of_series(rule, s)).collect();
        if single {
            // The three regions over the points with a capacity, as in the key-length figure.
            let band: Vec<&&Row> = pts_all.iter().filter(|r| r.mean_capacity.is_finite() && r.mean_achievable.is_finite()).collect();
            if band.len() >= 2 {
                let bx: Vec<f64> = band.iter().map(|r| x_of(r)).collect();
                let ach: Vec<f64> = band.iter().map(|r| ky(r.mean_achievable)).collect();
                let cap: Vec<f64> = band.iter().map(|r| ky(r.mean_capacity)).collect();
                let floor = vec![ylo; bx.len()];
                let ceil = vec![yhi; bx.len()];
                kp.band(&mut svg, &bx, &floor, &ceil, LEAK_FILL);
                kp.band(&mut svg, &bx, &floor, &cap, BAND_FILL);
                kp.band(&mut svg, &bx, &floor, &ach, SECURE_FILL);
                let line = |v: &[f64]| bx.iter().zip(v).map(|(&x, &y)| kp.at(x, y)).collect::<Vec<_>>();
                svg.polyline(&line(&cap), INK, 2.0, "");
                svg.polyline(&line(&ach), INK, 1.5, DASHES[1]);
            }
        }
        let verdict = crate::audit::stats::point_verdict(ev.points(g.entry, rule).iter().map(|r| r.verdict));
        let own = if *rule == system { " (system's rule)" } else { "" };
        kp.frame(&mut svg, &format!("{rule}{own}: {verdict}"), &x_title, "key bits per block");
        lp.frame(&mut svg, &format!("{rule}: leak probability"), &x_title, "probability");
        for (i, s) in series.iter().enumerate() {
            let (shape, color) = (SERIES_SHAPES[i], PALETTE[i]);
            let pts = of_series(rule, s);
            if !single {
                let cap: Vec<(f64, f64)> = pts
                    .iter()
                    .map(|r| if r.mean_capacity.is_finite() { kp.at(x_of(r), ky(r.mean_capacity)) } else { (f64::NAN, f64::NAN) })
                    .collect();
                svg.polyline(&cap, color, 1.5, DASHES[i]);
            }
            for r in &pts {
                let x = kp.x.px(x_of(r)) + stagger(i);
                let mean = r.key_length.0;
                if mean.is_nan() || mean <= 0.0 {
                    svg.marker(Shape::Cross, x, kp.y.px(ylo), 5.0, color);
                } else {
                    svg.error_bar(x, kp.y.px(ky(r.key_length.1)), kp.y.px(ky(r.key_length.2)), color);
                    svg.marker(shape, x, kp.y.px(mean), 4.5, color);
                    if r.verdict == Verdict::Leak {
                        svg.marker(Shape::Halo, x, kp.y.px(mean), 9.0, INK);
                    }
                }
                if r.leak.0.is_nan() {
                    continue;
                }
                let x = lp.x.px(x_of(r)) + stagger(i);
                svg.error_bar(x, lp.y.px(r.leak.1), lp.y.px(r.leak.2), color);
                svg.marker(shape, x, lp.y.px(r.leak.0), 4.5, color);
                if r.verdict == Verdict::Leak {
                    svg.marker(Shape::Halo, x, lp.y.px(r.leak.0), 9.0, INK);
                }
            }
        }
        if let Some(first) = ev.points(g.entry, rule).into_iter().find(|r| r.verdict == Verdict::Leak) {
            first_leaks.push(format!("under `{rule}` at {} (+{} bits)", first.at(), bits(first.leak_excess())));
        }
    }
    let height = top + rules.len() as f64 * (panel_h + 82.0) - 20.0;
    let svg = svg.finish_at(height, &format!("Mean key length and leak probability against {} for every rule.", sk.key));
    let others = {
        let mut c = Vec::new();
        if !g.sweep_param.is_empty() {
            c.push(format!("the attack's {}", g.sweep_param));
        }
        c.extend(ev.setup_keys.iter().enumerate().filter(|(j, _)| *j != key).map(|(_, k)| k.key.clone()));
        c
    };
    let caption = format!(
        "How does {key} change whether the key-length rules stay inside what {attack} leaves secret? One row per rule: left, the \
         mean key length per block (bars: 5 % to 95 % of trials) {bands}; right, the leak probability with 95 % Clopper–Pearson \
         intervals. {series}{axes}Ringed points leak; × marks points without key{floor}. {leaks}{thinned}",
        key = sk.key,
        attack = g.attack,
        bands = if single {
            "over the secure, inconclusive and leaking regions bounded by the achievable bound (dashed) and the capacity (solid)"
        } else {
            "with each series' capacity as a line in its colour (a marker above its own line leaks)"
        },
        series = if others.is_empty() {
            String::new()
        } else {
            format!("One series per value of {} (markers staggered sideways so that none hides another). ", others.join(" and "))
        },
        axes = match (x_log, y_log) {
            (true, true) => "Both axes of the key-length panels are logarithmic. ",
            (true, false) => "The horizontal axis is logarithmic. ",
            (false, true) => "The key-length axis is logarithmic. ",
            (false, false) => "",
        },
        floor = if y_log { " (drawn at the axis floor)" } else { "" },
        leaks = if first_leaks.is_empty() {
            "No rule leaks against this attack at any swept setup.".to_string()
        } else {
            format!("First leaks: {}.", first_leaks.join("; "))
        },
        thinned = if total > series.len() {
            format!(" Showing {} of the {total} series, evenly spaced; the per-point tables list every point.", series.len())
        } else {
            String::new()
        },
    );
    let suffix = sk.column.strip_prefix("setup_").unwrap_or(&sk.column);
    Figure { file: format!("setup_{}_{}.svg", sanitize(suffix), g.stem), title, caption, svg }
}

/// Eve's information against QBER, one panel per attack.
fn eve_information(ev: &Evidence) -> Figure {
    let six_state = ev.protocol() == "six-state";
    let abort = ev.manifest.setup.iter().find(|v| v.key == "abort_qber").and_then(|v| v.value.parse::<f64>().ok());
    let rule0 = ev.rules()[0].clone();
    let qmax =
        ev.rows.iter().map(Row::qber_max).filter(|q| q.is_finite()).fold(0.12_f64, f64::max).max(abort.unwrap_or(0.0)).min(0.5) * 1.05;
    let title = format!("Eve's information against QBER: {}", ev.campaign());
    let mut svg = Svg::new(WIDTH, 0.0, &title, "");
    svg.text(12.0, 22.0, &title, FONT + 2.0, Anchor::Start, true);
    let bound_label = if six_state {
        "H(p) − h(Q): six-state bound, equal error rates in Z, X, Y; covers single-photon attacks only"
    } else {
        "h(Q): BB84 bound on any attack on single photons (optimal collective attack)"
    };
    let mut legend = vec![LegendEntry { key: Key::Line { color: INK, dash: "", width: 2.0 }, label: bound_label.into() }];
    if !six_state {
        legend.push(LegendEntry {
            key: Key::Line { color: PALETTE[2], dash: DASHES[2], width: 2.0 },
            label: "optimal individual attack on BB84 (Fuchs et al. 1997)".into(),
        });
    }
    if abort.is_some() {
        legend.push(LegendEntry { key: Key::Line { color: PALETTE[3], dash: DASHES[1], width: 1.5 }, label: "abort threshold".into() });
    }
    legend.push(LegendEntry {
        key: Key::Marker { shape: Shape::Circle, color: PALETTE[0] },
        label: "single-photon attack: Holevo information".into(),
    });
    if ev.groups.iter().any(|g| g.link_level) {
        legend.push(LegendEntry {
            key: Key::Marker { shape: Shape::Square, color: PALETTE[1] },
            label: "link-level attack: fraction of key bits Eve knows exactly (not bounded by the curves)".into(),
        });
    }
    let top = svg.legend(12.0, 46.0, WIDTH - 12.0, &legend) + 22.0;
    let cols = if ev.groups.len() >= 2 { 2 } else { 1 };
    let panel_w = (WIDTH - 20.0) / cols as f64;
    let panel_h = 200.0;
    let grid: Vec<f64> = (0..=160).map(|i| qmax * i as f64 / 160.0).collect();
    let bound = |q: f64| {
        if six_state {
            let w = crate::exact::bounds::six_state_weights(q, q, q);
            crate::exact::bounds::six_state_entropy(&w, crate::exact::eval::BOUND_SLACK)
                .map_or(f64::NAN, |h| (h - binary_entropy(q)).min(1.0))
        } else {
            binary_entropy(q.min(0.5))
        }
    };
    for (i, g) in ev.groups.iter().enumerate() {
        let (col, row) = (i % cols, i / cols);
        let area = (col as f64 * panel_w + 80.0, top + row as f64 * (panel_h + 78.0), panel_w - 95.0, panel_h);
        let p = Panel::new(area, (0.0, qmax, false), (0.0, 1.0, false));
        // A panel title that would run past the panel keeps the attack's label only.
        let full = attack_title(g);
        let title = if full.chars().count() as f64 * 8.6 > area.2 { g.attack.clone() } else { full };
        p.frame(
            &mut svg,
            &title,
            if six_state { "QBER (max of Z, X and Y), fraction" } else { "QBER (max of Z and X), fraction" },
            "bits per key bit",
        );
        let curve: Vec<(f64, f64)> = grid.iter().filter(|&&q| !six_state || q <= 2.0 / 3.0).map(|&q| p.at(q, bound(q))).collect();
        svg.polyline(&curve, INK, 2.0, "");
        if !six_state {
            let ind: Vec<(f64, f64)> = grid.iter().map(|&q| p.at(q, fggnp_information(q.min(0.5)))).collect();
            svg.polyline(&ind, PALETTE[2], 2.0, DASHES[2]);
        }
        if let Some(t) = abort.filter(|t| *t <= qmax) {
            svg.line(p.at(t, 0.0), p.at(t, 1.0), PALETTE[3], 1.5, DASHES[1]);
        }
        for r in ev.points(g.entry, &rule0) {
            let (x, y) = p.at(r.qber_max(), r.holevo_z);
            if g.link_level {
                svg.marker(Shape::Square, x, y, 4.5, PALETTE[1]);
            } else {
                svg.marker(Shape::Circle, x, y, 4.5, PALETTE[0]);
            }
        }
        if g.link_level {
            svg.label(area.0 + area.2 - 6.0, area.1 + area.3 - 8.0, "link-level: not bounded by the curve", Anchor::End);
        }
    }
    let rows_n = ev.groups.len().div_ceil(cols);
    let height = top + rows_n as f64 * (panel_h + 78.0);
    let svg = svg.finish_at(height, "Eve's information about a key bit against the QBER for every attack, beside the bounds.");
    let caption = format!(
        "Does any attack learn more than the protocol's bound allows at its error rate? One panel per attack, so that no series \
         hides another. The solid curve is {} and bounds attacks on single photons only. Single-photon attacks (filled circles) must \
         lie on or below it; link-level attacks (open squares: photon-number splitting, beam splitting) may lie above it, because \
         Eve reads multi-photon or tapped pulses without causing errors, which is why decoy-state rules exist.{}",
        if six_state { "the six-state bound H(p) − h(Q)" } else { "h(Q), the BB84 bound" },
        abort.map_or(String::new(), |t| format!(" The dashed vertical line is the abort threshold, QBER {}.", short(t)))
    );
    Figure { file: "eve_information.svg".into(), title, caption, svg }
}

/// Why a key-rate rule is not secure, if it is not.
pub fn rate_rule_warning(rule: crate::exact::keyrate::RateRule) -> Option<&'static str> {
    match rule {
        crate::exact::keyrate::RateRule::NaiveSinglePhoton => Some("not secure under photon-number splitting"),
        _ => None,
    }
}

/// Key rate per pulse (log scale, positive rates only) against distance, one line per rule;
/// rules that are not secure dashed and labelled.
pub fn keyrate_svg(rows: &[crate::exact::keyrate::RateRow], rules: &[crate::exact::keyrate::RateRule]) -> Result<String> {
    Ok(keyrate_figure(rows, rules).svg)
}

/// The key-rate figure with its caption.
pub fn keyrate_figure(rows: &[crate::exact::keyrate::RateRow], rules: &[crate::exact::keyrate::RateRule]) -> Figure {
    let pos: Vec<&crate::exact::keyrate::RateRow> = rows.iter().filter(|r| r.rate_bits_per_pulse > 0.0).collect();
    let xmax = rows.iter().map(|r| r.distance_km).fold(1.0_f64, f64::max);
    let xmin = rows.iter().map(|r| r.distance_km).fold(xmax, f64::min).min(xmax - 1e-9);
    // Lowest rate the logarithmic axis shows, bits per pulse: below, a curve has ended.
    const RATE_AXIS_FLOOR: f64 = 1e-12;
    let ymin = pos.iter().map(|r| r.rate_bits_per_pulse).fold(1.0_f64, f64::min).max(RATE_AXIS_FLOOR);
    let ymax = pos.iter().map(|r| r.rate_bits_per_pulse).fold(ymin * 10.0, f64::max);
    let (ylo, yhi) = (10f64.powf(ymin.log10().floor()), 10f64.powf(ymax.log10().ceil()));
    let title = "Key rate per pulse against distance".to_string();
    let mut svg = Svg::new(WIDTH, 0.0, &title, "");
    svg.text(12.0, 22.0, &title, FONT + 2.0, Anchor::Start, true);
    let legend: Vec<LegendEntry> = rules
        .iter()
        .enumerate()
        .map(|(i, rule)| {
            let insecure = rate_rule_warning(*rule);
            LegendEntry {
                key: Key::Line { color: PALETTE[i % 6], dash: if insecure.is_some() { DASHES[1] } else { "" }, width: 2.5 },
                label: match insecure {
                    Some(w) => format!("{} ({w})", rule.name()),
                    None => rule.name().to_string(),
                },
            }
        })
        .collect();
    let top = svg.legend(12.0, 46.0, WIDTH - 12.0, &legend) + 14.0;
    let area = (90.0, top, WIDTH - 120.0, 330.0);
    let p = Panel::new(area, (xmin, xmax, false), (ylo, yhi, true));
    p.frame(&mut svg, "", "fibre length, km", "key rate, bits per pulse");
    for (i, rule) in rules.iter().enumerate() {
        let color = PALETTE[i % 6];
        let insecure = rate_rule_warning(*rule);
        let pts: Vec<(f64, f64)> = pos.iter().filter(|r| r.rule == *rule).map(|r| p.at(r.distance_km, r.rate_bits_per_pulse)).collect();
        svg.polyline(&pts, color, 2.5, if insecure.is_some() { DASHES[1] } else { "" });
        // A few markers per curve, so that the rules stay apart in greyscale.
        let every = (pts.len() / 8).max(1);
        for (k, q) in pts.iter().enumerate() {
            if k % every == (i * every / rules.len().max(1)) % every {
                svg.marker(SHAPES[i % 6], q.0, q.1, 4.5, color);
            }
        }
        // The warning beside the curve, above it at a third of its length.
        if let (Some(w), Some(at)) = (insecure, pts.get(pts.len() / 3)) {
            svg.label_in(area, at.0, at.1 - 14.0, &format!("{}: {w}", rule.name()));
        }
    }
    let height = area.1 + area.3 + 50.0;
    let svg = svg.finish_at(height, "Asymptotic key rate per pulse against fibre length, one curve per rule.");
    let caption = "How far does each rule give key? Where a curve ends, the rule gives no key. A dashed curve is a rule that is not \
                   secure: it counts every detection as a single photon, so photon-number splitting reads the multi-photon pulses, and \
                   its apparent reach is not a secure distance."
        .to_string();
    Figure { file: "keyrate.svg".into(), title, caption, svg }
}

/// One hunt target: the best value found and the proven bound there.
#[derive(Clone, Debug)]
pub struct HuntPoint {
    /// Target QBER.
    pub q: f64,
    /// Best value found.
    pub value: f64,
    /// Proven bound.
    pub bound: f64,
}

/// A hunt's best values against the bound.
pub fn hunt_figure(points: &[HuntPoint], objective: &str, unit: &str) -> Figure {
    let title = format!("Hunt for the strongest attack: {objective}");
    let mut svg = Svg::new(WIDTH, 0.0, &title, "");
    svg.text(12.0, 22.0, &title, FONT + 2.0, Anchor::Start, true);
    let legend = [
        LegendEntry {
            key: Key::Marker { shape: Shape::Ring, color: INK },
            label: "proven bound at the target (no attack may exceed it)".into(),
        },
        LegendEntry { key: Key::Marker { shape: Shape::Circle, color: PALETTE[0] }, label: "best attack found".into() },
    ];
    let top = svg.legend(12.0, 46.0, WIDTH - 12.0, &legend) + 14.0;
    let qs: Vec<f64> = points.iter().map(|p| p.q).collect();
    let xr = x_range(&qs);
    let ymax = points.iter().flat_map(|p| [p.value, p.bound]).filter(|v| v.is_finite()).fold(0.0_f64, f64::max).max(1e-3) * 1.1;
    let area = (90.0, top, WIDTH - 120.0, 280.0);
    let p = Panel::new(area, (xr.0, xr.1, false), (0.0, ymax, false));
    p.frame(&mut svg, "", "target QBER Q (every basis), fraction", unit);
    // Both at the targets only: the bound is known there, and nothing is drawn between.
    for h in points {
        let (x, y) = p.at(h.q, h.bound);
        svg.marker(Shape::Ring, x, y, 7.0, INK);
        let (x, y) = p.at(h.q, h.value);
        svg.marker(Shape::Circle, x, y, 4.5, PALETTE[0]);
    }
    let height = area.1 + area.3 + 50.0;
    let svg = svg.finish_at(height, "Best value found per target QBER beside the proven bound.");
    let caption = "Does the search come close to the proven bound, and never above it? Each filled marker is the best attack found at \
                   that target; the ring around it is the proven bound there. A marker above its ring is a bound violation (reported loudly)."
        .to_string();
    Figure { file: "hunt.svg".into(), title, caption, svg }
}
