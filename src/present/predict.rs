//! `predict`: the predicted report quantities with their parameter and prediction bands, as a
//! table or JSON.
//!
//! **Invariant:** reads a `predict::Prediction`'s counts and quantities only (never its
//! curves); the caution of every result is the one `export::report::CAUTION` says.

use std::path::Path;

use crate::export::report::CAUTION;
use crate::predict::{Prediction, QuantityDistribution};

use super::finite;

fn quantity_json(q: &QuantityDistribution) -> serde_json::Value {
    serde_json::json!({
        "name": q.name, "unit": q.unit, "best": q.best,
        "median": finite(q.median), "lower": finite(q.lower), "upper": finite(q.upper),
        "mean": finite(q.mean), "standard_deviation": finite(q.standard_deviation),
        "prediction_lower": finite(q.prediction_lower),
        "prediction_upper": finite(q.prediction_upper),
        "relative_test_scatter": finite(q.relative_test_scatter),
        "relative_model_error": finite(q.relative_model_error),
        "n_without": q.n_missing(),
    })
}

/// The prediction as JSON (NaN, where a band is absent, as null).
pub fn prediction_json(prediction: &Prediction) -> serde_json::Value {
    let quantities: Vec<serde_json::Value> =
        prediction.quantities.iter().map(quantity_json).collect();
    serde_json::json!({
        "band_percent": prediction.band_percent,
        "n_samples": prediction.n_samples,
        "n_failed": prediction.n_failed,
        "n_rejected": prediction.n_rejected,
        "quantities": quantities,
        "notes": prediction.notes,
        "caution": CAUTION,
    })
}

/// The prediction as a table; `curves_out` names the CSV the curves were written to.
pub fn prediction_table(prediction: &Prediction, curves_out: Option<&Path>) -> String {
    let mut out = String::new();
    match prediction.band_percent {
        Some(band) => out.push_str(&format!(
            "{band} % band from {} drawn parameter sets ({} failed, {} outside the bounds redrawn)\n",
            prediction.n_samples, prediction.n_failed, prediction.n_rejected
        )),
        None => out.push_str("best fit only (give --band 95 for an uncertainty band)\n"),
    }
    if prediction.band_percent.is_some() {
        out.push_str(
            "  parameter band: the fitted parameters' uncertainty alone; prediction band (test \
             scatter and model error): also the repeats' scatter and the model's error at the \
             calibration conditions (docs/predictions.md)\n",
        );
    }
    out.push_str(&format!(
        "  {:<28}{:>12}{:>12}{:>24}{:>26}\n",
        "quantity", "best fit", "median", "parameter band", "prediction band"
    ));
    let show = |v: f64| {
        if v.is_finite() {
            format!("{v:.2}")
        } else {
            "-".into()
        }
    };
    for q in &prediction.quantities {
        out.push_str(&format!(
            "  {:<28}{:>12}{:>12}{:>24}{:>26}\n",
            format!("{} ({})", q.name, q.unit),
            q.best
                .map_or_else(|| "no ignition".into(), |v| format!("{v:.2}")),
            show(q.median),
            if q.lower.is_finite() {
                format!("{} … {}", show(q.lower), show(q.upper))
            } else {
                "-".into()
            },
            if q.prediction_lower.is_finite() {
                format!(
                    "{} … {}",
                    show(q.prediction_lower),
                    show(q.prediction_upper)
                )
            } else {
                "-".into()
            }
        ));
        if q.n_missing() > 0 {
            out.push_str(&format!("    {} draws never ignite\n", q.n_missing()));
        }
    }
    if let Some(path) = curves_out {
        out.push_str(&format!(
            "curves written to {} ({} rows)\n",
            path.display(),
            prediction.time_s.len()
        ));
    }
    out.push_str(&format!("{CAUTION}\n"));
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::physics::output::History;
    use crate::present::fixtures;

    fn quantity(best: Option<f64>, lower: f64, upper: f64) -> QuantityDistribution {
        QuantityDistribution {
            name: "peak HRR".into(),
            unit: "kW/m²".into(),
            best,
            values: vec![Some(1.0), None],
            median: 301.0,
            lower,
            upper,
            mean: 300.0,
            standard_deviation: 10.0,
            prediction_lower: f64::NAN,
            prediction_upper: f64::NAN,
            relative_test_scatter: f64::NAN,
            relative_model_error: f64::NAN,
        }
    }

    fn prediction(band_percent: Option<f64>, q: QuantityDistribution) -> Prediction {
        Prediction {
            time_s: vec![0.0, 1.0, 2.0],
            signals: vec![],
            quantities: vec![q],
            best: History {
                probe_names: vec![],
                samples: vec![],
                summary: fixtures::summary(),
                final_cells: vec![],
            },
            band_percent,
            n_samples: 40,
            n_failed: 1,
            n_rejected: 2,
            notes: vec![],
        }
    }

    #[test]
    fn the_table_gives_two_decimals_and_a_dash_where_there_is_no_band() {
        let table = prediction_table(
            &prediction(Some(95.0), quantity(Some(299.994), 280.0, 320.456)),
            Some(Path::new("p.csv")),
        );
        let lines: Vec<&str> = table.lines().collect();
        assert_eq!(
            lines[0],
            "95 % band from 40 drawn parameter sets (1 failed, 2 outside the bounds redrawn)"
        );
        // 299.994 to two decimals is 299.99, 320.456 is 320.46; no prediction band: a dash.
        let row = lines[3];
        assert!(row.starts_with("  peak HRR (kW/m²)"), "{row}");
        let cells: Vec<&str> = row.split("  ").filter(|c| !c.trim().is_empty()).collect();
        assert_eq!(
            cells[1..].iter().map(|c| c.trim()).collect::<Vec<_>>(),
            ["299.99", "301.00", "280.00 … 320.46", "-"]
        );
        assert_eq!(lines[4], "    1 draws never ignite");
        assert_eq!(lines[5], "curves written to p.csv (3 rows)");
        assert_eq!(lines[6], CAUTION);
    }

    #[test]
    fn without_a_band_the_table_says_how_to_ask_for_one() {
        let table = prediction_table(&prediction(None, quantity(None, f64::NAN, f64::NAN)), None);
        assert!(table.starts_with("best fit only (give --band 95 for an uncertainty band)\n"));
        assert!(table.contains("no ignition"));
        assert!(!table.contains("curves written"));
    }

    #[test]
    fn the_json_writes_nan_as_null() {
        let json = prediction_json(&prediction(Some(95.0), quantity(Some(1.0), 0.5, 1.5)));
        let q = &json["quantities"][0];
        assert_eq!(q["lower"], 0.5);
        assert!(q["prediction_lower"].is_null());
        assert_eq!(q["n_without"], 1);
        assert_eq!(json["caution"], CAUTION);
    }
}
