//! Reading milligram-scale test files (TGA mass, DSC heat flow, MCC heat release rate): CSV with
//! a row of column names and a row of units, optionally starting with a UTF-8 byte-order mark.
//! Columns are recognised by their units (and, between DSC and MCC, by their names); values are
//! converted to SI or to the per-initial-mass units of the 0-D model here, at the edge.
//!
//! Columns are chosen here by their units; the cells are read by the generic table reader of
//! `data::table`, so separators, decimal commas, byte-order marks and blank cells are handled
//! (and reported as notices) the same way as for cone files.

use std::path::{Path, PathBuf};

use super::MicroscaleError;
use crate::data::table::{parse_table, ColumnRequest, Quantity};
use crate::data::Notice;

/// What a milligram-scale file measures.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum MeasurementKind {
    /// Thermogravimetry: sample mass.
    Tga,
    /// Differential scanning calorimetry: heat flow, endothermic positive.
    Dsc,
    /// Microscale combustion calorimetry: heat release rate.
    Mcc,
}

impl MeasurementKind {
    /// Lower-case name for messages and tables.
    pub fn name(self) -> &'static str {
        match self {
            MeasurementKind::Tga => "tga",
            MeasurementKind::Dsc => "dsc",
            MeasurementKind::Mcc => "mcc",
        }
    }
}

/// One milligram-scale run read from a file, in the 0-D model's units.
#[derive(Debug, Clone, PartialEq)]
pub struct Thermogram {
    /// File the run was read from.
    pub path: PathBuf,
    /// What the file measures.
    pub kind: MeasurementKind,
    /// Time, s, from the file's time column.
    pub time_s: Vec<f64>,
    /// Sample temperature, K.
    pub temperature_k: Vec<f64>,
    /// TGA: mass over the first reading (or over the stated initial mass); DSC and MCC: W per g
    /// of initial mass.
    pub values: Vec<f64>,
    /// Initial sample mass in mg when the file gives absolute masses (its first reading).
    pub initial_mass_mg: Option<f64>,
    /// Repairs made while reading (skipped rows, byte-order mark), for the user to see.
    pub notices: Vec<Notice>,
}

impl Thermogram {
    /// Mean heating rate from a least-squares line of temperature against time over the rows
    /// whose index lies in `rows`, K/s; `None` with fewer than two rows.
    pub fn heating_rate_k_s(&self, rows: std::ops::Range<usize>) -> Option<f64> {
        let rows = rows.start.min(self.time_s.len())..rows.end.min(self.time_s.len());
        line_fit(&self.time_s[rows.clone()], &self.temperature_k[rows]).map(|(slope, _)| slope)
    }
}

/// Least-squares line y = slope·x + intercept; `None` with fewer than two distinct x.
pub(crate) fn line_fit(x: &[f64], y: &[f64]) -> Option<(f64, f64)> {
    let n = x.len().min(y.len());
    if n < 2 {
        return None;
    }
    let mean_x = x[..n].iter().sum::<f64>() / n as f64;
    let mean_y = y[..n].iter().sum::<f64>() / n as f64;
    let (mut sxx, mut sxy) = (0.0, 0.0);
    for (xi, yi) in x[..n].iter().zip(&y[..n]) {
        sxx += (xi - mean_x) * (xi - mean_x);
        sxy += (xi - mean_x) * (yi - mean_y);
    }
    if sxx <= 0.0 {
        return None;
    }
    let slope = sxy / sxx;
    Some((slope, mean_y - slope * mean_x))
}

/// How a recognised column converts to the model's unit.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Signal {
    /// Absolute mass; factor to mg.
    MassMg(f64),
    /// Mass already normalised; factor to a fraction (1 for g/g, 0.01 for %).
    MassFraction(f64),
    /// Heat flow or heat release per initial mass; factor to W/g.
    PerMassWg(f64),
}

fn clean_unit(unit: &str) -> String {
    unit.trim()
        .trim_start_matches(['[', '('])
        .trim_end_matches([']', ')'])
        .trim()
        .to_lowercase()
        .replace(' ', "")
}

fn time_factor_s(unit: &str) -> Option<f64> {
    match unit {
        "s" | "sec" => Some(1.0),
        "min" => Some(60.0),
        "h" => Some(3600.0),
        _ => None,
    }
}

/// Offset to add to get K; `None` for a unit that is not a temperature.
fn temperature_offset_k(unit: &str) -> Option<f64> {
    match unit {
        "k" => Some(0.0),
        "°c" | "c" | "degc" | "deg.c" | "℃" => Some(273.15),
        _ => None,
    }
}

fn signal_of(unit: &str) -> Option<Signal> {
    match unit {
        "mg" => Some(Signal::MassMg(1.0)),
        "g" => Some(Signal::MassMg(1e3)),
        "µg" | "ug" => Some(Signal::MassMg(1e-3)),
        "g/g" | "mg/mg" | "-" | "1" => Some(Signal::MassFraction(1.0)),
        "%" | "wt%" => Some(Signal::MassFraction(0.01)),
        "mw/mg" | "w/g" => Some(Signal::PerMassWg(1.0)),
        "w/kg" => Some(Signal::PerMassWg(1e-3)),
        "kw/kg" => Some(Signal::PerMassWg(1.0)),
        _ => None,
    }
}

fn kind_from_name(name: &str) -> Option<MeasurementKind> {
    let name = name.to_lowercase();
    if name.contains("hrr") || name.contains("heat release") {
        Some(MeasurementKind::Mcc)
    } else if name.contains("heat flow") || name.contains("dsc") {
        Some(MeasurementKind::Dsc)
    } else {
        None
    }
}

/// Reads a TGA, DSC or MCC file. The first column whose unit is a time is time, the first whose
/// unit is a temperature is temperature, and the first mass or per-mass column is the signal;
/// further columns (error bands, other signals) are ignored. Rows with a blank cell in one of
/// the three columns are skipped, and a notice says how many.
pub fn read_thermogram(path: &Path) -> Result<Thermogram, MicroscaleError> {
    let bytes =
        crate::input::read_bytes(path, crate::input::InputKind::Table).map_err(|source| {
            MicroscaleError::File(crate::source::FileError::Read {
                path: path.to_path_buf(),
                source,
            })
        })?;
    parse_thermogram(path, &String::from_utf8_lossy(&bytes))
}

/// Column names and units of a file's header: the first non-blank row holds names (a unit in
/// brackets may follow a name), and the next row holds units when none of its cells is a
/// number. Returns (line of the units, names, units).
fn header_units(
    path: &Path,
    text: &str,
) -> Result<(usize, Vec<String>, Vec<String>), MicroscaleError> {
    let format_error = |line: usize, problem: String| MicroscaleError::Format {
        path: path.to_path_buf(),
        line,
        problem,
    };
    let text = text.strip_prefix('\u{feff}').unwrap_or(text);
    let rows: Vec<(usize, &str)> = text
        .lines()
        .enumerate()
        .filter(|(_, line)| !line.trim().is_empty())
        .take(200)
        .collect();
    if rows.is_empty() {
        return Err(format_error(
            1,
            "is empty: expected a row of column names".into(),
        ));
    }
    // The header is the first row (with the units row under it) that names a time, a
    // temperature and a signal column; comment or title lines before it are skipped.
    let candidates = (0..rows.len()).map(|start| header_at(&rows, start));
    let first = header_at(&rows, 0);
    Ok(candidates
        .into_iter()
        .find(|(_, _, units)| {
            units.iter().any(|u| time_factor_s(u).is_some())
                && units.iter().any(|u| temperature_offset_k(u).is_some())
                && units.iter().any(|u| signal_of(u).is_some())
        })
        .unwrap_or(first))
}

/// Names and units of the header starting at the non-blank row `start`.
fn header_at(rows: &[(usize, &str)], start: usize) -> (usize, Vec<String>, Vec<String>) {
    let (names_idx, names_line) = rows[start];
    let delimiter = [',', ';', '\t']
        .into_iter()
        .find(|d| names_line.contains(*d))
        .unwrap_or(',');
    let split = |line: &str| -> Vec<String> {
        line.split(delimiter)
            .map(|cell| cell.trim().trim_matches('"').trim().to_string())
            .collect()
    };
    let names = split(names_line);
    let mut units: Vec<String> = names
        .iter()
        .map(
            |name| match (name.rfind(['[', '(']), name.ends_with([']', ')'])) {
                (Some(open), true) => clean_unit(&name[open..]),
                _ => String::new(),
            },
        )
        .collect();
    let mut units_line = names_idx + 1;
    if let Some(&(idx, line)) = rows.get(start + 1) {
        let cells = split(line);
        let is_units_row = cells
            .iter()
            .all(|c| c.is_empty() || c.replace(',', ".").parse::<f64>().is_err());
        if is_units_row {
            units_line = idx + 1;
            for (unit, cell) in units.iter_mut().zip(&cells) {
                if !cell.is_empty() {
                    *unit = clean_unit(cell);
                }
            }
        }
    }
    (units_line, names, units)
}

/// Parses the text of a milligram-scale file; `path` is used in messages only. Column
/// detection is by unit (here); the reading itself is the generic table reader of
/// `data::table`, which handles byte-order marks, separators, decimal commas and blank cells.
pub fn parse_thermogram(path: &Path, text: &str) -> Result<Thermogram, MicroscaleError> {
    let format_error = |line: usize, problem: String| MicroscaleError::Format {
        path: path.to_path_buf(),
        line,
        problem,
    };
    let (units_line, names, units) = header_units(path, text)?;
    let column = |test: &dyn Fn(&str) -> bool| units.iter().position(|u| test(u));
    let time_col = column(&|u| time_factor_s(u).is_some()).ok_or_else(|| {
        format_error(
            units_line,
            format!("no time column: units are {}", units.join(", ")),
        )
    })?;
    let temperature_col = column(&|u| temperature_offset_k(u).is_some()).ok_or_else(|| {
        format_error(
            units_line,
            format!(
                "no temperature column (K or °C): units are {}",
                units.join(", ")
            ),
        )
    })?;
    let signal_col = column(&|u| signal_of(u).is_some()).ok_or_else(|| {
        format_error(
            units_line,
            format!(
                "no mass, heat-flow or heat-release column (mg, g, g/g, %, mW/mg, W/g, W/kg): \
                 units are {}",
                units.join(", ")
            ),
        )
    })?;
    let signal = signal_of(&units[signal_col]).unwrap_or(Signal::MassFraction(1.0));
    let signal_name = names[signal_col].clone();
    let kind = match signal {
        Signal::MassMg(_) | Signal::MassFraction(_) => MeasurementKind::Tga,
        Signal::PerMassWg(_) => kind_from_name(&signal_name).ok_or_else(|| {
            format_error(
                units_line,
                format!(
                    "column `{signal_name}` is per mass, but its name says neither heat flow \
                     (DSC) nor HRR / heat release (MCC)"
                ),
            )
        })?,
    };
    // The table reader finds columns by name, ignoring case and a bracketed unit.
    let bare = |name: &str| -> String {
        let name = name.trim();
        let name = match (name.rfind(['[', '(']), name.ends_with([']', ')'])) {
            (Some(open), true) if open > 0 => &name[..open],
            _ => name,
        };
        name.trim().to_lowercase()
    };
    for col in [time_col, temperature_col, signal_col] {
        if let Some(other) = (0..col).find(|&other| bare(&names[other]) == bare(&names[col])) {
            return Err(format_error(
                units_line - 1,
                format!(
                    "columns `{}` and `{}` have the same name once case is ignored; rename one",
                    names[other], names[col]
                ),
            ));
        }
    }
    let request = |col: usize, quantity: Quantity| ColumnRequest {
        name: names[col].clone(),
        unit: None,
        quantity,
        is_required: true,
    };
    let table = parse_table(
        path,
        text,
        &[
            request(time_col, Quantity::Time),
            request(temperature_col, Quantity::Temperature),
            request(signal_col, Quantity::Any),
        ],
    )
    .map_err(|err| MicroscaleError::Data(Box::new(err)))?;
    let mut notices = table.notices.clone();
    let columns: Vec<&[f64]> = table
        .columns
        .iter()
        .map(|c| c.as_ref().map_or(&[][..], |c| c.values.as_slice()))
        .collect();
    let (mut time_s, mut temperature_k, mut raw) = (Vec::new(), Vec::new(), Vec::new());
    let mut kept_lines = Vec::new();
    let mut n_incomplete = 0usize;
    for (row, line) in table.lines.iter().enumerate() {
        let (t, temp, value) = (columns[0][row], columns[1][row], columns[2][row]);
        if t.is_nan() || temp.is_nan() || value.is_nan() {
            n_incomplete += 1;
            continue;
        }
        if let Some(&previous) = time_s.last() {
            if t <= previous {
                return Err(format_error(
                    *line,
                    format!("time must increase, got {t} s after {previous} s"),
                ));
            }
        }
        time_s.push(t);
        temperature_k.push(temp);
        raw.push(value);
        kept_lines.push(*line);
    }
    if n_incomplete > 0 {
        notices.push(Notice::new(format!(
            "{}: skipped {n_incomplete} rows with a blank time, temperature or `{signal_name}`",
            path.display()
        )));
    }
    if time_s.len() < 3 {
        return Err(format_error(
            units_line,
            format!("needs at least 3 data rows, found {}", time_s.len()),
        ));
    }
    let (values, initial_mass_mg): (Vec<f64>, Option<f64>) = match signal {
        Signal::MassMg(factor) => {
            let first_mg = raw[0] * factor;
            if first_mg <= 0.0 {
                return Err(format_error(
                    table.lines[0],
                    format!("first mass must be > 0, got {first_mg} mg"),
                ));
            }
            (
                raw.iter().map(|m| m * factor / first_mg).collect(),
                Some(first_mg),
            )
        }
        Signal::MassFraction(factor) => (raw.iter().map(|m| m * factor).collect(), None),
        Signal::PerMassWg(factor) => (raw.iter().map(|q| q * factor).collect(), None),
    };
    notices.extend(crate::data::plausibility::check_thermogram_signals(
        path,
        &crate::data::plausibility::ColumnView {
            header: &names[temperature_col],
            unit: &units[temperature_col],
            values: &temperature_k,
            lines: &kept_lines,
        },
        &crate::data::plausibility::ColumnView {
            header: &signal_name,
            unit: "",
            values: &values,
            lines: &kept_lines,
        },
        matches!(signal, Signal::MassMg(_) | Signal::MassFraction(_)),
    ));
    Ok(Thermogram {
        path: path.to_path_buf(),
        kind,
        time_s,
        temperature_k,
        values,
        initial_mass_mg,
        notices,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn reads_a_mass_file_with_a_byte_order_mark_and_normalises_by_the_first_reading() {
        let text = "\u{feff}time, Temp ,mass\n[s],[K],[mg]\n0,300,4.0\n10,301.5,\n20,303,3.0\n30,304.5,2.0\n";
        let run = parse_thermogram(Path::new("a.csv"), text).unwrap();
        assert_eq!(run.kind, MeasurementKind::Tga);
        assert_eq!(run.time_s, vec![0.0, 20.0, 30.0]);
        assert_eq!(run.values, vec![1.0, 0.75, 0.5]);
        assert_eq!(run.initial_mass_mg, Some(4.0));
    }

    #[test]
    fn tells_dsc_from_mcc_by_the_column_name_and_converts_celsius() {
        let dsc = "t,Temp,Heat Flow\nmin,°C,mW/mg\n0,25,0.1\n1,35,0.2\n2,45,0.3\n";
        let run = parse_thermogram(Path::new("d.csv"), dsc).unwrap();
        assert_eq!(run.kind, MeasurementKind::Dsc);
        assert_eq!(run.time_s[1], 60.0);
        assert!((run.temperature_k[0] - 298.15).abs() < 1e-12);
        let mcc = "Time,Temperature,HRR,HRR error\n[s],[K],[W/g],[W/g]\n0,350,0,1\n1,351,2,1\n2,352,4,1\n";
        assert_eq!(
            parse_thermogram(Path::new("m.csv"), mcc).unwrap().kind,
            MeasurementKind::Mcc
        );
    }

    #[test]
    fn a_bad_number_is_reported_with_file_line_and_column() {
        let text = "time,Temp,mass\n[s],[K],[mg]\n0,300,4\n1,301,4\n2,abc,3\n";
        let message = parse_thermogram(Path::new("bad.csv"), text)
            .unwrap_err()
            .to_string();
        assert!(
            message.contains("bad.csv:5") && message.contains("Temp") && message.contains("abc"),
            "{message}"
        );
    }

    #[test]
    fn columns_whose_names_differ_only_in_case_are_refused() {
        let text = "t,T,mass\n[s],[K],[mg]\n0,300,4\n1,301,4\n2,302,3\n";
        let message = parse_thermogram(Path::new("x.csv"), text)
            .unwrap_err()
            .to_string();
        assert!(
            message.contains("x.csv:1") && message.contains("`t` and `T`"),
            "{message}"
        );
    }

    #[test]
    fn a_file_without_a_temperature_column_says_what_units_it_found() {
        let text = "time,mass\n[s],[mg]\n0,4\n1,4\n2,3\n";
        let message = parse_thermogram(Path::new("x.csv"), text)
            .unwrap_err()
            .to_string();
        assert!(
            message.contains("x.csv:2") && message.contains("temperature"),
            "{message}"
        );
    }
}
