//! The evaluation for people: a compact terminal table (one row per
//! result, best per column marked with `*`, within 100 columns), the
//! paired tests, and a self-contained HTML report with SVG charts.

use plotters::prelude::*;

use crate::evaluate::compare::{Evaluation, LearningPoint};
use crate::format::{count, number, percent};
use crate::report::table::{Align, Table};
use crate::report::{wrap, CAUTION};

/// Escapes text for HTML (names and values come from the data).
pub fn escape(text: &str) -> String {
    text.replace('&', "&amp;").replace('<', "&lt;").replace('>', "&gt;").replace('"', "&quot;").replace('\'', "&#39;")
}

fn fixed(x: Option<f64>, decimals: usize) -> String {
    x.map_or_else(|| "–".to_string(), |v| crate::format::fixed(v, decimals))
}

/// A table column: title, higher is better, the figure, decimals.
type Column = (&'static str, bool, fn(&crate::evaluate::metrics::BinaryMetrics) -> Option<f64>, usize);

/// A candidate that could not be evaluated: its name and why (`in fold F:
/// the error`), shown under the results table.
pub type FailedRow = (String, String);

/// The terminal view; `failed` rows go under the results table.
pub fn evaluation_text(e: &Evaluation, failed: &[FailedRow]) -> String {
    let mut out = format!(
        "{} rows, {} tested ({}); positive class: {}\n\n",
        count(e.rows),
        count(e.tested_rows),
        e.split,
        e.positive
    );
    let columns: [Column; 7] = [
        ("AUC", true, |m| Some(m.auc), 4),
        ("Gini", true, |m| Some(m.gini), 3),
        ("KS", true, |m| Some(m.ks), 3),
        ("log loss", false, |m| m.log_loss, 4),
        ("Brier", false, |m| m.brier, 4),
        ("AP", true, |m| Some(m.average_precision), 3),
        ("ECE", false, |m| m.ece, 4),
    ];
    let mut headers: Vec<(&str, Align)> = vec![("name", Align::Left)];
    headers.push(("AUC", Align::Right));
    headers.push(("95% CI", Align::Right));
    for (title, _, _, _) in &columns[1..] {
        headers.push((title, Align::Right));
    }
    let mut table = Table::new(&headers);
    let metrics: Vec<_> = e.results.iter().filter_map(|r| r.binary.as_ref()).collect();
    let best: Vec<Option<f64>> = columns
        .iter()
        .map(|(_, higher, get, _)| {
            let values = metrics.iter().filter_map(|m| get(m));
            if *higher {
                values.fold(None, |b: Option<f64>, v| Some(b.map_or(v, |b| b.max(v))))
            } else {
                values.fold(None, |b: Option<f64>, v| Some(b.map_or(v, |b| b.min(v))))
            }
        })
        .collect();
    for r in &e.results {
        let Some(m) = &r.binary else { continue };
        // Names in full: two option sets may share their first characters.
        let mut row = vec![r.name.clone()];
        for (c, (_, _, get, decimals)) in columns.iter().enumerate() {
            let value = get(m);
            let mark = if metrics.len() > 1 && value.is_some() && value == best[c] { "*" } else { " " };
            row.push(format!("{}{mark}", fixed(value, *decimals)));
            if c == 0 {
                row.push(match (m.auc_ci_low, m.auc_ci_high) {
                    (Some(a), Some(b)) => format!("{a:.3}–{b:.3}"),
                    _ => "–".into(),
                });
            }
        }
        table.row(row);
    }
    out.push_str(&table.render());
    if !failed.is_empty() {
        let width = e.results.iter().map(|r| r.name.chars().count()).max().unwrap_or(0);
        for (name, reason) in failed {
            out.push_str(&format!("{name:<width$}  FAILED {reason}\n"));
        }
        let names: Vec<&str> = failed.iter().map(|(n, _)| n.as_str()).collect();
        out.push_str(&format!(
            "failed: {} (left out of every figure, paired comparison and chart)\n",
            names.join(", ")
        ));
    }
    out.push_str("* best in the column. AUC 95% CI from DeLong's variance, on the logit scale");
    if e.repeats > 1 {
        out.push_str(&format!("; AUC and its SE are means over the {} repeats", e.repeats));
    }
    out.push_str(".\n");
    if !e.paired.is_empty() {
        out.push_str("\npaired on the same rows (a − b):\n");
        let mut table = Table::new(&[
            ("a", Align::Left),
            ("b", Align::Left),
            ("AUC diff", Align::Right),
            ("z", Align::Right),
            ("p", Align::Right),
            ("log loss diff (95% bootstrap)", Align::Right),
            ("McNemar p", Align::Right),
        ]);
        for p in &e.paired {
            let ll = match (p.log_loss_diff, p.log_loss_diff_ci) {
                (Some(d), Some([a, b])) => format!("{d:+.4} ({a:+.4}, {b:+.4})"),
                (Some(d), None) => format!("{d:+.4}"),
                _ => "–".into(),
            };
            table.row(vec![
                p.a.clone(),
                p.b.clone(),
                format!("{:+.4}", p.auc_diff),
                crate::format::fixed(p.z, 2),
                crate::format::fixed(p.p_value, 4),
                ll,
                fixed(p.mcnemar_p_value, 4),
            ]);
        }
        out.push_str(&table.render());
    }
    if !e.segments.is_empty() {
        out.push_str(&format!(
            "\nby segment of '{}' (flagged: {}):\n",
            e.segments[0].column,
            wrap(&e.segments[0].flag_rule, 70, 4)
        ));
        let mut table = Table::new(&[
            ("segment", Align::Left),
            ("name", Align::Left),
            ("rows", Align::Right),
            ("event rate", Align::Right),
            ("AUC", Align::Right),
            ("flag rate", Align::Right),
            ("mean predicted", Align::Right),
        ]);
        for s in &e.segments {
            table.row(vec![
                s.segment.clone(),
                s.name.clone(),
                crate::format::fixed(s.rows, 0),
                crate::format::fixed(s.base_rate, 4),
                fixed(s.auc, 4),
                format!("{}%", crate::format::fixed(100.0 * s.flag_rate, 2)),
                crate::format::fixed(s.mean_predicted, 4),
            ]);
        }
        out.push_str(&table.render());
        out.push_str(&format!(
            "{}\n",
            wrap("Segment figures describe; they neither establish nor exclude disparate impact, which is a legal question for the institution.", 100, 0)
        ));
    }
    for r in &e.results {
        for w in &r.warnings {
            out.push_str(&format!("warning ({}): {}\n", r.name, wrap(w, 90, 4)));
        }
    }
    out
}

/// The whole terminal screen of `compare` or `judge`: the figures as
/// measured; with a target class mix, the same reweighted to it; the
/// decisions under the costs (`cost_table`, empty without costs); and the
/// caution, as its own element, when `caution` is set.
pub fn evaluation_screen(
    measured: &Evaluation,
    reweighted: Option<(&Evaluation, &[f64], &[String])>,
    cost_table: &str,
    failed: &[FailedRow],
    caution: bool,
) -> String {
    let measured_text = format!("{}\n", evaluation_text(measured, failed));
    let mut text = match reweighted {
        None => measured_text,
        Some((r, to, classes)) => {
            let mix: Vec<String> = classes.iter().zip(to).map(|(c, p)| format!("{c} {}", percent(*p))).collect();
            let table = evaluation_text(r, failed);
            let body = table.split("\n\n").nth(1).unwrap_or("");
            format!(
                "posteriors stated at the target class mix ({}); figures as measured on the tested rows:\n\n{measured_text}the same, reweighted to the target class mix (importance weights by class):\n\n{}\n\n",
                mix.join(", "),
                body.trim_end()
            )
        }
    };
    if !cost_table.is_empty() {
        text.push_str(cost_table);
        text.push('\n');
    }
    if caution {
        text.push_str(&caution_text());
    }
    text
}

/// The caution as the terminal shows it: wrapped, on its own lines.
pub fn caution_text() -> String {
    format!("{}\n", wrap(CAUTION, 100, 0))
}

/// The colour of line `i` of `n` in one chart: hues spaced evenly round
/// the wheel from a deep teal, so no two lines of a chart share a colour
/// however many there are, and with more than eight lines neighbours
/// alternate between a dark and a mid lightness to stay apart. Our own
/// scheme.
fn series_colour(i: usize, n: usize) -> HSLColor {
    let n = n.max(1) as f64;
    let hue = (0.47 + i as f64 / n).fract();
    let lightness = if n > 8.0 && i % 2 == 1 { 0.52 } else { 0.36 };
    HSLColor(hue, 0.72, lightness)
}

type Lines = Vec<(String, Vec<(f64, f64)>)>;

/// One drawn chart: the SVG of its plot (title and axis labels inside it)
/// and its legend, kept outside the plot so it can never cover a curve.
struct Chart {
    title: String,
    x_label: String,
    y_label: String,
    svg: String,
    legend: Vec<(String, String)>,
}

/// What a chart draws: its words, its ranges and its lines.
struct ChartSpec<'a> {
    title: &'a str,
    x_label: &'a str,
    y_label: &'a str,
    x: std::ops::Range<f64>,
    y: std::ops::Range<f64>,
    lines: &'a Lines,
    /// The grey y = x line (ROC, reliability).
    diagonal: bool,
    log_x: bool,
    /// Pixel size; small multiples are smaller.
    size: (u32, u32),
    /// Text drawn at data coordinates (reliability bin counts).
    notes: Vec<(f64, f64, String)>,
}

fn hex(colour: HSLColor) -> String {
    let (r, g, b) = colour.to_backend_color().rgb;
    format!("#{r:02x}{g:02x}{b:02x}")
}

/// A line chart; `Err` carries plotters' message.
fn line_chart(spec: &ChartSpec<'_>) -> Result<Chart, String> {
    let mut svg = String::new();
    let n = spec.lines.len();
    {
        let root = SVGBackend::with_string(&mut svg, spec.size).into_drawing_area();
        root.fill(&WHITE).map_err(|e| e.to_string())?;
        let mut builder = ChartBuilder::on(&root);
        let small = spec.size.0 < 400;
        builder
            .caption(spec.title, ("sans-serif", if small { 14 } else { 18 }))
            .margin(10)
            .x_label_area_size(if small { 34 } else { 40 })
            .y_label_area_size(if small { 46 } else { 55 });
        let (x, y) = (spec.x.clone(), spec.y.clone());
        // The two axis kinds have different coordinate types: one body, twice.
        macro_rules! draw {
            ($chart:expr) => {{
                let mut chart = $chart;
                chart
                    .configure_mesh()
                    .light_line_style(TRANSPARENT)
                    .x_desc(spec.x_label)
                    .y_desc(spec.y_label)
                    .draw()
                    .map_err(|e| e.to_string())?;
                if spec.diagonal {
                    chart
                        .draw_series(LineSeries::new(vec![(x.start, y.start), (x.end, y.end)], BLACK.mix(0.3)))
                        .map_err(|e| e.to_string())?;
                }
                for (i, (_, points)) in spec.lines.iter().enumerate() {
                    let color = series_colour(i, n);
                    chart
                        .draw_series(LineSeries::new(points.iter().copied(), color.stroke_width(2)))
                        .map_err(|e| e.to_string())?;
                    if small {
                        chart
                            .draw_series(points.iter().map(|&p| Circle::new(p, 3, color.filled())))
                            .map_err(|e| e.to_string())?;
                    }
                }
                for (px, py, text) in &spec.notes {
                    chart
                        .draw_series(std::iter::once(Text::new(
                            text.clone(),
                            (*px, *py),
                            ("sans-serif", 10).into_font().color(&BLACK.mix(0.75)),
                        )))
                        .map_err(|e| e.to_string())?;
                }
            }};
        }
        if spec.log_x {
            draw!(builder.build_cartesian_2d((x.start..x.end).log_scale(), y.clone()).map_err(|e| e.to_string())?);
        } else {
            draw!(builder.build_cartesian_2d(x.clone(), y.clone()).map_err(|e| e.to_string())?);
        }
        root.present().map_err(|e| e.to_string())?;
    }
    Ok(Chart {
        title: spec.title.to_string(),
        x_label: spec.x_label.to_string(),
        y_label: spec.y_label.to_string(),
        svg,
        legend: spec.lines.iter().enumerate().map(|(i, (name, _))| (name.clone(), hex(series_colour(i, n)))).collect(),
    })
}

/// A full-size chart without notes.
fn plain<'a>(
    title: &'a str,
    x_label: &'a str,
    y_label: &'a str,
    x: std::ops::Range<f64>,
    y: std::ops::Range<f64>,
    lines: &'a Lines,
) -> ChartSpec<'a> {
    ChartSpec {
        title,
        x_label,
        y_label,
        x,
        y,
        lines,
        diagonal: false,
        log_x: false,
        size: (520, 380),
        notes: Vec::new(),
    }
}

/// A chart as HTML: a figure holding the plot and, beside it, the legend;
/// a chart that could not be drawn says why.
fn figure(chart: Result<Chart, String>, what: &str) -> String {
    match chart {
        Err(message) => format!("<p>chart '{}' could not be drawn: {}</p>\n", escape(what), escape(&message)),
        Ok(c) => {
            let legend: String = c
                .legend
                .iter()
                .map(|(name, colour)| {
                    format!("<li><span class=\"swatch\" style=\"background:{colour}\"></span>{}</li>", escape(name))
                })
                .collect();
            format!(
                "<figure class=\"chart\" data-chart=\"{}\" data-title=\"{}\" data-x-label=\"{}\" data-y-label=\"{}\"><div class=\"plot\">{}</div>{}</figure>\n",
                escape(what),
                escape(&c.title),
                escape(&c.x_label),
                escape(&c.y_label),
                c.svg,
                if legend.is_empty() { String::new() } else { format!("<ul class=\"legend\">{legend}</ul>") }
            )
        }
    }
}

/// A table and the chart that illustrates it, side by side.
fn beside(table: &str, charts: &[String]) -> String {
    format!(
        "<div class=\"pair\"><div class=\"table\">{table}</div><div class=\"charts\">{}</div></div>\n",
        charts.concat()
    )
}

/// Score distributions by class: density of the log posterior odds of the
/// positive class, one panel per result; `negative` names the other class
/// (or classes).
fn distribution_chart(name: &str, scores: &[(f64, bool)], positive: &str, negative: &str) -> Result<Chart, String> {
    let bins = 40;
    let lo = scores.iter().map(|s| s.0).fold(f64::INFINITY, f64::min).max(-20.0);
    let hi = scores.iter().map(|s| s.0).fold(f64::NEG_INFINITY, f64::max).min(20.0);
    let (lo, hi) = if hi > lo { (lo, hi) } else { (lo - 1.0, lo + 1.0) };
    let width = (hi - lo) / bins as f64;
    let mut counts = [vec![0.0; bins], vec![0.0; bins]];
    for &(s, y) in scores {
        let b = (((s.clamp(lo, hi) - lo) / width) as usize).min(bins - 1);
        counts[usize::from(y)][b] += 1.0;
    }
    let lines: Lines = [(negative.to_string(), 0), (positive.to_string(), 1)]
        .iter()
        .map(|(label, k)| {
            let total: f64 = counts[*k].iter().sum::<f64>().max(1.0);
            (label.clone(), (0..bins).map(|b| (lo + (b as f64 + 0.5) * width, counts[*k][b] / total)).collect())
        })
        .collect();
    let top = lines.iter().flat_map(|(_, p)| p.iter().map(|q| q.1)).fold(0.0f64, f64::max).max(1e-9) * 1.1;
    let title = format!("score distribution: {name}");
    let x_label = format!("log posterior odds of {positive}");
    line_chart(&plain(&title, &x_label, "share of the class", lo..hi, 0.0..top, &lines))
}

/// The reliability diagram of one result, as one of the small multiples:
/// observed against mean predicted per bin, each bin's row count written
/// under its point.
fn reliability_chart(name: &str, bins: &[crate::evaluate::metrics::ReliabilityBin]) -> Result<Chart, String> {
    let points: Vec<(f64, f64)> = bins.iter().filter_map(|b| Some((b.mean_predicted?, b.observed?))).collect();
    let lines: Lines = vec![(name.to_string(), points)];
    let notes = bins
        .iter()
        .filter(|b| b.weight > 0.0)
        .map(|b| ((b.low + b.high) / 2.0 - 0.03, 0.04, compact_count(b.weight)))
        .collect();
    let title = format!("reliability: {name}");
    line_chart(&ChartSpec {
        title: &title,
        x_label: "mean predicted probability",
        y_label: "observed event rate",
        x: 0.0..1.0,
        y: 0.0..1.0,
        lines: &lines,
        diagonal: true,
        log_x: false,
        size: (300, 260),
        notes,
    })
    .map(|mut chart| {
        // One line, named in the title: a legend would only repeat it.
        chart.legend.clear();
        chart
    })
}

/// A row count in at most four characters: 812, 4.3k, 12k, 1.2M.
fn compact_count(n: f64) -> String {
    match n {
        n if n < 1_000.0 => format!("{n:.0}"),
        n if n < 10_000.0 => format!("{:.1}k", n / 1e3),
        n if n < 1e6 => format!("{:.0}k", n / 1e3),
        n => format!("{:.1}M", n / 1e6),
    }
}

/// The coefficient path (standardised slopes against λ, one line per term
/// that is ever non-zero) and, when λ was cross-validated, the mean held-out
/// deviance with ±1 standard error lines and the two chosen λ marked.
fn penalty_charts(name: &str, terms: &[String], record: &crate::model::penalised::PenaltyFit) -> Vec<String> {
    let mut out = Vec::new();
    let lambdas: Vec<f64> = record.path.iter().map(|p| p.lambda).collect();
    let (lo, hi) =
        (lambdas.iter().copied().fold(f64::INFINITY, f64::min), lambdas.iter().copied().fold(0.0f64, f64::max));
    if !(lo > 0.0 && hi > lo) {
        return out;
    }
    let width = terms.len().max(1);
    let scale = |j: usize| record.scale.get(j % width).copied().unwrap_or(1.0);
    let slopes = record.path.first().map_or(0, |p| p.slopes.len());
    let lines: Lines = (0..slopes)
        .filter(|&j| record.path.iter().any(|p| p.slopes[j] != 0.0))
        .map(|j| {
            let label = terms.get(j % width).cloned().unwrap_or_default();
            (label, record.path.iter().map(|p| (p.lambda, p.slopes[j] * scale(j))).collect())
        })
        .collect();
    let values = lines.iter().flat_map(|(_, p)| p.iter().map(|q| q.1));
    let (y0, y1) = (values.clone().fold(0.0f64, f64::min), values.fold(0.0f64, f64::max));
    let pad = ((y1 - y0) * 0.05).max(1e-9);
    // Both charts run along λ on a log scale.
    let along_lambda = |title: String, y_label: &str, y: std::ops::Range<f64>, lines: &Lines| {
        figure(
            line_chart(&ChartSpec { log_x: true, ..plain(&title, "λ (log scale)", y_label, lo..hi, y, lines) }),
            &title,
        )
    };
    out.push(along_lambda(
        format!("coefficient path: {name}"),
        "slope on the standardised input",
        y0 - pad..y1 + pad,
        &lines,
    ));
    let cv: Vec<(f64, f64, f64)> =
        record.path.iter().filter_map(|p| Some((p.lambda, p.cv_deviance?, p.cv_se.unwrap_or(0.0)))).collect();
    if !cv.is_empty() {
        let y0 = cv.iter().map(|c| c.1 - c.2).fold(f64::INFINITY, f64::min);
        let y1 = cv.iter().map(|c| c.1 + c.2).fold(f64::NEG_INFINITY, f64::max);
        let pad = ((y1 - y0) * 0.05).max(1e-9);
        let mut lines: Lines = vec![
            ("mean held-out deviance".to_string(), cv.iter().map(|c| (c.0, c.1)).collect()),
            ("+1 standard error".to_string(), cv.iter().map(|c| (c.0, c.1 + c.2)).collect()),
            ("−1 standard error".to_string(), cv.iter().map(|c| (c.0, c.1 - c.2)).collect()),
        ];
        // The two choices, as vertical lines across the plot.
        for (label, lambda) in [
            ("λ of the lowest deviance", record.lambda_lowest_deviance),
            ("sparsest λ within one SE (Breiman et al. 1984)", record.lambda_sparsest_within_se),
        ] {
            if let Some(l) = lambda {
                lines.push((format!("{label}: {l:.4e}"), vec![(l, y0 - pad), (l, y1 + pad)]));
            }
        }
        out.push(along_lambda(
            format!("cross-validation: {name}"),
            "deviance per row, held out",
            y0 - pad..y1 + pad,
            &lines,
        ));
    }
    out
}

/// The path as a table: λ, slopes kept, the cross-validated deviance, and
/// which λ each rule chose.
fn path_table(record: &crate::model::penalised::PenaltyFit) -> String {
    let mut html = String::from(
        "<table class=\"path\"><tr><th>λ</th><th>slopes kept</th><th>CV deviance</th><th>± SE</th><th class=\"l\">chosen by</th></tr>\n",
    );
    for p in &record.path {
        let mut marks = Vec::new();
        if record.lambda_lowest_deviance == Some(p.lambda) {
            marks.push("lowest deviance");
        }
        if record.lambda_sparsest_within_se == Some(p.lambda) {
            marks.push("sparsest within one SE");
        }
        if p.lambda == record.lambda {
            marks.push("used");
        }
        html.push_str(&format!(
            "<tr><td>{:.4e}</td><td>{}</td><td>{}</td><td>{}</td><td class=\"l\">{}</td></tr>\n",
            p.lambda,
            p.nonzero,
            fixed(p.cv_deviance, 5),
            fixed(p.cv_se, 5),
            marks.join(", ")
        ));
    }
    html.push_str("</table>\n");
    html
}

/// What the report shows beside the evaluation itself.
pub struct ReportContext<'a> {
    /// The governance header.
    pub header: &'a crate::report::header::ReportHeader,
    /// The learning curve (may be empty).
    pub learning: &'a [LearningPoint],
    /// Penalised fits on all rows: (name, input names, record).
    pub penalised: &'a [(String, Vec<String>, crate::model::penalised::PenaltyFit)],
    /// Candidates that failed, and why.
    pub failed: &'a [FailedRow],
    /// What was compared, in a sentence.
    pub data_description: &'a str,
    /// The class names: the binary legend names the other class.
    pub classes: &'a [String],
}

/// The self-contained HTML report: no network, no scripts, no external
/// fonts; every string from the data escaped; each chart beside the table
/// it illustrates, its legend outside its plot.
pub fn evaluation_html(e: &Evaluation, context: &ReportContext<'_>) -> String {
    let failed = context.failed;
    let negative = match context.classes {
        [a, b] => (if *a == e.positive { b } else { a }).clone(),
        _ => format!("not {}", e.positive),
    };
    let mut html = String::from("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\"><title>baserate evaluation</title>\n<style>\nbody{font-family:sans-serif;margin:2em;max-width:1500px;color:#222}\ntable{border-collapse:collapse;margin:0.5em 0}td,th{border:1px solid #ccc;padding:3px 8px;text-align:right}th{background:#eef}td.l,th.l{text-align:left}\n.caution{border-left:4px solid #b60;padding:0.5em 1em;background:#fff6ea}\n.pair{display:flex;flex-wrap:wrap;align-items:flex-start;gap:1em;margin:0.5em 0 1.5em}\n.table p{max-width:36em}\n.charts{display:flex;flex-direction:column;gap:1em}\n.chart{display:flex;align-items:flex-start;gap:0.5em;margin:0}\n.legend{list-style:none;padding:0;margin:2.5em 0 0;font-size:13px;max-width:12em;overflow-wrap:anywhere}\n.legend li{margin:2px 0}\n.swatch{display:inline-block;width:14px;height:4px;margin:0 6px 3px 0;vertical-align:middle}\n.multiples{display:flex;flex-wrap:wrap;gap:1em}\ncode{word-break:break-all}\n</style></head><body>\n");
    html.push_str("<h1>baserate: families side by side</h1>\n");
    html.push_str(&format!("<p class=\"caution\"><strong>{}</strong></p>\n", escape(CAUTION)));
    html.push_str(&context.header.html(failed));
    html.push_str(&format!(
        "<h2>Data and split</h2>\n<p>{}</p>\n<p>{} rows; {} tested; split: {}; positive class: <strong>{}</strong>.</p>\n",
        escape(context.data_description),
        count(e.rows),
        count(e.tested_rows),
        escape(&e.split),
        escape(&e.positive)
    ));

    // The metrics in three tables: ranking beside the ROC curves,
    // precision beside the precision–recall curves, and the probability
    // scores in the calibration section.
    let binary: Vec<_> = e.results.iter().filter_map(|r| Some((r, r.binary.as_ref()?))).collect();
    let mut ranking = String::from("<table class=\"ranking\"><tr><th class=\"l\">name</th><th>AUC</th><th>DeLong SE</th><th>95% CI</th><th>Gini</th><th>KS</th></tr>\n");
    let mut precision =
        String::from("<table class=\"precision\"><tr><th class=\"l\">name</th><th>AP</th><th>event rate</th></tr>\n");
    let mut probability = String::from("<table class=\"probability\"><tr><th class=\"l\">name</th><th>log loss</th><th>Brier</th><th>ECE</th><th>calib. intercept</th><th>calib. slope</th><th>HL p</th></tr>\n");
    for (r, m) in &binary {
        ranking.push_str(&format!(
            "<tr><td class=\"l\">{}</td><td>{:.4}</td><td>{}</td><td>{}</td><td>{:.3}</td><td>{:.3}</td></tr>\n",
            escape(&r.name),
            m.auc,
            fixed(m.auc_se, 4),
            match (m.auc_ci_low, m.auc_ci_high) {
                (Some(a), Some(b)) => format!("{a:.3}–{b:.3}"),
                _ => "–".into(),
            },
            m.gini,
            m.ks,
        ));
        precision.push_str(&format!(
            "<tr><td class=\"l\">{}</td><td>{:.3}</td><td>{:.4}</td></tr>\n",
            escape(&r.name),
            m.average_precision,
            m.base_rate
        ));
        probability.push_str(&format!(
            "<tr><td class=\"l\">{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td></tr>\n",
            escape(&r.name),
            fixed(m.log_loss, 4),
            fixed(m.brier, 4),
            fixed(m.ece, 4),
            fixed(m.calibration_intercept, 3),
            fixed(m.calibration_slope, 3),
            fixed(m.hosmer_lemeshow.map(|h| h.p_value), 4),
        ));
    }
    ranking.push_str("</table>\n<p>Rank metrics use the log posterior odds; the AUC interval from DeLong's variance, on the logit scale.</p>\n");
    precision.push_str("</table>\n<p>AP: average precision, the area under the precision–recall curve; a model that ranks at random scores the event rate.</p>\n");
    probability.push_str("</table>\n<p>Brier = mean (p − y)²; ECE over 10 equal-width bins (empty bins shown empty); calibration intercept with the slope fixed at 1; Hosmer–Lemeshow on 10 groups, 8 df.</p>\n");
    if !failed.is_empty() {
        let items: String = failed
            .iter()
            .map(|(name, reason)| format!("<li><strong>{}</strong>: failed {}</li>", escape(name), escape(reason)))
            .collect();
        ranking.push_str(&format!(
            "<p>Failed, and left out of every figure, paired comparison and chart:</p><ul class=\"failed\">{items}</ul>\n"
        ));
    }
    let roc: Lines = e
        .results
        .iter()
        .filter_map(|r| r.curves.as_ref().map(|c| (r.name.clone(), c.roc.iter().map(|p| (p.x, p.y)).collect())))
        .collect();
    let pr: Lines = e
        .results
        .iter()
        .filter_map(|r| {
            r.curves.as_ref().map(|c| (r.name.clone(), c.precision_recall.iter().map(|p| (p.x, p.y)).collect()))
        })
        .collect();
    html.push_str("<h2>Out-of-sample metrics</h2>\n");
    html.push_str(&beside(
        &ranking,
        &[figure(
            line_chart(&ChartSpec {
                diagonal: true,
                ..plain("ROC", "false-positive rate", "true-positive rate", 0.0..1.0, 0.0..1.0, &roc)
            }),
            "ROC curves",
        )],
    ));
    html.push_str(&beside(
        &precision,
        &[figure(
            line_chart(&plain("precision–recall", "recall", "precision", 0.0..1.0, 0.0..1.0, &pr)),
            "precision–recall curves",
        )],
    ));

    // Calibration: the Brier decomposition, then each result's reliability
    // bins beside its own small chart.
    let decomposed: Vec<_> =
        e.results.iter().filter_map(|r| Some((r, r.binary.as_ref()?.brier_decomposition.as_ref()?))).collect();
    let with_bins: Vec<_> = e
        .results
        .iter()
        .filter_map(|r| r.binary.as_ref().filter(|m| !m.reliability.is_empty()).map(|m| (r, m)))
        .collect();
    if !decomposed.is_empty() || !with_bins.is_empty() || !binary.is_empty() {
        html.push_str("<h2>Calibration</h2>\n");
        html.push_str(&probability);
    }
    if !decomposed.is_empty() {
        html.push_str("<p>Brier score decomposition over the 10 reliability bins (Murphy 1973): Brier = reliability − resolution + uncertainty + the within-bin terms.</p>\n<table class=\"brier\"><tr><th class=\"l\">name</th><th>reliability</th><th>resolution</th><th>uncertainty</th><th>within-bin variance</th><th>within-bin covariance</th></tr>\n");
        for (r, d) in &decomposed {
            html.push_str(&format!(
                "<tr><td class=\"l\">{}</td><td>{:.5}</td><td>{:.5}</td><td>{:.5}</td><td>{:.5}</td><td>{:.5}</td></tr>\n",
                escape(&r.name),
                d.reliability,
                d.resolution,
                d.uncertainty,
                d.within_bin_variance,
                d.within_bin_covariance
            ));
        }
        html.push_str("</table>\n");
    }
    if !with_bins.is_empty() {
        html.push_str("<p>Reliability in 10 equal-width bins, one panel per family; the number under each point is the rows in its bin.</p>\n<div class=\"multiples\">\n");
        for (r, m) in &with_bins {
            let mut table = String::from("<table class=\"reliability\"><tr><th>bin</th><th>rows</th><th>mean predicted</th><th>observed</th></tr>\n");
            for b in &m.reliability {
                table.push_str(&format!(
                    "<tr><td>{:.1}–{:.1}</td><td>{:.0}</td><td>{}</td><td>{}</td></tr>\n",
                    b.low,
                    b.high,
                    b.weight,
                    fixed(b.mean_predicted, 4),
                    fixed(b.observed, 4)
                ));
            }
            table.push_str("</table>\n");
            let title = format!("reliability: {}", r.name);
            html.push_str(&beside(&table, &[figure(reliability_chart(&r.name, &m.reliability), &title)]));
        }
        html.push_str("</div>\n");
    }

    if !e.paired.is_empty() {
        html.push_str("<h2>Paired comparisons (same rows)</h2>\n<table><tr><th class=\"l\">a</th><th class=\"l\">b</th><th>AUC diff</th><th>z</th><th>p</th><th>log loss diff</th><th>95% bootstrap</th><th>Brier diff</th><th>McNemar p</th></tr>\n");
        for p in &e.paired {
            html.push_str(&format!(
                "<tr><td class=\"l\">{}</td><td class=\"l\">{}</td><td>{:+.4}</td><td>{:.2}</td><td>{:.4}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td></tr>\n",
                escape(&p.a),
                escape(&p.b),
                p.auc_diff,
                p.z,
                p.p_value,
                fixed(p.log_loss_diff, 4),
                p.log_loss_diff_ci.map_or_else(|| "–".into(), |[a, b]| format!("{a:+.4} … {b:+.4}")),
                fixed(p.brier_diff, 5),
                fixed(p.mcnemar_p_value, 4),
            ));
        }
        html.push_str("</table>\n");
    }

    // Per result: the confusion tables and gains, beside the score
    // distribution by class.
    for r in &e.results {
        let Some(m) = &r.binary else { continue };
        html.push_str(&format!("<h3>{}: alert rates and thresholds</h3>\n", escape(&r.name)));
        let mut table = String::from("<table class=\"confusion\"><tr><th class=\"l\">rule</th><th>threshold</th><th>flagged</th><th>TP</th><th>FP</th><th>TN</th><th>FN</th><th>precision</th><th>recall</th><th>F1</th><th>lift</th><th>amount caught</th></tr>\n");
        for c in &m.confusion {
            table.push_str(&format!(
                "<tr><td class=\"l\">{}</td><td>{}</td><td>{:.2}%</td><td>{:.0}</td><td>{:.0}</td><td>{:.0}</td><td>{:.0}</td><td>{:.3}</td><td>{:.3}</td><td>{:.3}</td><td>{:.2}</td><td>{}</td></tr>\n",
                escape(&c.rule),
                number(c.threshold, 4),
                100.0 * c.flagged_share,
                c.true_positives,
                c.false_positives,
                c.true_negatives,
                c.false_negatives,
                c.precision,
                c.recall,
                c.f1,
                c.lift,
                c.amount_capture.map_or_else(|| "–".into(), |a| format!("{}%", crate::format::fixed(100.0 * a, 1))),
            ));
        }
        table.push_str("</table>\n");
        html.push_str(&table);
        let mut table = String::from("<table class=\"gains\"><tr><th>band</th><th>probability</th><th>rows</th><th>events</th><th>event rate</th><th>odds</th><th>cum. capture</th></tr>\n");
        for g in &m.gains {
            table.push_str(&format!(
                "<tr><td>{}</td><td>{}–{}</td><td>{:.0}</td><td>{:.0}</td><td>{:.4}</td><td>{}</td><td>{:.1}%</td></tr>\n",
                g.band,
                number(g.min_probability, 3),
                number(g.max_probability, 3),
                g.count,
                g.events,
                g.event_rate,
                g.odds.map_or_else(|| "–".into(), |o| crate::format::fixed(o, 1)),
                100.0 * g.cumulative_capture,
            ));
        }
        table.push_str("</table>\n");
        let charts = if r.scores.is_empty() {
            Vec::new()
        } else {
            let title = format!("score distribution: {}", r.name);
            vec![figure(distribution_chart(&r.name, &r.scores, &e.positive, &negative), &title)]
        };
        html.push_str(&beside(&table, &charts));
    }

    // Cost curves (Drummond & Holte 2006, "Cost curves: an improved method
    // for visualizing classifier performance", Machine Learning 65(1)): for
    // each probability cost PC(+), the normalised expected cost of the best
    // threshold, min over ROC points of (1 − TPR)·PC + FPR·(1 − PC).
    let cost_curves: Lines = e
        .results
        .iter()
        .filter_map(|r| {
            let roc = &r.curves.as_ref()?.roc;
            Some((
                r.name.clone(),
                (0..=100)
                    .map(|i| {
                        let pc = i as f64 / 100.0;
                        let best =
                            roc.iter().map(|p| (1.0 - p.y) * pc + p.x * (1.0 - pc)).fold(f64::INFINITY, f64::min);
                        (pc, best)
                    })
                    .collect(),
            ))
        })
        .collect();
    let cost_chart = figure(
        line_chart(&plain(
            "cost curves (lower envelope)",
            "probability cost PC(+)",
            "normalised expected cost",
            0.0..1.0,
            0.0..0.5,
            &cost_curves,
        )),
        "cost curves",
    );
    if e.costs.is_empty() {
        html.push_str("<h2>Cost curves</h2>\n");
        html.push_str(&beside("<p>No costs were given: the curves show every cost ratio at once.</p>", &[cost_chart]));
    } else {
        html.push_str("<h2>Decisions under the costs</h2>\n");
        let mut table = String::from("<p>The realised cost of each family's Bayes-rule decisions (the least expected cost per row) on the tested rows.</p>\n<table class=\"costs\"><tr><th class=\"l\">name</th><th>cost per row</th><th>± SE</th><th>95% interval</th><th>total</th><th>cutoff (theory)</th><th>cutoff (best on these rows)</th><th class=\"l\">actions</th></tr>\n");
        for f in &e.costs {
            table.push_str(&format!(
                "<tr><td class=\"l\">{}</td><td>{:.4}</td><td>{:.4}</td><td>{:.4} – {:.4}</td><td>{:.2}</td><td>{}</td><td>{}</td><td class=\"l\">{}</td></tr>\n",
                escape(&f.name),
                f.expected_cost,
                f.expected_cost_se,
                f.expected_cost_ci[0],
                f.expected_cost_ci[1],
                f.total_cost,
                fixed(f.theoretical_cutoff, 4),
                fixed(f.best_cutoff_on_holdout, 4),
                escape(&f.actions.iter().map(|(a, n)| format!("{a} {n:.0}")).collect::<Vec<_>>().join(", ")),
            ));
        }
        table.push_str("</table>\n");
        if let Some(f) = e.costs.first() {
            table.push_str(&format!("<p>Intervals: {}.</p>\n", escape(&f.cost_interval_method)));
        }
        html.push_str(&table);
        let pass = e.costs.iter().find_map(|f| f.below_cutoff_action.clone());
        let pass_name = pass.clone().unwrap_or_else(|| "the action that costs least for a negative row".into());
        let (rate, among) = match &pass {
            Some(p) => (format!("{p} rate"), format!("{} rate among {p}", e.positive)),
            None => ("share below the cutoff".into(), format!("{} rate below the cutoff", e.positive)),
        };
        html.push_str("<h3>Cutoff table</h3>\n");
        let mut cutoffs = String::new();
        cutoffs.push_str(&format!(
            "\n<p>At each cutoff on the posterior of {}, rows below it take {} and the rest take the action that costs least for a {} row.</p>\n<table class=\"cutoffs\"><tr><th class=\"l\">name</th><th>cutoff</th><th>{}</th><th>{}</th><th>cost per row</th></tr>\n",
            escape(&e.positive),
            escape(&pass_name),
            escape(&e.positive),
            escape(&rate),
            escape(&among)
        ));
        for f in &e.costs {
            for row in &f.cutoff_table {
                cutoffs.push_str(&format!(
                    "<tr><td class=\"l\">{}</td><td>{:.4}</td><td>{:.2}%</td><td>{}</td><td>{:.4}</td></tr>\n",
                    escape(&f.name),
                    row.cutoff,
                    100.0 * row.approval_rate,
                    row.bad_rate_among_approved
                        .map_or("–".into(), |b| format!("{}%", crate::format::fixed(100.0 * b, 2))),
                    row.expected_cost,
                ));
            }
        }
        cutoffs.push_str("</table>\n");
        html.push_str(&beside(&cutoffs, &[cost_chart]));
        html.push_str(&format!("<p class=\"caution\">{}</p>\n", escape(CAUTION)));
    }
    if !e.segments.is_empty() {
        html.push_str(&format!(
            "<h2>Segments</h2>\n<p>What a fair-lending review asks for first: outcomes and flag rates by segment. Flagged: {}. The figures describe; they do not establish or exclude disparate impact, which is a legal question.</p>\n<table class=\"segments\"><tr><th class=\"l\">segment</th><th class=\"l\">name</th><th>rows</th><th>event rate</th><th>AUC</th><th>flag rate</th><th>mean predicted</th></tr>\n",
            escape(&e.segments[0].flag_rule)
        ));
        for s in &e.segments {
            html.push_str(&format!(
                "<tr><td class=\"l\">{}={}</td><td class=\"l\">{}</td><td>{:.0}</td><td>{:.4}</td><td>{}</td><td>{:.2}%</td><td>{:.4}</td></tr>\n",
                escape(&s.column),
                escape(&s.segment),
                escape(&s.name),
                s.rows,
                s.base_rate,
                fixed(s.auc, 4),
                100.0 * s.flag_rate,
                s.mean_predicted
            ));
        }
        html.push_str("</table>\n");
    }
    // Penalised logistic fits on all rows: the path table beside the
    // coefficient path and the cross-validation curve behind the choice.
    for (name, terms, record) in context.penalised {
        html.push_str(&format!("<h2>Penalty path: {}</h2>\n", escape(name)));
        html.push_str(&beside(&path_table(record), &penalty_charts(name, terms, record)));
    }
    if !context.learning.is_empty() {
        html.push_str(&learning_section(context.learning));
    }
    html.push_str(&format!("<p>Made by baserate {}.</p>\n</body></html>\n", env!("CARGO_PKG_VERSION")));
    html
}

/// The learning curve: its table beside its chart.
fn learning_section(learning: &[LearningPoint]) -> String {
    let mut unique: Vec<&String> = Vec::new();
    for p in learning {
        if !unique.contains(&&p.name) {
            unique.push(&p.name);
        }
    }
    let lines: Lines = unique
        .iter()
        .map(|n| {
            let mut points: Vec<(f64, f64)> = learning
                .iter()
                .filter(|p| &&p.name == n)
                .filter_map(|p| Some((p.training_rows as f64, p.log_loss?)))
                .collect();
            points.sort_by(|a, b| a.0.total_cmp(&b.0));
            ((*n).clone(), points)
        })
        .collect();
    let xs = learning.iter().map(|p| p.training_rows as f64);
    let (x0, x1) = (xs.clone().fold(f64::INFINITY, f64::min).max(1.0), xs.fold(0.0, f64::max).max(2.0));
    let ys = learning.iter().filter_map(|p| p.log_loss);
    let (y0, y1) = (ys.clone().fold(f64::INFINITY, f64::min), ys.fold(f64::NEG_INFINITY, f64::max));
    let (y0, y1) = if y1 > y0 { (y0 * 0.95, y1 * 1.05) } else { (0.0, 1.0) };
    let mut table = String::from("<table class=\"learning\"><tr><th class=\"l\">name</th><th>training rows</th><th>holdout log loss</th><th>holdout AUC</th></tr>\n");
    for p in learning {
        table.push_str(&format!(
            "<tr><td class=\"l\">{}</td><td>{}</td><td>{}</td><td>{}</td></tr>\n",
            escape(&p.name),
            count(p.training_rows),
            fixed(p.log_loss, 4),
            fixed(p.auc, 4)
        ));
    }
    table.push_str("</table>\n");
    let chart = figure(
        line_chart(&ChartSpec {
            log_x: true,
            ..plain("learning curve (holdout log loss)", "training rows", "log loss", x0..x1 * 1.01, y0..y1, &lines)
        }),
        "learning curve",
    );
    format!("<h2>Learning curve</h2>\n{}", beside(&table, &[chart]))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// No two lines of one chart share a colour, up to more lines than any
    /// chart draws (a coefficient path over 60 inputs).
    #[test]
    fn no_colour_is_reused_within_a_chart() {
        for n in 1..=60 {
            let mut colours: Vec<(u8, u8, u8)> = (0..n).map(|i| series_colour(i, n).to_backend_color().rgb).collect();
            colours.sort_unstable();
            colours.dedup();
            assert_eq!(colours.len(), n, "{n} lines");
        }
    }
}
