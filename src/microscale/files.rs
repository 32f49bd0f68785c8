//! Reading milligram-scale test files (TGA mass, DSC heat flow, MCC heat release rate): CSV with
//! a row of column names and a row of units, optionally starting with a UTF-8 byte-order mark.
//! Columns are recognised by their units (and, between DSC and MCC, by their names); values are
//! converted to SI or to the per-initial-mass units of the 0-D model here, at the edge.
//!
//! This is a small reader of our own, because the generic data reader of `src/data/` did not
//! exist yet when it was written; it can be replaced by that one without changing `Thermogram`.

use std::path::{Path, PathBuf};

use super::MicroscaleError;

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
    pub path: PathBuf,
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
/// the three columns are skipped.
pub fn read_thermogram(path: &Path) -> Result<Thermogram, MicroscaleError> {
    let text = std::fs::read_to_string(path).map_err(|source| MicroscaleError::Read {
        path: path.to_path_buf(),
        source,
    })?;
    parse_thermogram(path, &text)
}

/// Parses the text of a milligram-scale file; `path` is used in messages only.
pub fn parse_thermogram(path: &Path, text: &str) -> Result<Thermogram, MicroscaleError> {
    let format_error = |line: usize, problem: String| MicroscaleError::Format {
        path: path.to_path_buf(),
        line,
        problem,
    };
    let text = text.strip_prefix('\u{feff}').unwrap_or(text);
    let mut reader = csv::ReaderBuilder::new()
        .has_headers(false)
        .flexible(true)
        .from_reader(text.as_bytes());
    let mut records = reader.records();
    let mut next_row = |what: &str| -> Result<(usize, Vec<String>), MicroscaleError> {
        match records.next() {
            Some(Ok(record)) => {
                let line = record.position().map_or(0, |p| p.line() as usize);
                Ok((line, record.iter().map(|s| s.trim().to_string()).collect()))
            }
            Some(Err(err)) => Err(format_error(
                err.position().map_or(0, |p| p.line() as usize),
                err.to_string(),
            )),
            None => Err(format_error(0, format!("has no {what} row"))),
        }
    };
    let (_, names) = next_row("column-name")?;
    let (units_line, units) = next_row("unit")?;
    let units: Vec<String> = units.iter().map(|u| clean_unit(u)).collect();
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
    let signal_name = names.get(signal_col).cloned().unwrap_or_default();
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
    let time_factor = time_factor_s(&units[time_col]).unwrap_or(1.0);
    let temperature_offset = temperature_offset_k(&units[temperature_col]).unwrap_or(0.0);
    let (mut time_s, mut temperature_k, mut raw) = (Vec::new(), Vec::new(), Vec::new());
    loop {
        let (line, cells) = match next_row("data") {
            Ok(row) => row,
            Err(MicroscaleError::Format { line: 0, .. }) => break,
            Err(err) => return Err(err),
        };
        let cell = |col: usize| cells.get(col).map(String::as_str).unwrap_or("");
        if [time_col, temperature_col, signal_col]
            .iter()
            .any(|&col| cell(col).is_empty())
        {
            continue;
        }
        let number = |col: usize| -> Result<f64, MicroscaleError> {
            cell(col)
                .parse::<f64>()
                .ok()
                .filter(|v| v.is_finite())
                .ok_or_else(|| {
                    format_error(
                        line,
                        format!(
                            "column `{}` must be a number, got `{}`",
                            names.get(col).map_or("", String::as_str),
                            cell(col)
                        ),
                    )
                })
        };
        let t = number(time_col)? * time_factor;
        if let Some(&previous) = time_s.last() {
            if t <= previous {
                return Err(format_error(
                    line,
                    format!("time must increase, got {t} s after {previous} s"),
                ));
            }
        }
        time_s.push(t);
        temperature_k.push(number(temperature_col)? + temperature_offset);
        raw.push(number(signal_col)?);
    }
    if time_s.len() < 3 {
        return Err(format_error(
            units_line,
            format!("needs at least 3 data rows, found {}", time_s.len()),
        ));
    }
    let (values, initial_mass_mg) = match signal {
        Signal::MassMg(factor) => {
            let first_mg = raw[0] * factor;
            if first_mg <= 0.0 {
                return Err(format_error(
                    units_line + 1,
                    format!("first mass must be > 0, got {} mg", first_mg),
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
    Ok(Thermogram {
        path: path.to_path_buf(),
        kind,
        time_s,
        temperature_k,
        values,
        initial_mass_mg,
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
        let dsc = "t,T,Heat Flow\nmin,°C,mW/mg\n0,25,0.1\n1,35,0.2\n2,45,0.3\n";
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
