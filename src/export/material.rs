//! The calibrated material model: the starting material file with the fitted values written
//! in place (comments and layout kept, by editing the TOML document), plus a `[calibration]`
//! table with provenance, intervals, and the exposure values fitted with it.

use toml_edit::{value, Array, ArrayOfTables, DocumentMut, Item, Table};

use crate::case::material::MaterialModel;
use crate::case::targets::{
    reactions_without_own_heat_of_combustion, row_of, Kind, Place, PropertyPart, Target,
};
use crate::fit::parameters::{FreeParameter, Scale};
use crate::physics::material::Material;

/// Provenance and quality figures written into `[calibration]`.
#[derive(Debug, Clone)]
pub struct Provenance {
    pub job: String,
    pub emberfit_version: String,
    pub date: String,
    pub objective: f64,
    pub data_sha256: Vec<(String, String)>,
    /// `None` when the fit converged; otherwise why not (still running, a budget, a stop).
    pub not_converged: Option<String>,
}

/// One fitted value with its interval, for `[[calibration.parameter]]`.
#[derive(Debug, Clone)]
pub struct FittedValue {
    pub value: f64,
    pub interval_95: (f64, f64),
    pub standard_error: f64,
    pub warnings: Vec<String>,
}

/// Errors writing the calibrated model.
#[derive(Debug, thiserror::Error)]
pub enum ExportError {
    #[error("cannot parse the starting material file: {0}")]
    Parse(#[from] toml_edit::TomlError),
    #[error("the starting material file has no `{0}` to write the fitted value into")]
    Missing(String),
}

fn set_number(item: &mut Item, number: f64) {
    *item = value(number);
}

/// Sets a number at `table[key]`, or at `table[key].sub` when the key holds an inline table.
fn set_in(
    table: &mut dyn toml_edit::TableLike,
    key: &str,
    sub: Option<&str>,
    number: f64,
) -> Result<(), ExportError> {
    let item = table
        .get_mut(key)
        .ok_or_else(|| ExportError::Missing(key.to_string()))?;
    match sub {
        None => set_number(item, number),
        Some(sub) => match item.as_table_like_mut() {
            Some(inner) => {
                let target = inner
                    .get_mut(sub)
                    .ok_or_else(|| ExportError::Missing(format!("{key}.{sub}")))?;
                set_number(target, number);
            }
            // A plain number is the constant form: its value is the number itself.
            None if sub == "value" => set_number(item, number),
            None => return Err(ExportError::Missing(format!("{key}.{sub}"))),
        },
    }
    Ok(())
}

/// Multiplies every value of a property (number, power law or table) by `factor`.
fn scale_property(
    table: &mut dyn toml_edit::TableLike,
    key: &str,
    factor: f64,
) -> Result<(), ExportError> {
    let item = table
        .get_mut(key)
        .ok_or_else(|| ExportError::Missing(key.to_string()))?;
    if let Some(number) = item
        .as_float()
        .or_else(|| item.as_integer().map(|i| i as f64))
    {
        set_number(item, number * factor);
    } else if let Some(inner) = item.as_table_like_mut() {
        let current = inner
            .get("value")
            .and_then(|v| v.as_float().or_else(|| v.as_integer().map(|i| i as f64)));
        if let Some(current) = current {
            set_in(inner, "value", None, current * factor)?;
        }
    } else if let Some(points) = item.as_array_mut() {
        let mut scaled = Array::new();
        for point in points.iter() {
            let pair = point.as_array();
            let t = pair
                .and_then(|p| p.get(0))
                .and_then(|v| v.as_float().or_else(|| v.as_integer().map(|i| i as f64)));
            let v = pair
                .and_then(|p| p.get(1))
                .and_then(|v| v.as_float().or_else(|| v.as_integer().map(|i| i as f64)));
            if let (Some(t), Some(v)) = (t, v) {
                let mut new_pair = Array::new();
                new_pair.push(t);
                new_pair.push(v * factor);
                scaled.push(new_pair);
            }
        }
        *points = scaled;
    }
    Ok(())
}

fn array_entry<'d>(
    doc: &'d mut DocumentMut,
    key: &str,
    index: usize,
) -> Result<&'d mut Table, ExportError> {
    doc.get_mut(key)
        .and_then(|item| item.as_array_of_tables_mut())
        .and_then(|tables: &mut ArrayOfTables| tables.get_mut(index))
        .ok_or_else(|| ExportError::Missing(format!("{key}[{index}]")))
}

/// Writes one fitted value at its target's key (`case::targets`' table says which key of
/// which table): into the material document, or for a scenario value into `scenario_values`
/// (`[calibration.scenario]`).
fn write_target(
    doc: &mut DocumentMut,
    scenario_values: &mut Table,
    start: &MaterialModel,
    target: &Target,
    fitted_value: f64,
    fitted_material: &Material,
) -> Result<(), ExportError> {
    let row = target.row();
    match target {
        Target::Conductivity { component, part } | Target::SpecificHeat { component, part } => {
            let entry = array_entry(doc, Place::Component.name(), *component)?;
            match part {
                PropertyPart::Value => set_in(entry, row.file_key, Some("value"), fitted_value),
                PropertyPart::Exponent => {
                    set_in(entry, row.file_key, Some("exponent"), fitted_value)
                }
                PropertyPart::Factor => scale_property(entry, row.file_key, fitted_value),
            }
        }
        // A from the fitted material, which holds what the reparametrisations derived.
        Target::PreExponential { reaction }
        | Target::PeakTemperature { reaction, .. }
        | Target::Log10RateAt { reaction, .. } => set_in(
            array_entry(doc, Place::Reaction.name(), *reaction)?,
            row_of(Kind::PreExponential).file_key,
            None,
            fitted_material.reactions[*reaction].pre_exponential_per_s,
        ),
        Target::HeatOfCombustion { reactions } => {
            if *reactions == reactions_without_own_heat_of_combustion(start) {
                doc.insert(row.file_key, value(fitted_value));
            } else {
                for &reaction in reactions {
                    array_entry(doc, Place::Reaction.name(), reaction)?
                        .insert(row.file_key, value(fitted_value));
                }
            }
            Ok(())
        }
        Target::Density { component: index }
        | Target::Emissivity { component: index }
        | Target::Absorption { component: index }
        | Target::ActivationEnergy { reaction: index }
        | Target::Order { reaction: index }
        | Target::HeatOfReaction { reaction: index }
        | Target::Yield { reaction: index }
        | Target::FuelFraction { reaction: index } => {
            let entry = array_entry(doc, row.place.name(), *index)?;
            if row.is_optional_in_file {
                entry.insert(row.file_key, value(fitted_value));
                Ok(())
            } else {
                set_in(entry, row.file_key, None, fitted_value)
            }
        }
        Target::FlameHeatFlux
        | Target::FlameBlockage
        | Target::ConvectiveCoefficient
        | Target::CriticalFuelMassFlux => {
            scenario_values.insert(row.file_key, value(fitted_value));
            Ok(())
        }
    }
}

/// The calibrated model as TOML text. `fitted_material` is the material with every value
/// applied (so derived values such as A from a peak temperature are taken from it);
/// `targets[i]` are where parameter i's value goes.
pub fn calibrated_material_toml(
    start: &MaterialModel,
    start_text: &str,
    parameters: &[FreeParameter],
    targets: &[Vec<Target>],
    fitted: &[FittedValue],
    fitted_material: &Material,
    provenance: &Provenance,
) -> Result<String, ExportError> {
    let mut doc: DocumentMut = start_text.parse()?;
    doc.remove("calibration");
    let start_title = doc
        .get("title")
        .and_then(|t| t.as_str())
        .unwrap_or("material")
        .to_string();
    let base_title = start_title
        .split(" — calibrated")
        .next()
        .unwrap_or(&start_title)
        .to_string();
    doc.insert(
        "title",
        value(format!("{base_title} — calibrated ({})", provenance.job)),
    );
    let mut scenario_values = Table::new();
    for (parameter_targets, fit) in targets.iter().zip(fitted) {
        for target in parameter_targets {
            write_target(
                &mut doc,
                &mut scenario_values,
                start,
                target,
                fit.value,
                fitted_material,
            )?;
        }
    }
    let mut calibration = Table::new();
    calibration.decor_mut().set_prefix(
        "\n# Written by emberfit's fit. Model results support, and do not replace, standard tests,\n\
         # local codes and the judgement of a qualified fire engineer.\n",
    );
    calibration.insert("job", value(provenance.job.as_str()));
    calibration.insert(
        "emberfit_version",
        value(provenance.emberfit_version.as_str()),
    );
    calibration.insert("date", value(provenance.date.as_str()));
    calibration.insert("objective", value(provenance.objective));
    calibration.insert("converged", value(provenance.not_converged.is_none()));
    if let Some(reason) = &provenance.not_converged {
        calibration.insert("not_converged_reason", value(reason.as_str()));
    }
    let mut hashes = Table::new();
    for (path, hash) in &provenance.data_sha256 {
        hashes.insert(path, value(hash.as_str()));
    }
    calibration.insert("data_sha256", Item::Table(hashes));
    calibration.insert("scenario", Item::Table(scenario_values));
    let mut entries = ArrayOfTables::new();
    for (parameter, fit) in parameters.iter().zip(fitted) {
        let mut entry = Table::new();
        entry.insert("path", value(parameter.name.as_str()));
        entry.insert("unit", value(parameter.unit.as_str()));
        entry.insert("value", value(fit.value));
        entry.insert(
            "lower_95",
            value(finite_or(fit.interval_95.0, parameter.lower)),
        );
        entry.insert(
            "upper_95",
            value(finite_or(fit.interval_95.1, parameter.upper)),
        );
        entry.insert(
            "scale",
            value(if parameter.scale == Scale::Log {
                "log"
            } else {
                "linear"
            }),
        );
        entry.insert("standard_error", value(finite_or(fit.standard_error, -1.0)));
        let mut warnings = Array::new();
        for warning in &fit.warnings {
            warnings.push(warning.as_str());
        }
        entry.insert("warnings", value(warnings));
        entries.push(entry);
    }
    calibration.insert("parameter", Item::ArrayOfTables(entries));
    doc.insert("calibration", Item::Table(calibration));
    Ok(doc.to_string())
}

/// TOML has no infinity in our files: an unbounded interval end is written as the bound, and
/// an infinite standard error as −1 (documented in docs/file-formats.md).
fn finite_or(number: f64, fallback: f64) -> f64 {
    if number.is_finite() {
        number
    } else {
        fallback
    }
}
