//! Plausibility checks on a test's signals after reading: values a lab file can hold but a
//! real test cannot, which point at a wrong unit, a sign convention or a corrupt cell. They
//! give warnings (a [`Notice`] with `is_warning`), naming file, line and column; commands
//! with `--strict` turn them into errors.

use std::path::Path;

use super::Notice;

/// A mass above this multiple of the description's `initial_mass_g` is taken for a wrong unit
/// (a units row saying kg for a file in g gives 1000×; a holder on an untared cell rarely
/// weighs more than a few times the specimen).
pub const MASS_ABOVE_INITIAL_FACTOR: f64 = 20.0;
/// A single cell above this multiple of its column's median magnitude (and of the largest of
/// its neighbours) is taken for a corrupt cell.
pub const OUTLIER_FACTOR: f64 = 1e3;

/// One signal column, after reading: values on the kept rows and the line of each row.
pub struct ColumnView<'a> {
    pub header: &'a str,
    pub unit: &'a str,
    pub values: &'a [f64],
    pub lines: &'a [usize],
}

fn median_magnitude(values: &[f64]) -> f64 {
    let mut magnitudes: Vec<f64> = values
        .iter()
        .filter(|v| v.is_finite())
        .map(|v| v.abs())
        .collect();
    if magnitudes.is_empty() {
        return 0.0;
    }
    magnitudes.sort_by(f64::total_cmp);
    magnitudes[magnitudes.len() / 2]
}

/// Cells far above both the column's median magnitude and their neighbours (cone and
/// milligram-scale files alike).
pub fn outliers(path: &Path, column: &ColumnView<'_>, notices: &mut Vec<Notice>) {
    let median = median_magnitude(column.values);
    let floor = median.max(1e-9) * OUTLIER_FACTOR;
    let values = column.values;
    for (i, &value) in values.iter().enumerate() {
        if value.is_nan() || value.abs() <= floor {
            continue;
        }
        let neighbour = [i.checked_sub(1), Some(i + 1)]
            .into_iter()
            .flatten()
            .filter_map(|j| values.get(j))
            .map(|v| v.abs())
            .fold(0.0, f64::max);
        if value.abs() > OUTLIER_FACTOR * neighbour.max(median) {
            notices.push(Notice::warning(format!(
                "{}:{}: column `{}`: {value:e} {} is over {OUTLIER_FACTOR:e} times the \
                 column's median magnitude ({median:.4}) and its neighbours: a corrupt cell?",
                path.display(),
                column.lines.get(i).copied().unwrap_or(0),
                column.header,
                column.unit
            )));
        }
    }
}

/// Warnings for a cone test's mass and HRR columns.
pub fn check_cone_signals(
    path: &Path,
    description: &Path,
    mass_g: Option<ColumnView<'_>>,
    hrr: Option<ColumnView<'_>>,
    initial_mass_g: Option<f64>,
) -> Vec<Notice> {
    let mut notices = Vec::new();
    if let Some(mass) = &mass_g {
        outliers(path, mass, &mut notices);
        if let Some(initial) = initial_mass_g.filter(|m| *m > 0.0) {
            let largest = mass
                .values
                .iter()
                .enumerate()
                .filter(|(_, v)| v.is_finite())
                .max_by(|a, b| a.1.total_cmp(b.1));
            if let Some((row, &value)) = largest {
                if value > MASS_ABOVE_INITIAL_FACTOR * initial {
                    notices.push(Notice::warning(format!(
                        "{}:{}: column `{}`: {value} g is over {MASS_ABOVE_INITIAL_FACTOR} times \
                         the `initial_mass_g` of {} ({initial} g): is the column's unit right \
                         (g, not kg)?",
                        path.display(),
                        mass.lines.get(row).copied().unwrap_or(0),
                        mass.header,
                        description.display()
                    )));
                }
            }
        }
    }
    if let Some(hrr) = &hrr {
        outliers(path, hrr, &mut notices);
        let finite: Vec<f64> = hrr
            .values
            .iter()
            .copied()
            .filter(|v| v.is_finite())
            .collect();
        let has_negative = finite.iter().any(|v| *v < 0.0);
        if has_negative && finite.iter().all(|v| *v <= 0.0) {
            notices.push(Notice::warning(format!(
                "{}:{}: column `{}` is zero or negative on every row (lines {}–{}): a sign \
                 convention of the lab software? HRR is positive when the specimen burns",
                path.display(),
                hrr.lines.first().copied().unwrap_or(0),
                hrr.header,
                hrr.lines.first().copied().unwrap_or(0),
                hrr.lines.last().copied().unwrap_or(0)
            )));
        }
    }
    notices
}

/// Sample temperatures outside this range, K, are taken for a wrong unit or a corrupt column
/// in a milligram-scale file (instruments run from below room temperature to about 1800 K;
/// common practice, no single source).
pub const THERMOGRAM_TEMPERATURE_RANGE_K: (f64, f64) = (150.0, 2500.0);
/// A TGA mass above this fraction of the first (or stated initial) mass is taken for a wrong
/// unit or initial mass.
pub const THERMOGRAM_MASS_FRACTION_MAX: f64 = 1.5;

/// Plausibility of a TGA, DSC or MCC file after reading: the temperature column within
/// [`THERMOGRAM_TEMPERATURE_RANGE_K`], a TGA mass fraction at most
/// [`THERMOGRAM_MASS_FRACTION_MAX`] and not below zero, and no single absurd cell in the
/// signal or temperature column. Warnings name file, line and column.
pub fn check_thermogram_signals(
    path: &Path,
    temperature: &ColumnView<'_>,
    signal: &ColumnView<'_>,
    is_mass_fraction: bool,
) -> Vec<Notice> {
    let mut notices = Vec::new();
    let (low_k, high_k) = THERMOGRAM_TEMPERATURE_RANGE_K;
    if let Some(i) = temperature
        .values
        .iter()
        .position(|t| !(low_k..=high_k).contains(t))
    {
        notices.push(Notice::warning(format!(
            "{}:{}: column `{}`: a sample temperature of {} K lies outside {low_k}–{high_k} K: \
             a wrong unit?",
            path.display(),
            temperature.lines.get(i).copied().unwrap_or(0),
            temperature.header,
            temperature.values[i]
        )));
    }
    if is_mass_fraction {
        if let Some(i) = signal
            .values
            .iter()
            .position(|m| *m > THERMOGRAM_MASS_FRACTION_MAX || *m < -0.05)
        {
            notices.push(Notice::warning(format!(
                "{}:{}: column `{}`: the mass is {:.3} of the initial mass (expected 0 to 1): \
                 a wrong unit or initial mass?",
                path.display(),
                signal.lines.get(i).copied().unwrap_or(0),
                signal.header,
                signal.values[i]
            )));
        }
    }
    outliers(path, signal, &mut notices);
    outliers(path, temperature, &mut notices);
    notices
}

#[cfg(test)]
mod tests {
    use super::*;

    fn view<'a>(values: &'a [f64], lines: &'a [usize]) -> ColumnView<'a> {
        ColumnView {
            header: "Mass",
            unit: "g",
            values,
            lines,
        }
    }

    #[test]
    fn a_single_huge_cell_is_flagged_with_its_line() {
        let values = [70.0, 69.9, 1e30, 69.7, 69.6];
        let lines = [2, 3, 4, 5, 6];
        let notices = check_cone_signals(
            Path::new("t.csv"),
            Path::new("t.toml"),
            Some(view(&values, &lines)),
            None,
            None,
        );
        assert_eq!(notices.len(), 1);
        assert!(notices[0].message.contains("t.csv:4: column `Mass`"));
        assert!(notices[0].is_warning);
    }

    #[test]
    fn kilograms_for_grams_and_a_negative_hrr_are_flagged() {
        let mass = [70_000.0, 69_000.0, 60_000.0];
        let hrr = [-1.0, -50.0, -3.0];
        let lines = [3, 4, 5];
        let notices = check_cone_signals(
            Path::new("t.csv"),
            Path::new("t.toml"),
            Some(view(&mass, &lines)),
            Some(ColumnView {
                header: "HRR",
                unit: "kW/m2",
                values: &hrr,
                lines: &lines,
            }),
            Some(70.0),
        );
        assert_eq!(notices.len(), 2, "{notices:?}");
        assert!(notices[0].message.contains("initial_mass_g"));
        assert!(notices[1].message.contains("negative on every row"));
    }

    #[test]
    fn an_ordinary_test_gives_no_warning() {
        let mass: Vec<f64> = (0..100).map(|i| 70.0 - 0.5 * i as f64).collect();
        let hrr: Vec<f64> = (0..100).map(|i| if i < 10 { 0.0 } else { 300.0 }).collect();
        let lines: Vec<usize> = (2..102).collect();
        let notices = check_cone_signals(
            Path::new("t.csv"),
            Path::new("t.toml"),
            Some(view(&mass, &lines)),
            Some(ColumnView {
                header: "HRR",
                unit: "kW/m2",
                values: &hrr,
                lines: &lines,
            }),
            Some(70.0),
        );
        assert!(notices.is_empty(), "{notices:?}");
    }
}
