//! `fit`: the table printed when a fit ends (objective, parts, each parameter's value, 95 %
//! interval and sensitivity rank, warnings, what the labels mean), at most 80 columns.
//!
//! **Invariant:** reads a finished run's `run::RunSummary` and the parameter labels only;
//! numbers go through the shared formats of `crate::headless` and text through the word wrap
//! of `crate::tui::draw`, so this table and the screens agree digit for digit.

use crate::case::label::ParameterLabel;
use crate::run::RunSummary;

pub fn fit_summary_table(summary: &RunSummary, labels: &[ParameterLabel]) -> String {
    use crate::headless::{interval_text, significant};
    const WIDTH: usize = 80;
    let mut out = format!("\n{}\n", summary.title);
    for line in wrapped(
        &format!(
            "objective {} ({})",
            significant(summary.objective, 6),
            summary.reason
        ),
        WIDTH - 2,
    ) {
        out.push_str(&format!("  {line}\n"));
    }
    out.push_str(&format!("    {:<20} {:<22} {}\n", "case", "signal", "part"));
    for part in &summary.parts {
        out.push_str(&format!(
            "    {:<20} {:<22} {}\n",
            part.case,
            part.signal,
            significant(part.cost, 5)
        ));
    }
    let interval_heading = if summary.converged {
        "95 % interval"
    } else {
        "95 % (provisional)"
    };
    let label = |i: usize, name: &str| {
        labels
            .get(i)
            .map_or_else(|| name.to_string(), |l| l.short.clone())
    };
    let label_width = summary
        .parameters
        .iter()
        .enumerate()
        .map(|(i, p)| label(i, &p.name).chars().count())
        .max()
        .unwrap_or(9)
        .clamp(9, 22);
    out.push_str(&format!(
        "  {:<label_width$} {:>10} {:<9} {:<22} {}\n",
        "parameter", "value", "unit", interval_heading, "rank"
    ));
    for (i, p) in summary.parameters.iter().enumerate() {
        let interval = match (p.lower_95, p.upper_95) {
            (Some(a), Some(b)) => interval_text(a, b),
            _ => "undetermined".into(),
        };
        let rank = p
            .sensitivity_rank
            .map_or("–".to_string(), |r| r.to_string());
        out.push_str(&format!(
            "  {:<label_width$} {:>10} {:<9} {:<22} {rank}\n",
            label(i, &p.name),
            significant(p.value, 5),
            p.unit,
            interval
        ));
        if let Some((a, b)) = p.posterior_interval_95() {
            out.push_str(&format!(
                "  {:<label_width$} {:>10} {:<9} {}
",
                "",
                "",
                "posterior",
                interval_text(a, b)
            ));
        }
        for warning in &p.warnings {
            for line in wrapped(&format!("warning: {warning}"), WIDTH - 6) {
                out.push_str(&format!("      {line}\n"));
            }
        }
    }
    if let Some(reason) = &summary.not_converged_reason {
        let text = format!(
            "NOT CONVERGED ({reason}): the values and intervals are those of the best point so \
             far; resume the run or give a larger budget before relying on them"
        );
        for line in wrapped(&text, WIDTH - 2) {
            out.push_str(&format!("  {line}\n"));
        }
    }
    if let Some(problem) = &summary.identifiability_problem {
        for line in wrapped(&format!("intervals not computed: {problem}"), WIDTH - 2) {
            out.push_str(&format!("  {line}\n"));
        }
    } else {
        out.push_str("  rank: 1 = the parameter the data are most sensitive to\n");
    }
    if let Some(problem) = &summary.posterior_problem {
        for line in wrapped(&format!("no posterior sample: {problem}"), WIDTH - 2) {
            out.push_str(&format!("  {line}\n"));
        }
    }
    if let Some(posterior) = &summary.posterior {
        let text = format!(
            "95 % intervals from the sandwich covariance; \"posterior\": 2.5–97.5 % of the \
             posterior sample ({} points, {:.0} % of moves accepted{}; posterior.json)",
            posterior.points,
            100.0 * posterior.acceptance,
            if posterior.stopped {
                format!(
                    "; stopped on request at step {}{}, the points drawn so far are kept and \
                     `emberfit fit --resume` continues the sample",
                    posterior.steps,
                    posterior
                        .requested_steps
                        .map_or_else(String::new, |n| format!(" of {n}"))
                )
            } else {
                String::new()
            }
        );
        for line in wrapped(&text, WIDTH - 2) {
            out.push_str(&format!("  {line}\n"));
        }
    }
    if !labels.is_empty() {
        out.push_str("  what the labels are:\n");
        for (p, l) in summary.parameters.iter().zip(labels) {
            for line in wrapped(
                &format!("{} = {}: {}", l.short, p.name, l.meaning),
                WIDTH - 6,
            ) {
                out.push_str(&format!("    {line}\n"));
            }
        }
    }
    for line in wrapped(crate::export::report::CAUTION, WIDTH - 2) {
        out.push_str(&format!("  {line}\n"));
    }
    out
}

/// `text` in lines of at most `width` characters, broken at spaces.
fn wrapped(text: &str, width: usize) -> Vec<String> {
    crate::tui::draw::wrap_words(text, width)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::run::progress::PartInfo;
    use crate::run::SummaryParameter;

    fn summary(converged: bool) -> RunSummary {
        RunSummary {
            title: "panel".into(),
            reason: "converged".into(),
            converged,
            not_converged_reason: (!converged).then(|| "evaluation budget spent".into()),
            objective: 12.345_678,
            parts: vec![PartInfo {
                case: "t-25".into(),
                signal: "hrr".into(),
                cost: 2.718_49,
            }],
            prior_cost: 0.0,
            evaluations: 100,
            elapsed_s: 1.0,
            parameters: vec![SummaryParameter {
                name: "component.virgin.conductivity_w_m_k".into(),
                unit: "W/(m·K)".into(),
                value: 0.234_567_8,
                lower_bound: 0.1,
                upper_bound: 0.5,
                log_scale: false,
                lower_95: Some(0.2),
                upper_95: Some(0.27),
                standard_error_fit_space: Some(0.0175),
                sensitivity: Some(4.0),
                sensitivity_rank: Some(1),
                warnings: vec![],
                posterior_lower_95: None,
                posterior_upper_95: None,
                posterior_median: None,
            }],
            correlation: vec![vec![1.0]],
            covariance: vec![vec![0.0003]],
            n_residuals: 10,
            effective_residuals: 10.0,
            residual_variance: 1.0,
            singular_values: vec![1.0],
            identifiability_problem: None,
            likelihood_temperature: None,
            posterior: None,
            posterior_problem: None,
        }
    }

    fn labels() -> Vec<ParameterLabel> {
        vec![ParameterLabel {
            short: "k virgin".into(),
            meaning: "conductivity of the virgin component".into(),
        }]
    }

    /// Worked by hand: 12.345678 to six significant digits is 12.3457 and 2.71849 to five is
    /// 2.7185; 0.2345678 to five is 0.23457; the interval 0.2 … 0.27 is 0.07 wide, so both
    /// ends get the digits that show its first two (0.200 … 0.270).
    #[test]
    fn the_table_rounds_to_significant_digits_and_shows_the_interval_width() {
        let table = fit_summary_table(&summary(true), &labels());
        let lines: Vec<&str> = table.lines().collect();
        assert_eq!(lines[0], "");
        assert_eq!(lines[1], "panel");
        assert_eq!(lines[2], "  objective 12.3457 (converged)");
        assert_eq!(
            lines[4].trim_end(),
            "    t-25                 hrr                    2.7185"
        );
        assert_eq!(
            lines[5],
            "  parameter      value unit      95 % interval          rank"
        );
        assert_eq!(
            lines[6],
            "  k virgin     0.23457 W/(m·K)   0.200 … 0.270          1"
        );
        assert!(table.contains("  rank: 1 = the parameter the data are most sensitive to\n"));
        assert!(table.contains(
            "    k virgin = component.virgin.conductivity_w_m_k: conductivity of the virgin\n"
        ));
        assert!(lines.iter().all(|l| l.chars().count() <= 80));
    }

    #[test]
    fn a_fit_that_did_not_converge_says_so_above_its_intervals() {
        let table = fit_summary_table(&summary(false), &labels());
        assert!(table.contains("95 % (provisional)"));
        assert!(table.contains("  NOT CONVERGED (evaluation budget spent): the values"));
    }

    /// The posterior interval goes under the sandwich one, in the same column and digits (2 +
    /// 9 + 1 + 10 + 1 = 23 columns before the unit column, where "posterior" stands)
    /// (0.19 … 0.28 is 0.09 wide: three decimals show its first two digits), and a sentence
    /// names both and the sample (300 points, 0.4123 accepted → 41 %).
    #[test]
    fn a_posterior_sample_adds_its_interval_under_each_parameter() {
        let mut summary = summary(true);
        summary.parameters[0].posterior_lower_95 = Some(0.19);
        summary.parameters[0].posterior_upper_95 = Some(0.28);
        summary.posterior = Some(crate::run::PosteriorInfo {
            file: "posterior.json".into(),
            walkers: 10,
            steps: 40,
            burn_in: 10,
            points: 300,
            acceptance: 0.4123,
            temperature: 1.5,
            lowest_cost: 12.0,
            stopped: false,
            requested_steps: Some(40),
        });
        let table = fit_summary_table(&summary, &labels());
        let lines: Vec<&str> = table.lines().collect();
        assert_eq!(
            lines[7].trim_end(),
            "                       posterior 0.190 … 0.280"
        );
        assert!(table.contains("posterior sample (300 points, 41 % of moves accepted;"));
        assert!(lines.iter().all(|l| l.chars().count() <= 80));
        assert!(!table.contains("stopped"));
    }

    /// A sample cut short by a stop request keeps its points and says where it stopped and
    /// how to go on.
    #[test]
    fn a_stopped_posterior_sample_says_so_and_how_to_continue_it() {
        let mut summary = summary(true);
        summary.parameters[0].posterior_lower_95 = Some(0.19);
        summary.parameters[0].posterior_upper_95 = Some(0.28);
        summary.posterior = Some(crate::run::PosteriorInfo {
            file: "posterior.json".into(),
            walkers: 10,
            steps: 25,
            burn_in: 10,
            points: 150,
            acceptance: 0.4,
            temperature: 1.5,
            lowest_cost: 12.0,
            stopped: true,
            requested_steps: Some(40),
        });
        let table = fit_summary_table(&summary, &labels());
        let text = table.split_whitespace().collect::<Vec<_>>().join(" ");
        assert!(
            text.contains("stopped on request at step 25 of 40, the points drawn so far are kept and `emberfit fit --resume` continues the sample"),
            "{table}"
        );
        assert!(table.lines().all(|l| l.chars().count() <= 80));
    }

    #[test]
    fn a_posterior_sample_that_could_not_be_drawn_says_why() {
        let mut summary = summary(true);
        summary.posterior_problem = Some("a stop was requested before the sample".into());
        let table = fit_summary_table(&summary, &labels());
        assert!(table.contains("  no posterior sample: a stop was requested before the sample\n"));
        assert!(!table.contains("posterior sample ("));
    }
}
