//! Generic reader for lab CSV files: named columns with units into `Vec<f64>`, with every
//! repair reported.
//!
//! Tolerates what real exports contain: a UTF-8 byte-order mark, stray spaces in names, a units
//! row under the header (or units in brackets in the name), blank lines, blank cells (missing
//! values, returned as NaN), `;` or tab separators with decimal commas, Latin-1 text, clock
//! times (h:mm:ss) in a time column. Units are converted to
//! one canonical unit per [`Quantity`]. It knows nothing about cone calorimeters, so the
//! milligram-scale readers can use it too. It does not fill gaps or sort rows: that is the
//! caller's choice, because what a gap means depends on the signal.

use std::path::{Path, PathBuf};

use super::{DataError, Notice};

/// What a column measures; decides which units are accepted and the unit it is converted to.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Quantity {
    /// Time, converted to s (accepts ms, s, min, h).
    Time,
    /// Mass, converted to g (accepts mg, g, kg).
    Mass,
    /// Heat release rate per area, converted to kW/m² (accepts W/m², kW/m², MW/m²); a total in
    /// W or kW is converted to kW and flagged by the canonical unit `kW`, for the caller to
    /// divide by the exposed area.
    HeatReleaseRate,
    /// Gas mole fraction, converted to mol/mol (accepts %, vol%, ppm, mol/mol, fraction).
    MoleFraction,
    /// Pressure difference, converted to Pa (accepts Pa, hPa, mbar, kPa).
    Pressure,
    /// Temperature, converted to K (accepts K, °C, degC, C).
    Temperature,
    /// Anything else: the values are kept as in the file and the unit is passed on unchanged.
    Any,
}

impl Quantity {
    fn canonical_unit(self) -> &'static str {
        match self {
            Quantity::Time => "s",
            Quantity::Mass => "g",
            Quantity::HeatReleaseRate => "kW/m2",
            Quantity::MoleFraction => "mol/mol",
            Quantity::Pressure => "Pa",
            Quantity::Temperature => "K",
            Quantity::Any => "",
        }
    }
}

/// One column the caller wants from a file.
#[derive(Debug, Clone, PartialEq)]
pub struct ColumnRequest {
    /// Name as in the file's header; matched ignoring case, surrounding spaces and a unit in
    /// brackets (`Mass`, ` mass [g]` and `MASS` all match `mass`).
    pub name: String,
    /// Unit that overrides whatever the file says (e.g. when a file's units row is wrong).
    pub unit: Option<String>,
    /// What the column measures.
    pub quantity: Quantity,
    /// Whether a missing column is an error (true) or gives `None` (false).
    pub is_required: bool,
}

impl ColumnRequest {
    /// A required column with the file's own unit.
    pub fn required(name: &str, quantity: Quantity) -> Self {
        ColumnRequest {
            name: name.to_string(),
            unit: None,
            quantity,
            is_required: true,
        }
    }
}

/// A column read from a file, in its canonical unit.
#[derive(Debug, Clone, PartialEq)]
pub struct Column {
    /// Header as in the file, trimmed.
    pub header: String,
    /// Canonical unit of `values` (see [`Quantity`]); for [`Quantity::Any`] the file's unit.
    pub unit: String,
    /// One value per data row; NaN where the cell was blank or held a no-value marker.
    pub values: Vec<f64>,
}

/// Columns read from one file, in the order they were requested.
#[derive(Debug, Clone, PartialEq)]
pub struct Table {
    /// File read.
    pub path: PathBuf,
    /// One entry per request: `None` when an optional column is absent.
    pub columns: Vec<Option<Column>>,
    /// File line (1-based) of each data row, for messages.
    pub lines: Vec<usize>,
    /// Repairs and assumptions made while reading.
    pub notices: Vec<Notice>,
}

/// Reads the requested columns of a CSV file; see the module doc for what is tolerated.
///
/// A cell that holds text where a number belongs is an error naming file, line and column; a
/// blank cell becomes NaN and is counted in a notice.
pub fn read_table(path: &Path, requests: &[ColumnRequest]) -> Result<Table, DataError> {
    let bytes =
        crate::input::read_bytes(path, crate::input::InputKind::Table).map_err(|source| {
            DataError::Input(crate::source::FileError::Read {
                path: path.to_path_buf(),
                source,
            })
        })?;
    match String::from_utf8(bytes) {
        Ok(text) => parse_table(path, &text, requests),
        Err(err) => {
            // Not UTF-8: lab software on Windows often writes Latin-1 (e.g. a single-byte
            // degree sign). Each byte is then one character.
            let text: String = err.into_bytes().iter().map(|&b| char::from(b)).collect();
            let mut table = parse_table(path, &text, requests)?;
            table.notices.insert(
                0,
                Notice::new(format!(
                    "{}: not UTF-8; read as Latin-1 (ISO 8859-1)",
                    path.display()
                )),
            );
            Ok(table)
        }
    }
}

/// As [`read_table`], on text already in memory (`path` is only used in messages).
pub fn parse_table(
    path: &Path,
    text: &str,
    requests: &[ColumnRequest],
) -> Result<Table, DataError> {
    let file_error = |problem: String| DataError::File {
        path: path.to_path_buf(),
        problem,
    };
    let mut notices = Vec::new();
    let text = match text.strip_prefix('\u{feff}') {
        Some(rest) => {
            notices.push(Notice::new(format!(
                "{}: skipped the byte-order mark at the start of the file",
                path.display()
            )));
            rest
        }
        None => text,
    };
    // The header row is the first row that holds every requested column; lines before it
    // (comments, a title block of the lab software) are skipped, and a notice says so.
    let (text, line_offset, delimiter) = match find_header(text, requests) {
        Some(found) => {
            let skipped = text[..found.byte_offset]
                .lines()
                .filter(|line| !line.trim().is_empty())
                .count();
            if skipped > 0 {
                notices.push(Notice::new(format!(
                    "{}: skipped {skipped} line(s) before the header row at line {}",
                    path.display(),
                    found.line_offset + 1
                )));
            }
            (
                &text[found.byte_offset..],
                found.line_offset,
                found.delimiter,
            )
        }
        None => {
            let first_line = text
                .lines()
                .find(|line| !line.trim().is_empty())
                .unwrap_or("");
            (text, 0, delimiter_of(first_line))
        }
    };
    let has_decimal_comma = delimiter != b',';

    let mut reader = csv::ReaderBuilder::new()
        .has_headers(false)
        .flexible(true)
        .delimiter(delimiter)
        .from_reader(text.as_bytes());
    let mut rows: Vec<(usize, Vec<String>)> = Vec::new();
    for record in reader.records() {
        let record = record.map_err(|err| {
            let line = err.position().map(|p| p.line() as usize).unwrap_or(0) + line_offset;
            file_error(format!("line {line}: not readable as CSV: {err}"))
        })?;
        let line = record.position().map(|p| p.line() as usize).unwrap_or(0) + line_offset;
        if record.len() > crate::input::MAX_TABLE_COLUMNS {
            return Err(file_error(format!(
                "line {line}: {} cells; at most {} columns are read",
                record.len(),
                crate::input::MAX_TABLE_COLUMNS
            )));
        }
        let cells: Vec<String> = record.iter().map(|c| c.trim().to_string()).collect();
        if cells.iter().all(|c| c.is_empty()) {
            continue;
        }
        if rows.len() >= crate::input::MAX_TABLE_ROWS {
            return Err(file_error(format!(
                "line {line}: more than {} rows; at most that many are read",
                crate::input::MAX_TABLE_ROWS
            )));
        }
        rows.push((line, cells));
    }
    let mut rows = rows.into_iter().peekable();
    let (header_line, header) = rows
        .next()
        .ok_or_else(|| file_error("the file is empty: expected a header row".to_string()))?;
    let names: Vec<(String, Option<String>)> = header.iter().map(|h| split_name_unit(h)).collect();

    // A units row is a row right under the header in which no cell is a number.
    let mut file_units: Vec<Option<String>> = names.iter().map(|(_, u)| u.clone()).collect();
    if let Some((_, cells)) = rows.peek() {
        let is_units_row = cells.iter().any(|c| !c.is_empty())
            && cells
                .iter()
                .all(|c| c.is_empty() || parse_number(c, has_decimal_comma).is_none());
        if is_units_row {
            for (idx, cell) in cells.iter().enumerate() {
                if idx < file_units.len() && !cell.is_empty() {
                    file_units[idx] = Some(strip_brackets(cell).to_string());
                }
            }
            rows.next();
        }
    }

    // Locate every requested column.
    let mut positions = Vec::with_capacity(requests.len());
    for request in requests {
        let wanted = normalise_name(&request.name);
        let found = names
            .iter()
            .position(|(name, _)| normalise_name(name) == wanted)
            .or_else(|| {
                header
                    .iter()
                    .position(|full| normalise_name(full) == wanted)
            });
        if let Some(idx) = found {
            let same: Vec<usize> = names
                .iter()
                .enumerate()
                .filter(|(_, (name, _))| normalise_name(name) == normalise_name(&names[idx].0))
                .map(|(i, _)| i + 1)
                .collect();
            if same.len() > 1 {
                return Err(file_error(format!(
                    "line {header_line}: {} columns are named `{}` (columns {}); \
                     rename all but one",
                    same.len(),
                    names[idx].0,
                    same.iter()
                        .map(|i| i.to_string())
                        .collect::<Vec<_>>()
                        .join(", ")
                )));
            }
        }
        match found {
            Some(idx) => positions.push(Some(idx)),
            None if request.is_required => {
                let available: Vec<&str> = header.iter().map(String::as_str).collect();
                return Err(file_error(format!(
                    "line {header_line}: no column named `{}`; the header has {}",
                    request.name,
                    available
                        .iter()
                        .map(|n| format!("`{n}`"))
                        .collect::<Vec<_>>()
                        .join(", ")
                )));
            }
            None => positions.push(None),
        }
    }

    // Decide each column's conversion.
    let mut conversions = Vec::with_capacity(requests.len());
    for (request, position) in requests.iter().zip(&positions) {
        let Some(idx) = *position else {
            conversions.push(None);
            continue;
        };
        let file_unit = file_units[idx].clone().filter(|u| !u.is_empty());
        let unit = match (&request.unit, &file_unit) {
            (Some(given), Some(in_file)) => {
                if normalise_unit(given) != normalise_unit(in_file) {
                    notices.push(Notice::new(format!(
                        "{}: column `{}`: the file says `{in_file}`, the description says \
                         `{given}`; using `{given}`",
                        path.display(),
                        header[idx]
                    )));
                }
                Some(given.clone())
            }
            (Some(given), None) => Some(given.clone()),
            (None, in_file) => in_file.clone(),
        };
        let unit = match unit {
            Some(unit) => unit,
            None => {
                let assumed = match request.quantity {
                    Quantity::Time => "s",
                    Quantity::Mass => "g",
                    Quantity::HeatReleaseRate => "kW/m2",
                    _ => {
                        return Err(file_error(format!(
                            "column `{}` has no unit in the file; give one in the description",
                            header[idx]
                        )))
                    }
                };
                notices.push(Notice::new(format!(
                    "{}: column `{}` has no unit; assumed {assumed}",
                    path.display(),
                    header[idx]
                )));
                assumed.to_string()
            }
        };
        let conversion = unit_conversion(request.quantity, &unit).ok_or_else(|| {
            file_error(format!(
                "column `{}`: unit `{unit}` is not a unit of {}",
                header[idx],
                quantity_words(request.quantity)
            ))
        })?;
        conversions.push(Some(conversion));
    }

    let mut values: Vec<Vec<f64>> = vec![Vec::new(); requests.len()];
    let mut lines = Vec::new();
    let mut n_blank = vec![0usize; requests.len()];
    let mut n_clock = vec![0usize; requests.len()];
    for (line, cells) in rows {
        if let Some(extra) = cells.iter().skip(header.len()).position(|c| !c.is_empty()) {
            let hint = if delimiter == b',' {
                " (decimal commas in a comma-separated file? Use `.` for decimals or `;` between \
                 cells)"
            } else {
                ""
            };
            return Err(DataError::File {
                path: path.to_path_buf(),
                problem: format!(
                    "line {line}: cell {} is beyond the header's {} columns{hint}",
                    header.len() + extra + 1,
                    header.len()
                ),
            });
        }
        // Skip rows in which every requested cell is blank (e.g. a trailing comma-only line).
        let is_empty = positions
            .iter()
            .flatten()
            .all(|&idx| cells.get(idx).is_none_or(|c| c.is_empty()));
        if is_empty {
            continue;
        }
        for (req_idx, position) in positions.iter().enumerate() {
            let (Some(idx), Some(conversion)) = (*position, &conversions[req_idx]) else {
                continue;
            };
            let cell = cells.get(idx).map(String::as_str).unwrap_or("");
            let value = if cell.is_empty() || is_no_value_marker(cell) {
                n_blank[req_idx] += 1;
                f64::NAN
            } else {
                let clock_s = (requests[req_idx].quantity == Quantity::Time)
                    .then(|| parse_clock_s(cell))
                    .flatten();
                match parse_number(cell, has_decimal_comma) {
                    Some(number) => conversion.apply(number),
                    None if clock_s.is_some() => {
                        n_clock[req_idx] += 1;
                        clock_s.unwrap_or(f64::NAN)
                    }
                    None => {
                        return Err(DataError::Cell {
                            path: path.to_path_buf(),
                            line,
                            column: header[idx].clone(),
                            problem: format!("expected a number, found `{cell}`"),
                        })
                    }
                }
            };
            values[req_idx].push(value);
        }
        lines.push(line);
    }
    for (req_idx, &count) in n_clock.iter().enumerate() {
        if let (true, Some(idx)) = (count > 0, positions[req_idx]) {
            notices.push(Notice::new(format!(
                "{}: column `{}`: read {count} clock times (h:mm:ss) as seconds",
                path.display(),
                header[idx]
            )));
        }
    }
    for (req_idx, &count) in n_blank.iter().enumerate() {
        if count > 0 {
            if let Some(idx) = positions[req_idx] {
                notices.push(Notice::new(format!(
                    "{}: column `{}`: {count} blank or no-value cells read as missing",
                    path.display(),
                    header[idx]
                )));
            }
        }
    }
    let columns = positions
        .iter()
        .zip(conversions)
        .zip(values)
        .map(|((position, conversion), values)| {
            let (idx, conversion) = ((*position)?, conversion?);
            Some(Column {
                header: header[idx].clone(),
                unit: conversion.canonical_unit,
                values,
            })
        })
        .collect();
    Ok(Table {
        path: path.to_path_buf(),
        columns,
        lines,
        notices,
    })
}

/// Columns read by [`read_named_columns`], in the order asked for.
#[derive(Debug, Clone, PartialEq)]
pub struct NamedColumns {
    /// Values of each column, NaN where blank.
    pub values: Vec<Vec<f64>>,
    /// Unit each column's file states (empty when none).
    pub units: Vec<String>,
    /// Repairs made while reading.
    pub notices: Vec<Notice>,
}

/// Reads named columns with no unit conversion (each [`Quantity::Any`]); the simple entry point
/// for readers of milligram-scale files, which then convert the units they know.
pub fn read_named_columns(path: &Path, names: &[&str]) -> Result<NamedColumns, DataError> {
    let requests: Vec<ColumnRequest> = names
        .iter()
        .map(|name| ColumnRequest::required(name, Quantity::Any))
        .collect();
    let table = read_table(path, &requests)?;
    let mut values = Vec::new();
    let mut units = Vec::new();
    for column in table.columns.into_iter().flatten() {
        values.push(column.values);
        units.push(column.unit);
    }
    Ok(NamedColumns {
        values,
        units,
        notices: table.notices,
    })
}

#[derive(Debug, Clone)]
struct Conversion {
    factor: f64,
    offset: f64,
    canonical_unit: String,
}

impl Conversion {
    fn apply(&self, value: f64) -> f64 {
        value * self.factor + self.offset
    }
}

/// The factor (and offset, for temperatures) that brings `unit` to the quantity's canonical
/// unit, or `None` when the unit does not belong to the quantity.
fn unit_conversion(quantity: Quantity, unit: &str) -> Option<Conversion> {
    let unit_key = normalise_unit(unit);
    let simple = |factor: f64| {
        Some(Conversion {
            factor,
            offset: 0.0,
            canonical_unit: quantity.canonical_unit().to_string(),
        })
    };
    match quantity {
        Quantity::Time => match unit_key.as_str() {
            "ms" => simple(1e-3),
            "s" | "sec" | "secs" | "second" | "seconds" => simple(1.0),
            "min" | "mins" | "minute" | "minutes" => simple(60.0),
            "h" | "hr" | "hour" | "hours" => simple(3600.0),
            // Clock times are read as seconds cell by cell (see `parse_clock_s`).
            "hh:mm:ss" | "h:mm:ss" | "mm:ss" | "hh:mm:ss.s" => simple(1.0),
            _ => None,
        },
        Quantity::Mass => match unit_key.as_str() {
            "mg" => simple(1e-3),
            "g" | "gram" | "grams" => simple(1.0),
            "kg" => simple(1e3),
            _ => None,
        },
        Quantity::HeatReleaseRate => match unit_key.as_str() {
            "w/m2" => simple(1e-3),
            "kw/m2" => simple(1.0),
            "mw/m2" => simple(1e3),
            "w" | "kw" => Some(Conversion {
                factor: if unit_key == "w" { 1e-3 } else { 1.0 },
                offset: 0.0,
                canonical_unit: "kW".to_string(),
            }),
            _ => None,
        },
        Quantity::MoleFraction => match unit_key.as_str() {
            "%" | "vol%" | "vol-%" | "%vol" | "mol%" | "%v/v" => simple(1e-2),
            "ppm" | "ppmv" => simple(1e-6),
            "mol/mol" | "fraction" | "-" | "1" | "m3/m3" => simple(1.0),
            _ => None,
        },
        Quantity::Pressure => match unit_key.as_str() {
            "pa" => simple(1.0),
            "hpa" | "mbar" => simple(100.0),
            "kpa" => simple(1e3),
            _ => None,
        },
        Quantity::Temperature => match unit_key.as_str() {
            "k" => simple(1.0),
            "c" | "°c" | "degc" | "deg c" | "celsius" | "ºc" => Some(Conversion {
                factor: 1.0,
                offset: 273.15,
                canonical_unit: "K".to_string(),
            }),
            _ => None,
        },
        Quantity::Any => Some(Conversion {
            factor: 1.0,
            offset: 0.0,
            canonical_unit: unit.trim().to_string(),
        }),
    }
}

fn quantity_words(quantity: Quantity) -> &'static str {
    match quantity {
        Quantity::Time => "time (ms, s, min, h)",
        Quantity::Mass => "mass (mg, g, kg)",
        Quantity::HeatReleaseRate => "heat release rate (kW/m2, W/m2, MW/m2, kW, W)",
        Quantity::MoleFraction => "mole fraction (%, ppm, mol/mol)",
        Quantity::Pressure => "pressure (Pa, hPa, mbar, kPa)",
        Quantity::Temperature => "temperature (K, °C)",
        Quantity::Any => "anything",
    }
}

/// Splits `mass [g]` or `mass (g)` into name and unit.
/// Where the header row is: the first of the file's first lines that holds every required
/// requested column (or, with none required, any requested one).
struct HeaderRow {
    byte_offset: usize,
    /// Lines before the header row.
    line_offset: usize,
    delimiter: u8,
}

/// Lines searched for the header row.
const HEADER_SEARCH_LINES: usize = 200;

fn delimiter_of(line: &str) -> u8 {
    if line.contains(',') {
        b','
    } else if line.contains(';') {
        b';'
    } else if line.contains('\t') {
        b'\t'
    } else {
        b','
    }
}

fn find_header(text: &str, requests: &[ColumnRequest]) -> Option<HeaderRow> {
    let required: Vec<String> = requests
        .iter()
        .filter(|r| r.is_required)
        .map(|r| normalise_name(&r.name))
        .collect();
    let wanted: Vec<String> = if required.is_empty() {
        requests.iter().map(|r| normalise_name(&r.name)).collect()
    } else {
        required
    };
    if wanted.is_empty() {
        return None;
    }
    let need_all = requests.iter().any(|r| r.is_required);
    let mut byte_offset = 0;
    for (index, line) in text
        .split_inclusive('\n')
        .take(HEADER_SEARCH_LINES)
        .enumerate()
    {
        let delimiter = delimiter_of(line);
        let cells: Vec<String> = line
            .split(char::from(delimiter))
            .map(|cell| cell.trim().trim_matches('"').trim().to_string())
            .collect();
        let holds = |name: &String| {
            cells.iter().any(|cell| {
                normalise_name(&split_name_unit(cell).0) == *name || normalise_name(cell) == *name
            })
        };
        let found = if need_all {
            wanted.iter().all(holds)
        } else {
            wanted.iter().any(holds)
        };
        if found {
            return Some(HeaderRow {
                byte_offset,
                line_offset: index,
                delimiter,
            });
        }
        byte_offset += line.len();
    }
    None
}

fn split_name_unit(header: &str) -> (String, Option<String>) {
    let header = header.trim();
    for (open, close) in [('[', ']'), ('(', ')')] {
        if let (Some(start), true) = (header.rfind(open), header.ends_with(close)) {
            let name = header[..start].trim().to_string();
            let unit = header[start + 1..header.len() - 1].trim().to_string();
            if !name.is_empty() {
                return (name, Some(unit));
            }
        }
    }
    (header.to_string(), None)
}

fn strip_brackets(cell: &str) -> &str {
    let cell = cell.trim();
    for (open, close) in [('[', ']'), ('(', ')')] {
        if let Some(inner) = cell.strip_prefix(open).and_then(|c| c.strip_suffix(close)) {
            return inner.trim();
        }
    }
    cell
}

fn normalise_name(name: &str) -> String {
    name.trim().to_lowercase()
}

fn normalise_unit(unit: &str) -> String {
    strip_brackets(unit)
        .to_lowercase()
        .replace('²', "2")
        .replace("^2", "2")
        .replace("**2", "2")
        .replace([' ', '·'], "")
        .replace("m-2", "/m2")
        .replace("//", "/")
}

fn is_no_value_marker(cell: &str) -> bool {
    matches!(
        cell.to_lowercase().as_str(),
        "nan" | "na" | "n/a" | "-" | "--" | "null" | "none"
    )
}

/// A clock time `h:mm:ss`, `mm:ss` (seconds may carry decimals) in seconds.
fn parse_clock_s(cell: &str) -> Option<f64> {
    let parts: Vec<&str> = cell.split(':').collect();
    if !(2..=3).contains(&parts.len()) {
        return None;
    }
    let mut seconds = 0.0;
    for (idx, part) in parts.iter().enumerate() {
        let is_last = idx + 1 == parts.len();
        let is_whole = part.chars().all(|c| c.is_ascii_digit());
        if part.is_empty() || (!is_last && !is_whole) {
            return None;
        }
        let value: f64 = part.parse().ok()?;
        if idx > 0 && value >= 60.0 {
            return None;
        }
        seconds = seconds * 60.0 + value;
    }
    Some(seconds)
}

fn parse_number(cell: &str, has_decimal_comma: bool) -> Option<f64> {
    let parsed = if has_decimal_comma {
        cell.replace(',', ".").parse::<f64>()
    } else {
        cell.parse::<f64>()
    };
    parsed.ok().filter(|v| v.is_finite())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn requests() -> Vec<ColumnRequest> {
        vec![
            ColumnRequest::required("time", Quantity::Time),
            ColumnRequest::required("mass", Quantity::Mass),
        ]
    }

    #[test]
    fn reads_a_units_row_and_converts_minutes_and_kilograms() {
        let text = "Time,Mass\n[min],[kg]\n0,0.07\n0.5,0.069\n";
        let table = parse_table(Path::new("t.csv"), text, &requests()).unwrap();
        let time = &table.columns[0].as_ref().unwrap().values;
        let mass = &table.columns[1].as_ref().unwrap().values;
        assert_eq!(time, &vec![0.0, 30.0]);
        assert!((mass[1] - 69.0).abs() < 1e-9);
        assert_eq!(table.lines, vec![3, 4]);
    }

    #[test]
    fn strips_a_byte_order_mark_and_stray_spaces_and_says_so() {
        let text = "\u{feff} time [s] , mass [mg]\n0,1000\n1,900\n\n\n";
        let table = parse_table(Path::new("t.csv"), text, &requests()).unwrap();
        assert_eq!(table.columns[1].as_ref().unwrap().values, vec![1.0, 0.9]);
        assert!(table
            .notices
            .iter()
            .any(|n| n.message.contains("byte-order")));
    }

    #[test]
    fn blank_cells_become_nan_and_are_counted() {
        let text = "time,mass\ns,g\n0,5\n1,\n2,4\n";
        let table = parse_table(Path::new("t.csv"), text, &requests()).unwrap();
        assert!(table.columns[1].as_ref().unwrap().values[1].is_nan());
        assert!(table.notices.iter().any(|n| n.message.contains("1 blank")));
    }

    #[test]
    fn text_in_a_number_cell_names_line_and_column() {
        let text = "time,mass\ns,g\n0,5\n1,abc\n";
        let err = parse_table(Path::new("t.csv"), text, &requests()).unwrap_err();
        assert_eq!(
            err.to_string(),
            "t.csv:4: column `mass`: expected a number, found `abc`"
        );
    }

    #[test]
    fn a_missing_column_lists_the_header() {
        let text = "time,weight\ns,g\n0,5\n";
        let err = parse_table(Path::new("t.csv"), text, &requests()).unwrap_err();
        assert!(err.to_string().contains("no column named `mass`"), "{err}");
        assert!(err.to_string().contains("`weight`"), "{err}");
    }

    #[test]
    fn semicolons_with_decimal_commas_are_read() {
        let text = "time;mass\ns;g\n0;5,5\n1;5,25\n";
        let table = parse_table(Path::new("t.csv"), text, &requests()).unwrap();
        assert_eq!(table.columns[1].as_ref().unwrap().values, vec![5.5, 5.25]);
    }

    #[test]
    fn the_description_unit_overrides_a_wrong_units_row_with_a_notice() {
        let mut reqs = requests();
        reqs[1].unit = Some("kg".into());
        let text = "time,mass\ns,g\n0,0.005\n";
        let table = parse_table(Path::new("t.csv"), text, &reqs).unwrap();
        assert_eq!(table.columns[1].as_ref().unwrap().values, vec![5.0]);
        assert!(table
            .notices
            .iter()
            .any(|n| n.message.contains("using `kg`")));
    }

    #[test]
    fn a_latin1_degree_sign_is_read() {
        let dir = std::env::temp_dir().join(format!("emberfit-latin1-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let path = dir.join("latin1.csv");
        std::fs::write(&path, b"T [\xb0C]\n26.85\n").unwrap();
        let reqs = vec![ColumnRequest::required("T", Quantity::Temperature)];
        let table = read_table(&path, &reqs).unwrap();
        assert!((table.columns[0].as_ref().unwrap().values[0] - 300.0).abs() < 1e-9);
        assert!(table.notices[0].message.contains("Latin-1"));
        std::fs::remove_dir_all(&dir).ok();
    }

    #[test]
    fn clock_times_become_seconds() {
        let text = "Time,Mass\nhh:mm:ss,g\n0:00:00,5\n0:01:30.5,4\n1:00:00,3\n";
        let table = parse_table(Path::new("t.csv"), text, &requests()).unwrap();
        assert_eq!(
            table.columns[0].as_ref().unwrap().values,
            vec![0.0, 90.5, 3600.0]
        );
        assert!(table
            .notices
            .iter()
            .any(|n| n.message.contains("clock times")));
        assert_eq!(parse_clock_s("1:75"), None);
    }

    #[test]
    fn kilowatts_per_square_metre_in_exponent_form() {
        let reqs = vec![ColumnRequest::required("q", Quantity::HeatReleaseRate)];
        let table = parse_table(Path::new("t.csv"), "q [kW m-2]\n5\n", &reqs).unwrap();
        assert_eq!(table.columns[0].as_ref().unwrap().unit, "kW/m2");
    }

    #[test]
    fn celsius_becomes_kelvin() {
        let reqs = vec![ColumnRequest::required("T", Quantity::Temperature)];
        let table = parse_table(Path::new("t.csv"), "T [°C]\n26.85\n", &reqs).unwrap();
        assert!((table.columns[0].as_ref().unwrap().values[0] - 300.0).abs() < 1e-9);
    }

    #[test]
    fn a_unit_of_the_wrong_kind_is_an_error() {
        let text = "time,mass\ns,K\n0,5\n";
        let err = parse_table(Path::new("t.csv"), text, &requests()).unwrap_err();
        assert!(
            err.to_string().contains("unit `K` is not a unit of mass"),
            "{err}"
        );
    }
}
