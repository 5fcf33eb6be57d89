//! SVG plots (plotters):
//! - `eve_information.svg`: Eve's Holevo information about a key bit against the QBER for
//!   every attack point, with the bound curves h(Q) (the most a collective attack can learn
//!   at symmetric QBER Q while the BB84 bound holds) and 1 − h(½ + √(Q(1−Q))) (the optimal
//!   individual attack, Fuchs et al. 1997), and the abort threshold;
//! - `abort_leak_<attack>.svg`: abort and leak probability (with 95 % intervals) against
//!   the swept parameter, one file per swept attack (campaigns without setup sweeps);
//! - `setup_<key>_<attack>.svg` (campaigns with setup sweeps): mean key length (with the 5–95 %
//!   quantiles) and leak probability (with its 95 % interval) against each swept setup key,
//!   one line per value of the other swept coordinates (the attack's sweep, other setup
//!   keys); a logarithmic sweep gets a logarithmic axis. With several rules, one file per
//!   attack and rule (`_<rule>` appended).

use crate::audit::{Campaign, PointResult};
use crate::error::{Error, ErrorKind, Result};
use crate::exact::bounds::fggnp_information;
use crate::quantum::measures::binary_entropy;
use plotters::prelude::*;

const COLORS: [RGBColor; 8] = [
    RGBColor(31, 119, 180),
    RGBColor(255, 127, 14),
    RGBColor(44, 160, 44),
    RGBColor(214, 39, 40),
    RGBColor(148, 103, 189),
    RGBColor(140, 86, 75),
    RGBColor(227, 119, 194),
    RGBColor(127, 127, 127),
];

/// The legend box every plot uses, at `position`.
fn draw_legend<'a, CT: plotters::coord::CoordTranslate>(
    chart: &mut ChartContext<'a, SVGBackend<'a>, CT>,
    position: SeriesLabelPosition,
) -> Result<()> {
    chart.configure_series_labels().position(position).background_style(WHITE.mix(0.9)).border_style(BLACK).draw().map_err(plot_err)
}

fn plot_err<E: std::fmt::Debug>(e: E) -> Error {
    Error::new(ErrorKind::Io, format!("plot: {e:?}"))
}

/// Renders all plots as (file name, SVG text).
pub fn render(c: &Campaign, results: &[PointResult]) -> Result<Vec<(String, String)>> {
    let mut out = vec![("eve_information.svg".to_string(), eve_information(c, results)?)];
    let mut groups: Vec<(usize, crate::audit::rules::KeyRule)> = results.iter().map(|r| (r.entry, r.rule)).collect();
    groups.dedup();
    for (e, rule) in groups {
        if !c.setup_sweeps.is_empty() {
            for (k, sweep) in c.setup_sweeps.iter().enumerate() {
                let pts: Vec<&PointResult> = results.iter().filter(|r| r.entry == e && r.rule == rule).collect();
                let mut name = format!("{}_{}", sweep.key.column(), sanitize(&pts[0].attack));
                if c.rules.len() > 1 {
                    name = format!("{name}_{}", rule.name());
                }
                if out.iter().any(|(n, _)| *n == format!("{name}.svg")) {
                    name = format!("{name}_entry{e}");
                }
                out.push((format!("{name}.svg"), setup_sweep_plot(c, k, &pts)?));
            }
            continue;
        }
        let pts: Vec<&PointResult> = results.iter().filter(|r| r.entry == e && r.rule == rule && r.swept.is_some()).collect();
        if pts.len() >= 2 {
            let mut name = if c.rules.len() > 1 {
                format!("abort_leak_{}_{}", sanitize(&pts[0].attack), rule.name())
            } else {
                format!("abort_leak_{}", sanitize(&pts[0].attack))
            };
            // Two entries with one label (or labels equal after sanitising) must not share a
            // file: the later one gets its entry number.
            if out.iter().any(|(n, _)| *n == format!("{name}.svg")) {
                name = format!("{name}_entry{e}");
            }
            out.push((format!("{name}.svg"), abort_leak(&pts)?));
        }
    }
    Ok(out)
}

fn sanitize(s: &str) -> String {
    s.chars().map(|c| if c.is_ascii_alphanumeric() || c == '-' || c == '_' { c } else { '_' }).collect()
}

fn eve_information(c: &Campaign, results: &[PointResult]) -> Result<String> {
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (900, 600)).into_drawing_area();
        root.fill(&WHITE).map_err(plot_err)?;
        // The x axis is the largest error rate over the bases the protocol tests.
        let six_state = c.setup.protocol == crate::protocol::Protocol::SixState;
        let qber = |r: &PointResult| {
            if six_state {
                r.exact.qber_z.max(r.exact.qber_x).max(r.exact.qber_y)
            } else {
                r.exact.qber_z.max(r.exact.qber_x)
            }
        };
        let qmax = results.iter().map(qber).fold(0.12_f64, f64::max).min(0.5) * 1.05;
        let mut chart = ChartBuilder::on(&root)
            .caption(format!("Eve's information vs QBER: {}", c.name), ("sans-serif", 20))
            .margin(15)
            .x_label_area_size(45)
            .y_label_area_size(60)
            .build_cartesian_2d(0.0..qmax, 0.0..1.0)
            .map_err(plot_err)?;
        chart
            .configure_mesh()
            .x_desc(if six_state { "QBER (max of Z, X and Y), fraction" } else { "QBER (max of Z and X), fraction" })
            .y_desc("Eve's information about a key bit, bits")
            .draw()
            .map_err(plot_err)?;
        let grid: Vec<f64> = (0..=200).map(|i| qmax * i as f64 / 200.0).collect();
        if six_state {
            // Six-state: Eve's information is at most H(p) − h(Q) with the Pauli weights of
            // the error rates, here at equal error rates Q in the three bases.
            let bound = |q: f64| {
                let w = crate::exact::bounds::six_state_weights(q, q, q);
                crate::exact::bounds::six_state_entropy(&w, crate::exact::eval::BOUND_SLACK).map_or(f64::NAN, |h| h - binary_entropy(q))
            };
            chart
                .draw_series(LineSeries::new(
                    grid.iter().filter(|&&q| q <= 2.0 / 3.0).map(|&q| (q, bound(q).min(1.0))),
                    BLACK.stroke_width(2),
                ))
                .map_err(plot_err)?
                .label("H(p) − h(Q): six-state bound, equal error rates in Z, X, Y (single photons)")
                .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 20, y)], BLACK.stroke_width(2)));
        } else {
            chart
                .draw_series(LineSeries::new(grid.iter().map(|&q| (q, binary_entropy(q.min(0.5)))), BLACK.stroke_width(2)))
                .map_err(plot_err)?
                .label("h(Q): optimal collective attack (BB84 bound, single photons)")
                .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 20, y)], BLACK.stroke_width(2)));
        }
        if !six_state {
            chart
                .draw_series(LineSeries::new(
                    grid.iter().map(|&q| (q, fggnp_information(q.min(0.5)))),
                    RGBColor(120, 120, 120).stroke_width(1),
                ))
                .map_err(plot_err)?
                .label("optimal individual attack on BB84 (Fuchs et al. 1997)")
                .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 20, y)], RGBColor(120, 120, 120)));
        }
        let t = c.setup.abort_qber;
        if t < qmax {
            chart
                .draw_series(LineSeries::new(vec![(t, 0.0), (t, 1.0)], RED.mix(0.5)))
                .map_err(plot_err)?
                .label("abort threshold")
                .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 20, y)], RED.mix(0.5)));
        }
        let mut entries: Vec<usize> = results.iter().map(|r| r.entry).collect();
        entries.dedup();
        for (i, e) in entries.iter().enumerate() {
            let color = COLORS[i % COLORS.len()];
            let pts: Vec<(f64, f64)> =
                results.iter().filter(|r| r.entry == *e && r.rule == c.rules[0]).map(|r| (qber(r).min(qmax), r.exact.holevo_z)).collect();
            let label = results.iter().find(|r| r.entry == *e).map(|r| r.attack.clone()).unwrap_or_default();
            chart
                .draw_series(pts.iter().map(|&p| Circle::new(p, 4, color.filled())))
                .map_err(plot_err)?
                .label(label)
                .legend(move |(x, y)| Circle::new((x + 10, y), 4, color.filled()));
        }
        draw_legend(&mut chart, SeriesLabelPosition::UpperLeft)?;
        root.present().map_err(plot_err)?;
    }
    Ok(svg)
}

fn abort_leak(pts: &[&PointResult]) -> Result<String> {
    let (param, _) = pts[0].swept.clone().expect("swept points");
    let xs: Vec<f64> = pts.iter().map(|r| r.swept.as_ref().map_or(0.0, |s| s.1)).collect();
    let (lo, hi) = xs.iter().fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &x| (a.min(x), b.max(x)));
    let span = if hi > lo { hi - lo } else { 1.0 };
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (800, 500)).into_drawing_area();
        root.fill(&WHITE).map_err(plot_err)?;
        let mut chart = ChartBuilder::on(&root)
            .caption(format!("{} ({}): abort and leak probability", pts[0].attack, pts[0].rule), ("sans-serif", 20))
            .margin(15)
            .x_label_area_size(45)
            .y_label_area_size(60)
            .build_cartesian_2d((lo - 0.02 * span)..(hi + 0.02 * span), -0.02..1.02)
            .map_err(plot_err)?;
        chart.configure_mesh().x_desc(param.as_str()).y_desc("probability").draw().map_err(plot_err)?;
        for (name, color, get) in [
            (
                "abort probability",
                COLORS[0],
                (|r: &PointResult| (r.stats.abort_probability, r.stats.abort_ci)) as fn(&PointResult) -> (f64, (f64, f64)),
            ),
            ("leak probability", COLORS[3], |r: &PointResult| (r.stats.leak_probability, r.stats.leak_ci)),
        ] {
            let series: Vec<(f64, f64, (f64, f64))> = pts
                .iter()
                .zip(&xs)
                .map(|(r, &x)| {
                    let (p, ci) = get(r);
                    (x, p, ci)
                })
                .collect();
            chart
                .draw_series(LineSeries::new(series.iter().map(|&(x, p, _)| (x, p)), color.stroke_width(2)))
                .map_err(plot_err)?
                .label(name)
                .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 20, y)], color.stroke_width(2)));
            chart
                .draw_series(series.iter().map(|&(x, _, (a, b))| PathElement::new(vec![(x, a), (x, b)], color.mix(0.6))))
                .map_err(plot_err)?;
        }
        draw_legend(&mut chart, SeriesLabelPosition::MiddleRight)?;
        root.present().map_err(plot_err)?;
    }
    Ok(svg)
}

/// Mean key length and leak probability of one attack entry under one rule against the
/// campaign's `k`-th swept setup key: one line per value of the other coordinates.
fn setup_sweep_plot(c: &Campaign, k: usize, pts: &[&PointResult]) -> Result<String> {
    let sweep = &c.setup_sweeps[k];
    let x_of = |r: &PointResult| c.setups[r.setup].values[k].1;
    // The other coordinates of a point: the attack's swept value and the other setup keys.
    let others = |r: &PointResult| -> String {
        let mut parts: Vec<String> = r.swept.iter().map(|(p, v)| format!("{p} = {v}")).collect();
        parts.extend(
            c.setups[r.setup].values.iter().enumerate().filter(|(i, _)| *i != k).map(|(_, (key, v))| format!("{} = {v}", key.name)),
        );
        parts.join(", ")
    };
    let mut lines: Vec<(String, Vec<&PointResult>)> = Vec::new();
    for r in pts {
        let label = others(r);
        match lines.iter_mut().find(|(l, _)| *l == label) {
            Some((_, v)) => v.push(r),
            None => lines.push((label, vec![r])),
        }
    }
    for (_, v) in &mut lines {
        v.sort_by(|a, b| x_of(a).total_cmp(&x_of(b)));
    }
    let (lo, hi) = pts.iter().map(|r| x_of(r)).fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), x| (a.min(x), b.max(x)));
    let key_max = pts.iter().map(|r| r.stats.key_length_q95 as f64).fold(1.0_f64, f64::max) * 1.05;
    let log = sweep.scale == crate::audit::campaign::Scale::Log;
    let x_desc = if sweep.key.unit.is_empty() || sweep.key.unit == sweep.key.name {
        sweep.key.name.to_string()
    } else {
        format!("{}, {}", sweep.key.name, sweep.key.unit)
    };
    // Tick labels without float noise: scientific notation for large and small values.
    let tick = |x: &f64| {
        if *x != 0.0 && (x.abs() >= 1e5 || x.abs() < 1e-3) {
            format!("{x:.0e}")
        } else {
            format!("{}", (x * 1e6).round() / 1e6)
        }
    };
    // On a logarithmic sweep the key lengths span decades too: a logarithmic axis from one
    // bit, where a key of 0 bits is drawn.
    let key_floor = 1.0;
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (800, 800)).into_drawing_area();
        root.fill(&WHITE).map_err(plot_err)?;
        let title = format!("{} ({}) against {}", pts[0].attack, pts[0].rule, sweep.key.name);
        let root = root.titled(&title, ("sans-serif", 20)).map_err(plot_err)?;
        let (top, bottom) = root.split_vertically(380);
        // One panel: `value` of each point with its interval `band`, on a linear or a
        // logarithmic x axis (plotters types the two differently, hence the macro).
        macro_rules! panel {
            ($area:expr, $x:expr, $y:expr, $y_desc:expr, $value:expr, $band:expr, $legend:expr) => {{
                let mut chart = ChartBuilder::on($area)
                    .margin(15)
                    .x_label_area_size(45)
                    .y_label_area_size(70)
                    .build_cartesian_2d($x, $y)
                    .map_err(plot_err)?;
                chart
                    .configure_mesh()
                    .x_desc(x_desc.as_str())
                    .y_desc($y_desc)
                    .x_label_formatter(&tick)
                    .y_label_formatter(&tick)
                    .draw()
                    .map_err(plot_err)?;
                for (i, (label, line)) in lines.iter().enumerate() {
                    let color = COLORS[i % COLORS.len()];
                    let series: Vec<(f64, f64, (f64, f64))> = line.iter().map(|r| (x_of(r), $value(r), $band(r))).collect();
                    let drawn = chart
                        .draw_series(LineSeries::new(series.iter().map(|&(x, y, _)| (x, y)), color.stroke_width(2)))
                        .map_err(plot_err)?;
                    if $legend && !label.is_empty() {
                        drawn.label(label.clone()).legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 20, y)], color.stroke_width(2)));
                    }
                    chart
                        .draw_series(series.iter().map(|&(x, _, (a, b))| PathElement::new(vec![(x, a), (x, b)], color.mix(0.6))))
                        .map_err(plot_err)?;
                }
                if $legend && lines.len() > 1 {
                    draw_legend(&mut chart, SeriesLabelPosition::UpperRight)?;
                }
            }};
        }
        let key = |r: &PointResult| r.stats.key_length_mean;
        let key_band = |r: &PointResult| (r.stats.key_length_q05 as f64, r.stats.key_length_q95 as f64);
        let leak = |r: &PointResult| r.stats.leak_probability;
        let leak_band = |r: &PointResult| r.stats.leak_ci;
        let key_desc = "mean key length, bits (bars: 5–95 %)";
        let leak_desc = "leak probability (bars: 95 % interval)";
        if log {
            let key = |r: &PointResult| r.stats.key_length_mean.max(key_floor);
            let key_band =
                |r: &PointResult| ((r.stats.key_length_q05 as f64).max(key_floor), (r.stats.key_length_q95 as f64).max(key_floor));
            let key_desc = "mean key length, bits (bars: 5–95 %; 0 drawn at 1)";
            panel!(&top, (lo..hi.max(lo * 1.0001)).log_scale(), (key_floor..key_max.max(10.0)).log_scale(), key_desc, key, key_band, true);
            panel!(&bottom, (lo..hi.max(lo * 1.0001)).log_scale(), -0.02..1.02, leak_desc, leak, leak_band, false);
        } else {
            let span = if hi > lo { hi - lo } else { 1.0 };
            let x = (lo - 0.02 * span)..(hi + 0.02 * span);
            panel!(&top, x.clone(), 0.0..key_max, key_desc, key, key_band, true);
            panel!(&bottom, x, -0.02..1.02, leak_desc, leak, leak_band, false);
        }
        root.present().map_err(plot_err)?;
    }
    Ok(svg)
}

/// Key rate per pulse (log scale, positive rates only) against distance, one line per rule.
pub fn keyrate_svg(rows: &[crate::exact::keyrate::RateRow], rules: &[crate::exact::keyrate::RateRule]) -> Result<String> {
    let pos: Vec<&crate::exact::keyrate::RateRow> = rows.iter().filter(|r| r.rate_bits_per_pulse > 0.0).collect();
    let xmax = rows.iter().map(|r| r.distance_km).fold(1.0_f64, f64::max);
    // Lowest rate the logarithmic axis shows, bits per pulse: below, a curve has ended.
    const RATE_AXIS_FLOOR: f64 = 1e-12;
    let ymin = pos.iter().map(|r| r.rate_bits_per_pulse).fold(1.0_f64, f64::min).max(RATE_AXIS_FLOOR);
    let ymax = pos.iter().map(|r| r.rate_bits_per_pulse).fold(ymin * 10.0, f64::max);
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (900, 600)).into_drawing_area();
        root.fill(&WHITE).map_err(plot_err)?;
        let mut chart = ChartBuilder::on(&root)
            .caption("Key rate per pulse against distance", ("sans-serif", 20))
            .margin(15)
            .x_label_area_size(45)
            .y_label_area_size(70)
            .build_cartesian_2d(0.0..xmax, (ymin..ymax).log_scale())
            .map_err(plot_err)?;
        chart
            .configure_mesh()
            .x_desc("fibre length, km")
            .y_desc("key rate, bits per pulse")
            .y_label_formatter(&|y| format!("{y:.0e}"))
            .draw()
            .map_err(plot_err)?;
        for (i, rule) in rules.iter().enumerate() {
            let color = COLORS[i % COLORS.len()];
            let pts: Vec<(f64, f64)> = pos.iter().filter(|r| r.rule == *rule).map(|r| (r.distance_km, r.rate_bits_per_pulse)).collect();
            chart
                .draw_series(LineSeries::new(pts, color.stroke_width(2)))
                .map_err(plot_err)?
                .label(rule.name())
                .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 20, y)], color.stroke_width(2)));
        }
        draw_legend(&mut chart, SeriesLabelPosition::UpperRight)?;
        root.present().map_err(plot_err)?;
    }
    Ok(svg)
}
