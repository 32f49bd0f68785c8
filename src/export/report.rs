//! The report of a fit run: plots (PNG and SVG, in `plots/` of the run directory) and one
//! self-contained HTML page (`report.html`, every figure inline as SVG, no outside files or
//! scripts) with the job, the data and their hashes, the parameters with intervals and
//! warnings, the fit quality per case, prediction bands, held-out comparisons and the caution.
//!
//! Reads the run directory; runs the model only for the prediction bands (through `predict`).

use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use super::plots::{
    write_chart, write_heat_map, Chart, HeatMap, Line, LineKind, PlotError, Residuals, Shade,
    ShadeKind,
};
use super::write_atomically;
use crate::predict::compare::{scenario_of_job, score_test, TestScore};
use crate::predict::{
    predict, prepare_scenario, CalibratedModel, Conditions, Prediction, PredictionSettings,
};
use crate::run::progress::ProgressEvent;
use crate::run::{slug, RunDirectory, RunError, RunRecord, RunSummary};

/// The name of the band of the parameters' uncertainty alone (docs/predictions.md).
pub const PARAMETER_BAND: &str = "parameter band";
/// The name of the band that adds the repeats' scatter and the model's error at the
/// calibration conditions (docs/predictions.md).
pub const PREDICTION_BAND: &str = "prediction band with test scatter and model error";

/// The caution every report carries.
pub const CAUTION: &str = "Model results support, and do not replace, standard tests, local codes and the judgement of a qualified fire engineer.";

/// Errors writing a report.
#[derive(Debug, thiserror::Error)]
pub enum ReportError {
    #[error("cannot read {}", path.display())]
    Read {
        path: PathBuf,
        #[source]
        source: std::io::Error,
    },
    #[error("cannot read {}: {problem}", path.display())]
    Corrupt { path: PathBuf, problem: String },
    #[error(transparent)]
    Plot(#[from] PlotError),
    #[error("cannot write {}", path.display())]
    Write {
        path: PathBuf,
        #[source]
        source: std::io::Error,
    },
}

/// How to write the report.
#[derive(Debug, Clone, PartialEq)]
pub struct ReportOptions {
    /// Parameter sets drawn for each prediction band (0: no bands).
    pub n_samples: usize,
    /// Band probability, percent.
    pub band_percent: f64,
    /// Held-out test descriptions to predict and score.
    pub held_out: Vec<PathBuf>,
}

impl Default for ReportOptions {
    fn default() -> Self {
        ReportOptions {
            n_samples: 100,
            band_percent: 95.0,
            held_out: Vec::new(),
        }
    }
}

/// What was written.
#[derive(Debug, Clone)]
pub struct ReportOutput {
    pub html: PathBuf,
    /// Every PNG and SVG written.
    pub plots: Vec<PathBuf>,
    /// Held-out scores, in the order given.
    pub scores: Vec<TestScore>,
    /// What could not be done and why (e.g. no bands without the fit job).
    pub notes: Vec<String>,
}

/// One `cases/<case>--<signal>.csv` of a run.
#[derive(Debug, Clone)]
struct CaseCurve {
    stem: String,
    case: String,
    signal: String,
    time_s: Vec<f64>,
    measured: Vec<f64>,
    sigma: Vec<f64>,
    model: Vec<f64>,
    residual: Vec<f64>,
}

fn read_text(path: &Path) -> Result<String, ReportError> {
    crate::input::read_text(path, crate::input::InputKind::RunFile).map_err(|source| {
        ReportError::Read {
            path: path.to_path_buf(),
            source,
        }
    })
}

fn read_case_curves(
    dir: &RunDirectory,
    summary: &RunSummary,
) -> Result<Vec<CaseCurve>, ReportError> {
    let mut curves = Vec::new();
    for (stem, path) in crate::run::curves::case_curve_files(dir) {
        let Some((case_slug, signal)) = crate::run::curves::split_stem(&stem) else {
            continue;
        };
        let case = summary
            .parts
            .iter()
            .find(|p| slug(&p.case) == case_slug)
            .map_or_else(|| case_slug.to_string(), |p| p.case.clone());
        let text = read_text(&path)?;
        let read = crate::run::curves::parse_case_curve_strict(&text).map_err(|problem| {
            ReportError::Corrupt {
                path: path.clone(),
                problem,
            }
        })?;
        curves.push(CaseCurve {
            stem: stem.clone(),
            case,
            signal: signal.to_string(),
            time_s: read.time_s,
            measured: read.measured,
            sigma: read.sigma,
            model: read.model,
            residual: read.residual,
        });
    }
    Ok(curves)
}

fn signal_label(signal: &str) -> String {
    match signal {
        "hrr" => "HRR (kW/m²)".into(),
        "mlr" => "MLR (g/(m²·s))".into(),
        "mass" => "specimen mass (g)".into(),
        "mass_fraction" => "mass / initial mass (–)".into(),
        "dsc_heat_flow" => "DSC heat flow (W/g)".into(),
        "mcc_hrr" => "MCC HRR (W/g)".into(),
        other => other.to_string(),
    }
}

/// Escapes text for HTML.
pub fn escape(text: &str) -> String {
    text.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

/// Five significant digits, scientific far from one.
fn format_value(v: f64) -> String {
    if !v.is_finite() {
        "–".into()
    } else if v != 0.0 && (v.abs() >= 1e5 || v.abs() < 1e-3) {
        format!("{v:.4e}")
    } else {
        let magnitude = if v == 0.0 {
            0
        } else {
            v.abs().log10().floor() as i32
        };
        let decimals = (4 - magnitude).max(0) as usize;
        format!("{v:.decimals$}")
    }
}

/// The SVG text of a written figure, ready to inline (the XML declaration removed).
fn inline_svg(path: &Path) -> Result<String, ReportError> {
    let text = read_text(path)?;
    let start = text.find("<svg").unwrap_or(0);
    Ok(text[start..].to_string())
}

fn prediction_chart(
    title: &str,
    prediction: &Prediction,
    measured: Option<(&[f64], &[f64])>,
) -> Chart {
    let hrr = &prediction.signals[0];
    let band = prediction.band_percent.unwrap_or(0.0);
    let mut lines = Vec::new();
    if let Some((t, y)) = measured {
        lines.push(Line {
            label: "measured".into(),
            x: t.to_vec(),
            y: y.to_vec(),
            kind: LineKind::Measured,
        });
    }
    lines.push(Line {
        label: "best-fit model".into(),
        x: prediction.time_s.clone(),
        y: hrr.best.clone(),
        kind: LineKind::Model,
    });
    let mut shades = Vec::new();
    if !hrr.median.is_empty() {
        lines.push(Line {
            label: "median of the draws".into(),
            x: prediction.time_s.clone(),
            y: hrr.median.clone(),
            kind: LineKind::Median,
        });
        // A band narrower than the lines drawn over it cannot be seen: the legend says how wide
        // it is at most.
        let widest = hrr
            .upper
            .iter()
            .zip(&hrr.lower)
            .map(|(u, l)| u - l)
            .filter(|w| w.is_finite())
            .fold(0.0_f64, f64::max);
        // The curve band holds the parameters' uncertainty only (docs/predictions.md): a
        // parameter band, not a prediction band.
        shades.push(Shade {
            label: format!(
                "{band:.0} % {PARAMETER_BAND} ({} draws; at most {} kW/m² wide)",
                prediction.n_samples,
                crate::headless::significant(widest, 2)
            ),
            x: prediction.time_s.clone(),
            lower: hrr.lower.clone(),
            upper: hrr.upper.clone(),
            kind: ShadeKind::Prediction,
        });
    }
    Chart {
        title: title.to_string(),
        x_label: "time from exposure start (s)".into(),
        y_label: hrr.label.clone(),
        lines,
        shades,
        residuals: None,
    }
}

/// Writes the plots and `report.html` of the run in `run_dir`.
pub fn write_report(run_dir: &Path, options: &ReportOptions) -> Result<ReportOutput, ReportError> {
    let dir = RunDirectory::new(run_dir);
    let summary_path = dir.summary();
    let summary = match crate::run::read_summary(&summary_path) {
        Ok(summary) => summary,
        Err(RunError::Corrupt { path, problem }) => {
            return Err(ReportError::Corrupt {
                path,
                problem: format!("{problem} (is this a finished run directory?)"),
            })
        }
        Err(_) => {
            // Not there or not readable: the reader's own message.
            read_text(&summary_path)?;
            return Err(ReportError::Corrupt {
                path: summary_path,
                problem: "cannot be read (is this a finished run directory?)".into(),
            });
        }
    };
    let record: Option<RunRecord> = crate::run::record::read_record_lenient(&dir);
    let plots_dir = run_dir.join("plots");
    std::fs::create_dir_all(&plots_dir).map_err(|source| ReportError::Write {
        path: plots_dir.clone(),
        source,
    })?;
    let mut plots = Vec::new();
    let mut notes = Vec::new();
    let mut figures: Vec<(String, PathBuf)> = Vec::new();

    // Measured against model for every case and signal, with the σ band and residuals.
    let curves = read_case_curves(&dir, &summary)?;
    let index = crate::run::curves::read_index(&dir.cases().join(crate::run::curves::INDEX_FILE));
    let mut quality_rows = Vec::new();
    for curve in &curves {
        let nrmse = crate::predict::compare::normalised_rmse_percent(&curve.measured, &curve.model);
        let cost = summary
            .parts
            .iter()
            .find(|p| p.case == curve.case && p.signal == curve.signal)
            .map(|p| p.cost);
        quality_rows.push((
            curve.case.clone(),
            curve.signal.clone(),
            curve.time_s.len(),
            cost,
            nrmse,
        ));
        if curve.signal == "ignition_time" {
            continue;
        }
        let label = signal_label(&curve.signal);
        // σ is drawn as a band only where it is a measured spread (repeats, or a noise the job
        // states); the peak scale of a single test is a normalisation, not an uncertainty.
        let sigma_source = index.as_ref().and_then(|i| {
            i.curves
                .iter()
                .find(|e| e.case == curve.case && e.signal == curve.signal)
                .map(|e| e.sigma_source.clone())
        });
        let shades = match sigma_source.as_deref() {
            Some(source) if crate::run::curves::is_measurement_spread(source) => vec![Shade {
                label: if source == "repeats" {
                    "measured ± σ of the repeat tests".into()
                } else {
                    "measured ± the noise σ stated in the job".into()
                },
                x: curve.time_s.clone(),
                lower: curve
                    .measured
                    .iter()
                    .zip(&curve.sigma)
                    .map(|(m, s)| m - s)
                    .collect(),
                upper: curve
                    .measured
                    .iter()
                    .zip(&curve.sigma)
                    .map(|(m, s)| m + s)
                    .collect(),
                kind: ShadeKind::Measured,
            }],
            _ => Vec::new(),
        };
        let chart = Chart {
            title: format!(
                "{}: {} measured and modelled",
                curve.case,
                curve.signal.to_uppercase()
            ),
            // Milligram files keep their own clock (docs/fit-jobs.md).
            x_label: match curve.signal.as_str() {
                "mass_fraction" | "dsc_heat_flow" | "mcc_hrr" => "time in the data file (s)",
                _ => "time from exposure start (s)",
            }
            .into(),
            y_label: label,
            lines: vec![
                Line {
                    label: "measured".into(),
                    x: curve.time_s.clone(),
                    y: curve.measured.clone(),
                    kind: LineKind::Measured,
                },
                Line {
                    label: "model (best fit)".into(),
                    x: curve.time_s.clone(),
                    y: curve.model.clone(),
                    kind: LineKind::Model,
                },
            ],
            shades,
            residuals: Some(Residuals {
                label: "residual (σ)".into(),
                x: curve.time_s.clone(),
                y: curve.residual.clone(),
            }),
        };
        let written = write_chart(&chart, &plots_dir.join(format!("case-{}", curve.stem)))?;
        figures.push((chart.title.clone(), written[1].clone()));
        plots.extend(written);
    }

    // Convergence.
    let (mut evaluations, mut costs) = (Vec::new(), Vec::new());
    for event in crate::run::progress::read_all_lenient(&dir.progress()) {
        if let ProgressEvent::Iteration {
            evaluations: n,
            best_cost,
            ..
        } = event
        {
            if best_cost > 0.0 && best_cost.is_finite() {
                evaluations.push(n as f64);
                costs.push(best_cost.log10());
            }
        }
    }
    if !evaluations.is_empty() {
        let chart = Chart {
            title: "Convergence of the fit".into(),
            x_label: "model evaluations (–)".into(),
            y_label: "log₁₀ best objective (–)".into(),
            lines: vec![Line {
                label: "best objective so far".into(),
                x: evaluations,
                y: costs,
                kind: LineKind::Model,
            }],
            shades: vec![],
            residuals: None,
        };
        let written = write_chart(&chart, &plots_dir.join("convergence"))?;
        figures.push((chart.title.clone(), written[1].clone()));
        plots.extend(written);
    }

    // Correlation heat map.
    if summary.correlation.len() == summary.parameters.len() && !summary.correlation.is_empty() {
        let map = HeatMap {
            title: "Correlation of the fitted parameters".into(),
            names: summary.parameters.iter().map(|p| p.name.clone()).collect(),
            values: summary.correlation.clone(),
        };
        let written = write_heat_map(&map, &plots_dir.join("correlation"))?;
        figures.push((map.title.clone(), written[1].clone()));
        plots.extend(written);
    } else {
        notes.push(
            summary
                .identifiability_problem
                .clone()
                .unwrap_or_else(|| "no correlation matrix in summary.json".into()),
        );
    }

    // Prediction bands at the fitted conditions, and for held-out tests.
    let mut scores = Vec::new();
    let mut band_sections: Vec<String> = Vec::new();
    match CalibratedModel::load(&dir.best()) {
        Err(err) => notes.push(format!("no prediction bands: {err}")),
        Ok(calibrated) => {
            let settings = PredictionSettings {
                band_percent: (options.n_samples >= 2).then_some(options.band_percent),
                n_samples: options.n_samples.max(2),
                ..PredictionSettings::default()
            };
            notes.extend(calibrated.notes.iter().cloned());
            let fitted_cases: Vec<(String, crate::case::LoadedScenario)> = calibrated
                .job
                .as_ref()
                .map(|job| {
                    job.cases
                        .iter()
                        .filter_map(|c| c.cone_scenario().map(|s| (c.name.clone(), s.clone())))
                        .collect()
                })
                .unwrap_or_default();
            if calibrated.job.is_none() {
                notes.push(
                    "no bands at the fitted conditions: the fit job could not be read".into(),
                );
            } else if fitted_cases.is_empty() {
                notes.push(
                    "no bands at the fitted conditions: the fit has no cone cases (bands are \
                     drawn for cone tests only)"
                        .into(),
                );
            }
            for (name, loaded) in fitted_cases {
                let result = prepare_scenario(&calibrated, loaded, &Conditions::default())
                    .and_then(|scenario| predict(&calibrated, &scenario, &settings));
                match result {
                    Err(err) => notes.push(format!("no band for case {name}: {err}")),
                    Ok(prediction) => {
                        let measured = curves
                            .iter()
                            .find(|c| c.case == name && c.signal == "hrr")
                            .map(|c| (c.time_s.as_slice(), c.measured.as_slice()));
                        let chart = prediction_chart(
                            &format!("{name}: HRR {PARAMETER_BAND} from the fit's uncertainty"),
                            &prediction,
                            measured,
                        );
                        let written =
                            write_chart(&chart, &plots_dir.join(format!("band-{}", slug(&name))))?;
                        figures.push((chart.title.clone(), written[1].clone()));
                        plots.extend(written);
                        band_sections.push(quantities_table(&name, &prediction));
                    }
                }
            }
            let base = scenario_of_job(&calibrated);
            for test_path in &options.held_out {
                let Some(base) = &base else {
                    notes.push(format!(
                        "held-out test {} not scored: the fit job could not be read",
                        test_path.display()
                    ));
                    continue;
                };
                let description = match crate::data::TestDescription::load(test_path) {
                    Ok(d) => d,
                    Err(err) => {
                        notes.push(format!("held-out test {}: {err}", test_path.display()));
                        continue;
                    }
                };
                match score_test(&calibrated, base, &description) {
                    Err(err) => notes.push(format!("held-out test {}: {err}", test_path.display())),
                    Ok(scored) => {
                        let conditions = Conditions {
                            irradiance_kw_m2: Some(scored.reduced.irradiance_kw_m2),
                            thickness_mm: description.thickness_mm,
                            duration_s: scored.reduced.time_s.last().copied(),
                        };
                        let band = prepare_scenario(&calibrated, base.clone(), &conditions)
                            .and_then(|s| predict(&calibrated, &s, &settings));
                        match band {
                            Err(err) => notes.push(format!(
                                "no band for held-out test {}: {err}",
                                test_path.display()
                            )),
                            Ok(prediction) => {
                                let measured = scored
                                    .reduced
                                    .hrr_kw_m2
                                    .as_ref()
                                    .map(|h| (scored.reduced.time_s.as_slice(), h.as_slice()));
                                let title = format!(
                                    "held out, {}: predicted HRR {PARAMETER_BAND} and measurement",
                                    scored.score.label
                                );
                                let chart = prediction_chart(&title, &prediction, measured);
                                let written = write_chart(
                                    &chart,
                                    &plots_dir
                                        .join(format!("held-out-{}", slug(&scored.score.label))),
                                )?;
                                figures.push((chart.title.clone(), written[1].clone()));
                                plots.extend(written);
                                band_sections
                                    .push(quantities_table(&scored.score.label, &prediction));
                            }
                        }
                        scores.push(scored.score);
                    }
                }
            }
        }
    }

    let html = report_html(&ReportParts {
        summary: &summary,
        record: record.as_ref(),
        quality_rows: &quality_rows,
        figures: &figures,
        band_sections: &band_sections,
        scores: &scores,
        notes: &notes,
    })?;
    let html_path = run_dir.join("report.html");
    write_atomically(&html_path, html.as_bytes()).map_err(|source| ReportError::Write {
        path: html_path.clone(),
        source,
    })?;
    Ok(ReportOutput {
        html: html_path,
        plots,
        scores,
        notes,
    })
}

fn quantities_table(name: &str, prediction: &Prediction) -> String {
    let band = prediction
        .band_percent
        .map_or_else(String::new, |b| format!("{b:.0} % "));
    let mut out = format!(
        "<h3>{}</h3>\n<table class=\"quantities\">\n<tr><th>quantity (unit)</th><th>best fit (unit)</th><th>median (unit)</th>\
         <th>{band}{PARAMETER_BAND} (unit)</th><th>{band}{PREDICTION_BAND} (unit)</th>\
         <th>test scatter (%)</th><th>model error (%)</th><th>draws without it (count)</th></tr>\n",
        escape(name)
    );
    let percent = |v: f64| {
        if v.is_finite() {
            format!("{:.1}", 100.0 * v)
        } else {
            "–".into()
        }
    };
    for q in &prediction.quantities {
        let unit = escape(&q.unit);
        let prediction_band = if q.prediction_lower.is_finite() && q.prediction_upper.is_finite() {
            format!(
                "{} … {} {unit}",
                format_value(q.prediction_lower),
                format_value(q.prediction_upper)
            )
        } else {
            "– (the fit has no report-quantity signal for it)".into()
        };
        let _ = writeln!(
            out,
            "<tr><td>{} ({unit})</td><td>{}</td><td>{} {unit}</td><td>{} … {} {unit}</td><td>{prediction_band}</td><td>{}</td><td>{}</td><td>{}</td></tr>",
            escape(&q.name),
            q.best
                .map_or_else(|| "never ignites".into(), |v| format!("{} {unit}", format_value(v))),
            format_value(q.median),
            format_value(q.lower),
            format_value(q.upper),
            percent(q.relative_test_scatter),
            percent(q.relative_model_error),
            q.n_missing()
        );
    }
    out.push_str("</table>\n");
    out
}

/// The uncertainty of the fit: the likelihood temperature, the effective residuals and the
/// posterior sample (or why there is none).
fn uncertainty_section(s: &RunSummary) -> String {
    let mut html = String::from("<h2>Uncertainty of the parameters</h2>\n<table>\n");
    let mut row = |k: &str, v: String| {
        let _ = writeln!(
            html,
            "<tr><th>{}</th><td>{}</td></tr>",
            escape(k),
            escape(&v)
        );
    };
    row(
        "sandwich 95 % intervals",
        "±1.96 standard errors in fit space of the sandwich covariance H⁺MH⁺ at the optimum".into(),
    );
    row(
        "likelihood temperature T (–)",
        s.likelihood_temperature.map_or_else(
            || "not computed".into(),
            |t| {
                format!(
                    "{} (trace(JᵀJ·C)/p: how much wider the intervals are than independent residuals of the stated σ make them)",
                    format_value(t)
                )
            },
        ),
    );
    row(
        "effective independent residuals (count)",
        format!("{:.1} of {}", s.effective_residuals, s.n_residuals),
    );
    match (&s.posterior, &s.posterior_problem) {
        (Some(p), _) => {
            row(
                "posterior sample",
                format!(
                    "{} points kept: {} walkers × {} steps after a burn-in of {} ({}; posterior.json)",
                    p.points,
                    p.walkers,
                    p.steps.saturating_sub(p.burn_in),
                    p.burn_in,
                    if p.stopped {
                        format!(
                            "stopped on request at step {}{}; `emberfit fit --resume` continues it",
                            p.steps,
                            p.requested_steps
                                .map_or_else(String::new, |n| format!(" of {n}"))
                        )
                    } else {
                        format!("all {} steps drawn", p.steps)
                    }
                ),
            );
            row(
                "acceptance (%)",
                format!(
                    "{:.1} of the proposed moves after burn-in (0.2–0.5 is healthy for this sampler)",
                    100.0 * p.acceptance
                ),
            );
            row(
                "sample temperature (–)",
                format!(
                    "{} (the density sampled: exp(−cost/(2T)))",
                    format_value(p.temperature)
                ),
            );
            row("lowest cost met (–)", format_value(p.lowest_cost));
        }
        (None, Some(problem)) => row("posterior sample", format!("none: {problem}")),
        (None, None) => row(
            "posterior sample",
            "none (the job's settings.posterior_steps is 0)".into(),
        ),
    }
    html.push_str("</table>\n");
    html
}

/// One row of the fit-quality table: case, signal, points, cost, normalised RMSE %.
type QualityRow = (String, String, usize, Option<f64>, Option<f64>);

struct ReportParts<'a> {
    summary: &'a RunSummary,
    record: Option<&'a RunRecord>,
    quality_rows: &'a [QualityRow],
    figures: &'a [(String, PathBuf)],
    band_sections: &'a [String],
    scores: &'a [TestScore],
    notes: &'a [String],
}

fn report_html(parts: &ReportParts<'_>) -> Result<String, ReportError> {
    let s = parts.summary;
    let mut html = String::new();
    let _ = write!(
        html,
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n<title>{}</title>\n<style>\n\
         body{{font-family:sans-serif;max-width:1050px;margin:2em auto;padding:0 1em;color:#111}}\n\
         table{{border-collapse:collapse;margin:0.5em 0 1.5em}}td,th{{border:1px solid #999;padding:3px 8px;text-align:left;font-size:14px}}\n\
         th{{background:#eee}}.caution{{border:2px solid #a33;padding:0.6em 1em;background:#fff4f4}}\n\
         figure{{margin:1em 0}}figure svg{{max-width:100%;height:auto;border:1px solid #ccc}}\n\
         code{{font-size:13px}}table.held-out td,table.held-out th{{font-size:12px;padding:2px 4px}}\n</style>\n</head>\n<body>\n",
        escape(&s.title)
    );
    let _ = writeln!(html, "<h1>Fit report: {}</h1>", escape(&s.title));
    let _ = writeln!(
        html,
        "<p class=\"caution\"><strong>{}</strong></p>",
        escape(CAUTION)
    );
    html.push_str("<h2>Job</h2>\n<table>\n");
    let mut row = |k: &str, v: String| {
        let _ = writeln!(
            html,
            "<tr><th>{}</th><td>{}</td></tr>",
            escape(k),
            escape(&v)
        );
    };
    if let Some(r) = parts.record {
        row("run", r.name.clone());
        row("job file", r.job_path.clone());
        row("emberfit version", r.emberfit_version.clone());
        row("started", r.started.clone());
        row("seed", r.seed.to_string());
    }
    row("stopped because", s.reason.clone());
    row("objective", format_value(s.objective));
    row("model evaluations", s.evaluations.to_string());
    row("elapsed", format!("{:.1} s", s.elapsed_s));
    row("residuals", s.n_residuals.to_string());
    row("residual variance s²", format_value(s.residual_variance));
    html.push_str("</table>\n");
    if let Some(r) = parts.record {
        html.push_str("<h2>Data used</h2>\n<table>\n<tr><th>file</th><th>SHA-256</th></tr>\n");
        for (file, hash) in &r.data_sha256 {
            let _ = writeln!(
                html,
                "<tr><td><code>{}</code></td><td><code>{}</code></td></tr>",
                escape(file),
                escape(hash)
            );
        }
        html.push_str("</table>\n");
    }
    // The sandwich and the posterior intervals side by side (the posterior columns only when
    // the run has a sample).
    let has_posterior = s.posterior.is_some();
    let _ = writeln!(
        html,
        "<h2>Free parameters</h2>\n<table>\n<tr><th>#</th><th>parameter</th><th>unit</th><th>value (unit)</th>\
         <th>sandwich 95 % interval (unit)</th>{}<th>bounds (unit)</th><th>scale</th><th>warnings</th></tr>",
        if has_posterior {
            "<th>posterior 95 % interval (unit)</th><th>posterior median (unit)</th>"
        } else {
            ""
        }
    );
    for (k, p) in s.parameters.iter().enumerate() {
        let interval = match (p.lower_95, p.upper_95) {
            (Some(a), Some(b)) => crate::headless::interval_text(a, b),
            _ => "not determined".into(),
        };
        let posterior = if has_posterior {
            format!(
                "<td>{}</td><td>{}</td>",
                escape(
                    &p.posterior_interval_95()
                        .map_or_else(|| "–".into(), |(a, b)| crate::headless::interval_text(a, b))
                ),
                p.posterior_median.map_or_else(|| "–".into(), format_value)
            )
        } else {
            String::new()
        };
        let _ = writeln!(
            html,
            "<tr><td>{}</td><td><code>{}</code></td><td>{}</td><td>{}</td><td>{}</td>{posterior}<td>{} … {}</td><td>{}</td><td>{}</td></tr>",
            k + 1,
            escape(&p.name),
            escape(&p.unit),
            format_value(p.value),
            escape(&interval),
            format_value(p.lower_bound),
            format_value(p.upper_bound),
            if p.log_scale { "log" } else { "linear" },
            escape(&p.warnings.join("; "))
        );
    }
    html.push_str("</table>\n");
    html.push_str(&uncertainty_section(s));
    html.push_str(
        "<h2>Fit quality per case</h2>\n<p>Cost: weight · Σ((model − measured)/σ)². Normalised RMSE: \
         RMS(model − measured) / measured peak.</p>\n<table>\n<tr><th>case</th><th>signal</th><th>points (count)</th>\
         <th>cost (–)</th><th>normalised RMSE (%)</th></tr>\n",
    );
    for (case, signal, n, cost, nrmse) in parts.quality_rows {
        let _ = writeln!(
            html,
            "<tr><td>{}</td><td>{}</td><td>{n}</td><td>{}</td><td>{}</td></tr>",
            escape(case),
            escape(signal),
            cost.map_or_else(|| "–".into(), format_value),
            nrmse.map_or_else(|| "–".into(), |v| format!("{v:.2}"))
        );
    }
    html.push_str("</table>\n");
    if !parts.scores.is_empty() {
        html.push_str(
            "<h2>Held-out tests</h2>\n<p>Each quantity: measured, predicted by the best-fit model, and the \
             error (predicted − measured)/measured. NRMSE: RMS(model − measured) / measured peak.</p>\n\
             <table class=\"held-out\">\n<tr><th rowspan=\"2\">test</th><th rowspan=\"2\">irradiance (kW/m²)</th>\
             <th colspan=\"3\">ignition time</th><th colspan=\"3\">peak HRR</th><th colspan=\"3\">time to peak HRR</th>\
             <th colspan=\"3\">total heat release</th><th rowspan=\"2\">HRR NRMSE (%)</th><th rowspan=\"2\">MLR NRMSE (%)</th></tr>\n\
             <tr><th>measured (s)</th><th>predicted (s)</th><th>error (%)</th>\
             <th>measured (kW/m²)</th><th>predicted (kW/m²)</th><th>error (%)</th>\
             <th>measured (s)</th><th>predicted (s)</th><th>error (%)</th>\
             <th>measured (MJ/m²)</th><th>predicted (MJ/m²)</th><th>error (%)</th></tr>\n",
        );
        let pct = |v: Option<f64>| v.map_or_else(|| "–".into(), |v| format!("{v:+.1}"));
        let value = |v: Option<f64>| v.map_or_else(|| "–".into(), format_value);
        for t in parts.scores {
            let _ = writeln!(
                html,
                "<tr><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td>\
                 <td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td></tr>",
                escape(&t.label),
                t.irradiance_kw_m2,
                value(t.measured.ignition_time_s),
                value(t.modelled.ignition_time_s),
                pct(t.ignition_time_error_percent),
                value(t.measured.peak_hrr_kw_m2),
                value(t.modelled.peak_hrr_kw_m2),
                pct(t.peak_hrr_error_percent),
                value(t.measured.time_to_peak_hrr_s),
                value(t.modelled.time_to_peak_hrr_s),
                pct(t.time_to_peak_error_percent),
                value(t.measured.total_heat_release_mj_m2),
                value(t.modelled.total_heat_release_mj_m2),
                pct(t.total_heat_release_error_percent),
                t.hrr_nrmse_percent.map_or_else(|| "–".into(), |v| format!("{v:.1}")),
                t.mlr_nrmse_percent.map_or_else(|| "–".into(), |v| format!("{v:.1}"))
            );
        }
        html.push_str("</table>\n");
    }
    if !parts.band_sections.is_empty() {
        let _ = writeln!(
            html,
            "<h2>Predicted test quantities</h2>\n<p>The <strong>{PARAMETER_BAND}</strong> holds the \
             fitted parameters' uncertainty alone (parameter sets from the posterior sample when \
             the run has one, else from the sandwich covariance). The <strong>{PREDICTION_BAND}\
             </strong> also holds the repeats' relative scatter and the model's relative error \
             at the calibration conditions (the two percentage columns); it assumes the model \
             errs at a new condition as much as at the calibration conditions. The HRR curves' \
             shaded bands are {PARAMETER_BAND}s.</p>"
        );
        for section in parts.band_sections {
            html.push_str(section);
        }
    }
    html.push_str("<h2>Plots</h2>\n");
    for (title, svg_path) in parts.figures {
        let _ = writeln!(
            html,
            "<figure>\n{}\n<figcaption>{} (<code>plots/{}</code>, PNG beside it)</figcaption>\n</figure>",
            inline_svg(svg_path)?,
            escape(title),
            escape(&svg_path.file_name().map(|n| n.to_string_lossy().into_owned()).unwrap_or_default())
        );
    }
    if !parts.notes.is_empty() {
        html.push_str("<h2>Notes</h2>\n<ul>\n");
        for note in parts.notes {
            let _ = writeln!(html, "<li>{}</li>", escape(note));
        }
        html.push_str("</ul>\n");
    }
    let _ = writeln!(
        html,
        "<p class=\"caution\">{}</p>\n</body>\n</html>",
        escape(CAUTION)
    );
    Ok(html)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn html_escaping_covers_markup_characters() {
        assert_eq!(escape("a<b & \"c\">"), "a&lt;b &amp; &quot;c&quot;&gt;");
    }

    #[test]
    fn values_show_five_significant_digits() {
        assert_eq!(format_value(1097.3904), "1097.4");
        assert_eq!(format_value(0.169001), "0.16900");
        assert_eq!(format_value(2.81e13), "2.8100e13");
        assert_eq!(format_value(0.0), "0.0000");
    }
}
