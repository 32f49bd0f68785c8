//! Milligram-scale scenario files: a material model, the sample's initial composition and a
//! heating programme (ramps in K/min, holds in s) instead of an irradiance. Every key, unit and
//! default is documented in docs/milligram-scale.md. Raw structs keep spans, so each error
//! names file, line and key; validation builds `physics::zero_d` inputs in SI.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use serde::Deserialize;
use toml::Spanned;

use super::MicroscaleError;
use crate::case::{load_material, CaseError, MaterialModel};
use crate::physics::zero_d::{
    simulate_zero_d, Integrator, ProgrammeSegment, TemperatureProgramme, ZeroDHistory,
    ZeroDSettings,
};
use crate::physics::PhysicsError;

/// The columns of a 0-D curve CSV, in order (the same conventions as the cone curves: one
/// row per output time, units in the names).
pub const ZERO_D_COLUMNS: [&str; 6] = [
    "time_s",
    "temperature_k",
    "mass_fraction",
    "mlr_per_s",
    "dsc_w_g",
    "mcc_w_g",
];

/// A milligram-scale scenario file as written.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct MilligramScenarioFile {
    /// What is simulated.
    pub title: String,
    #[serde(default)]
    pub notes: Option<String>,
    /// Material model file, relative to the scenario file.
    pub material: Spanned<String>,
    /// Initial mass fractions by component name; default: all of the first component.
    #[serde(default)]
    pub composition: Option<Spanned<BTreeMap<String, f64>>>,
    /// `[programme]`: the heating programme.
    pub programme: ProgrammeFile,
    /// Time between output rows, s (default 1).
    #[serde(default)]
    pub output_interval_s: Option<Spanned<f64>>,
    /// Whether the DSC column includes the sensible heat Σ mᵢcᵢ dT/dt (default false).
    #[serde(default)]
    pub dsc_includes_sensible_heat: Option<bool>,
    #[serde(default)]
    pub numerics: NumericsFile,
}

/// `[programme]`: start temperature and steps.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ProgrammeFile {
    /// Sample temperature at time 0, K.
    pub start_k: Spanned<f64>,
    #[serde(rename = "step")]
    pub steps: Vec<Spanned<StepFile>>,
}

/// `[[programme.step]]`: a ramp (`ramp_k_min` and `to_k`) or a hold (`hold_s`).
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct StepFile {
    #[serde(default)]
    pub ramp_k_min: Option<Spanned<f64>>,
    #[serde(default)]
    pub to_k: Option<Spanned<f64>>,
    #[serde(default)]
    pub hold_s: Option<Spanned<f64>>,
}

/// `[numerics]`: integrator and tolerances.
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct NumericsFile {
    /// "auto" (default: Dormand–Prince, implicit if that fails), "dormand-prince" or
    /// "implicit".
    #[serde(default)]
    pub integrator: Option<Spanned<String>>,
    #[serde(default)]
    pub relative_tolerance: Option<Spanned<f64>>,
    #[serde(default)]
    pub absolute_tolerance: Option<Spanned<f64>>,
}

/// A milligram-scale scenario ready to run.
#[derive(Debug, Clone)]
pub struct MilligramScenario {
    /// Scenario file.
    pub path: PathBuf,
    /// What is simulated, from the file.
    pub title: String,
    /// Material file, resolved against the scenario's folder.
    pub material_path: PathBuf,
    /// The loaded material.
    pub material: MaterialModel,
    /// Initial mass fraction of each component of the material, summing to 1.
    pub initial_mass_fractions: Vec<f64>,
    /// The heating programme, in SI.
    pub programme: TemperatureProgramme,
    /// Output interval, integrator, tolerances and the DSC sensible-heat switch.
    pub settings: ZeroDSettings,
}

impl MilligramScenario {
    /// Replaces the material (e.g. with a fit's best.toml), keeping the initial composition by
    /// component name; an error names a component of the composition that the new material
    /// lacks.
    pub fn use_material(
        &mut self,
        path: &Path,
        model: MaterialModel,
    ) -> Result<(), MicroscaleError> {
        let mut fractions = vec![0.0; model.material.components.len()];
        for (component, &fraction) in self
            .material
            .material
            .components
            .iter()
            .zip(&self.initial_mass_fractions)
        {
            if fraction == 0.0 {
                continue;
            }
            let idx = model
                .material
                .component_index(&component.name)
                .ok_or_else(|| {
                    MicroscaleError::analysis(format!(
                        "{} has no component `{}`, which makes up {fraction} of the sample in {}",
                        path.display(),
                        component.name,
                        self.path.display()
                    ))
                })?;
            fractions[idx] = fraction;
        }
        self.material = model;
        self.material_path = path.to_path_buf();
        self.initial_mass_fractions = fractions;
        Ok(())
    }
}

/// Whether this TOML text is a milligram-scale scenario: it has a top-level `[programme]`
/// table. Text that is not TOML is not one (the caller's own loader reports its error).
pub fn is_milligram_scenario_text(text: &str) -> bool {
    text.parse::<toml::Table>()
        .map(|table| table.get("programme").is_some_and(toml::Value::is_table))
        .unwrap_or(false)
}

/// Whether the file at `path` is a milligram-scale scenario (see
/// [`is_milligram_scenario_text`]); false when it cannot be read.
pub fn is_milligram_scenario(path: &Path) -> bool {
    crate::input::read_text(path, crate::input::InputKind::Toml)
        .is_ok_and(|text| is_milligram_scenario_text(&text))
}

/// Runs the scenario's 0-D model.
pub fn simulate_programme(scenario: &MilligramScenario) -> Result<ZeroDHistory, PhysicsError> {
    simulate_zero_d(
        &scenario.material.material,
        &scenario.initial_mass_fractions,
        &scenario.programme,
        &scenario.settings,
    )
}

/// Renders 0-D curves as CSV text with the columns of [`ZERO_D_COLUMNS`].
pub fn zero_d_csv(history: &ZeroDHistory) -> Result<Vec<u8>, csv::Error> {
    let mut writer = csv::Writer::from_writer(Vec::new());
    writer.write_record(ZERO_D_COLUMNS)?;
    for idx in 0..history.time_s.len() {
        writer.write_record([
            format!("{:.3}", history.time_s[idx]),
            format!("{:.3}", history.temperature_k[idx]),
            format!("{:.8}", history.mass_fraction[idx]),
            format!("{:.6e}", history.mass_loss_rate_per_s[idx]),
            format!("{:.6}", history.dsc_w_g[idx]),
            format!("{:.6}", history.mcc_w_g[idx]),
        ])?;
    }
    writer
        .into_inner()
        .map_err(|err| csv::Error::from(err.into_error()))
}

/// Reads a milligram-scale scenario and its material file, and validates both.
pub fn load_milligram_scenario(path: &Path) -> Result<MilligramScenario, MicroscaleError> {
    let text = crate::source::read_toml_text(path)?;
    milligram_scenario_from_str(path, &text)
}

/// Parses scenario text; `path` names it in messages and anchors the material path.
pub fn milligram_scenario_from_str(
    path: &Path,
    text: &str,
) -> Result<MilligramScenario, MicroscaleError> {
    let file: MilligramScenarioFile = crate::source::parse(path, text)?;
    let checker: Checker<'_> = Checker::new(path, text);
    let base = path.parent().unwrap_or(Path::new("."));
    let material_path = base.join(file.material.get_ref());
    let material = load_material(&material_path).map_err(|err| match err {
        CaseError::Read { source, .. } => checker.invalid(
            &file.material.span(),
            "material",
            format!("cannot read {}: {source}", material_path.display()),
        ),
        other => MicroscaleError::Material {
            path: path.to_path_buf(),
            source: Box::new(other),
        },
    })?;
    let n_components = material.material.components.len();
    let mut initial_mass_fractions = vec![0.0; n_components];
    match &file.composition {
        None => initial_mass_fractions[0] = 1.0,
        Some(composition) => {
            for (name, &fraction) in composition.get_ref() {
                let Some(idx) = material.material.component_index(name) else {
                    return Err(checker.invalid(
                        &composition.span(),
                        "composition",
                        format!(
                            "names `{name}`, which is not a component of {}",
                            material_path.display()
                        ),
                    ));
                };
                if !(0.0..=1.0).contains(&fraction) {
                    return Err(checker.invalid(
                        &composition.span(),
                        "composition",
                        format!("fraction of `{name}` must be within 0..1, got {fraction}"),
                    ));
                }
                initial_mass_fractions[idx] = fraction;
            }
            let sum: f64 = initial_mass_fractions.iter().sum();
            if (sum - 1.0).abs() > 1e-6 {
                return Err(checker.invalid(
                    &composition.span(),
                    "composition",
                    format!("mass fractions must sum to 1, got {sum}"),
                ));
            }
        }
    }
    let programme = build_programme(&checker, &file.programme)?;
    let mut settings = ZeroDSettings::default();
    if let Some(interval) = &file.output_interval_s {
        settings.output_interval_s = checker.positive(interval, "output_interval_s")?;
    }
    check_programme_size(&checker, &file, &programme, settings.output_interval_s)?;
    if let Some(include) = file.dsc_includes_sensible_heat {
        settings.include_sensible_heat = include;
    }
    if let Some(integrator) = &file.numerics.integrator {
        settings.integrator = match integrator.get_ref().as_str() {
            "auto" => Integrator::Automatic,
            "dormand-prince" => Integrator::DormandPrince,
            "implicit" => Integrator::Implicit,
            other => {
                return Err(checker.invalid(
                    &integrator.span(),
                    "numerics.integrator",
                    format!(
                        "must be \"auto\", \"dormand-prince\" or \"implicit\", got \"{other}\""
                    ),
                ))
            }
        };
    }
    if let Some(tolerance) = &file.numerics.relative_tolerance {
        settings.relative_tolerance = checker.positive(tolerance, "numerics.relative_tolerance")?;
    }
    if let Some(tolerance) = &file.numerics.absolute_tolerance {
        settings.absolute_tolerance = checker.positive(tolerance, "numerics.absolute_tolerance")?;
    }
    Ok(MilligramScenario {
        path: path.to_path_buf(),
        title: file.title,
        material_path,
        material,
        initial_mass_fractions,
        programme,
        settings,
    })
}

fn build_programme(
    checker: &Checker<'_>,
    raw: &ProgrammeFile,
) -> Result<TemperatureProgramme, MicroscaleError> {
    let start_k = checker.positive(&raw.start_k, "programme.start_k")?;
    if raw.steps.is_empty() {
        return Err(checker.invalid(
            &raw.start_k.span(),
            "programme.step",
            "is missing: give at least one [[programme.step]]",
        ));
    }
    let mut segments = Vec::with_capacity(raw.steps.len());
    let mut temperature_k = start_k;
    for (idx, step) in raw.steps.iter().enumerate() {
        let key = |field: &str| format!("programme.step[{idx}].{field}");
        let span = step.span();
        let segment = match (
            &step.get_ref().ramp_k_min,
            &step.get_ref().to_k,
            &step.get_ref().hold_s,
        ) {
            (Some(rate), Some(to), None) => {
                let to_k = checker.positive(to, &key("to_k"))?;
                let rate_k_min = *rate.get_ref();
                let rises = to_k > temperature_k;
                if !(rate_k_min.is_finite() && rate_k_min > 0.0) || to_k == temperature_k {
                    return Err(checker.invalid(
                        &rate.span(),
                        &key("ramp_k_min"),
                        format!(
                            "must be > 0 and `to_k` differ from the temperature before the step \
                             ({temperature_k} K), got {rate_k_min} K/min to {to_k} K"
                        ),
                    ));
                }
                if rate_k_min > MAX_RAMP_K_MIN {
                    return Err(checker.invalid(
                        &rate.span(),
                        &key("ramp_k_min"),
                        format!(
                            "is {rate_k_min} K/min; at most {MAX_RAMP_K_MIN} K/min (above any \
                             TGA, DSC or MCC run) is simulated"
                        ),
                    ));
                }
                let ramp_duration_s = (to_k - temperature_k).abs() / (rate_k_min / 60.0);
                if ramp_duration_s > crate::case::budget::MAX_DURATION_S {
                    return Err(checker.invalid(
                        &rate.span(),
                        &key("ramp_k_min"),
                        format!(
                            "takes {ramp_duration_s:.3e} s to reach {to_k} K; at most {:e} s \
                             is simulated",
                            crate::case::budget::MAX_DURATION_S
                        ),
                    ));
                }
                // The one place K/min from the file becomes K/s; cooling ramps are allowed.
                let heating_rate_k_s = if rises { rate_k_min } else { -rate_k_min } / 60.0;
                temperature_k = to_k;
                ProgrammeSegment::Ramp {
                    heating_rate_k_s,
                    end_temperature_k: to_k,
                }
            }
            (None, None, Some(hold)) => {
                let duration_s = checker.positive(hold, &key("hold_s"))?;
                if duration_s > crate::case::budget::MAX_DURATION_S {
                    return Err(checker.invalid(
                        &hold.span(),
                        &key("hold_s"),
                        format!(
                            "is {duration_s:e} s; at most {:e} s (11.6 days) is simulated",
                            crate::case::budget::MAX_DURATION_S
                        ),
                    ));
                }
                ProgrammeSegment::Hold { duration_s }
            }
            _ => {
                return Err(checker.invalid(
                    &span,
                    &format!("programme.step[{idx}]"),
                    "must be a ramp (`ramp_k_min` and `to_k`) or a hold (`hold_s`), not both \
                     or neither",
                ))
            }
        };
        segments.push(segment);
    }
    TemperatureProgramme::new(start_k, segments)
        .map_err(|err| checker.invalid(&raw.start_k.span(), "programme", err.to_string()))
}

/// Fastest ramp simulated, K/min.
pub const MAX_RAMP_K_MIN: f64 = 1000.0;
/// Largest temperature rise between two output rows, K. The DSC and MCC integrals are taken
/// over the output rows: at 10 K per row they are exact to 1e-8 (900 J/g of the template at
/// 300 K/min every 2 s), at 33 K per row 0.4 % low, at 83 K per row 30 % low
/// (docs/input-limits.md).
pub const MAX_RISE_PER_ROW_K: f64 = 10.0;

/// The programme's rows and memory, and the temperature rise between rows.
fn check_programme_size(
    checker: &Checker<'_>,
    file: &MilligramScenarioFile,
    programme: &TemperatureProgramme,
    output_interval_s: f64,
) -> Result<(), MicroscaleError> {
    let span = file
        .output_interval_s
        .as_ref()
        .map_or(file.programme.start_k.span(), |v| v.span());
    let row_bytes = (8 * 8) as f64;
    if let Err(size) = crate::case::budget::check_run_size(
        programme.duration_s(),
        output_interval_s,
        row_bytes,
        None,
    ) {
        return Err(checker.invalid(&span, "output_interval_s", size.problem));
    }
    let fastest_k_s = programme
        .segments()
        .iter()
        .filter_map(|segment| match segment {
            ProgrammeSegment::Ramp {
                heating_rate_k_s, ..
            } => Some(heating_rate_k_s.abs()),
            ProgrammeSegment::Hold { .. } => None,
        })
        .fold(0.0, f64::max);
    let rise_k = fastest_k_s * output_interval_s;
    if rise_k > MAX_RISE_PER_ROW_K {
        return Err(checker.invalid(
            &span,
            "output_interval_s",
            format!(
                "lets the temperature rise {rise_k:.1} K between rows at {:.0} K/min; the DSC \
                 and MCC integrals need at most {MAX_RISE_PER_ROW_K} K: make it at most {:.3} s",
                fastest_k_s * 60.0,
                MAX_RISE_PER_ROW_K / fastest_k_s
            ),
        ));
    }
    Ok(())
}

/// The crate's span validator, making this module's errors.
type Checker<'a> = crate::source::Spans<'a, MicroscaleError>;

#[cfg(test)]
mod tests {
    use super::*;

    const MATERIAL: &str = "../models/thermoplastic.toml";

    fn scenario_text(programme: &str) -> String {
        format!(
            "title = \"test\"\nmaterial = \"{MATERIAL}\"\n\n[programme]\nstart_k = 300.0\n{programme}"
        )
    }

    fn here() -> PathBuf {
        Path::new(env!("CARGO_MANIFEST_DIR"))
            .join("tests")
            .join("scenario.toml")
    }

    #[test]
    fn recognises_a_milligram_scenario_by_its_programme_table() {
        assert!(is_milligram_scenario_text(&scenario_text(
            "[[programme.step]]\nramp_k_min = 10.0\nto_k = 900.0\n"
        )));
        assert!(!is_milligram_scenario_text(
            "title = \"cone\"\n[exposure]\nirradiance_kw_m2 = 50.0\n"
        ));
        assert!(!is_milligram_scenario_text("not toml ["));
    }

    #[test]
    fn ramp_and_hold_steps_become_the_programme_in_kelvin_per_second() {
        let text = scenario_text(
            "[[programme.step]]\nramp_k_min = 6.0\nto_k = 400.0\n\n[[programme.step]]\nhold_s = 60.0\n",
        );
        let scenario = milligram_scenario_from_str(&here(), &text).unwrap();
        assert_eq!(scenario.programme.duration_s(), 1000.0 + 60.0);
        assert_eq!(scenario.initial_mass_fractions, vec![1.0]);
        assert!((scenario.programme.heating_rate_k_s_at(10.0) - 0.1).abs() < 1e-15);
    }

    #[test]
    fn a_step_with_both_ramp_and_hold_names_its_line_and_key() {
        let text =
            scenario_text("[[programme.step]]\nramp_k_min = 10.0\nto_k = 900.0\nhold_s = 5.0\n");
        let message = milligram_scenario_from_str(&here(), &text)
            .unwrap_err()
            .to_string();
        assert!(
            message.contains("scenario.toml:6") && message.contains("programme.step[0]"),
            "{message}"
        );
    }

    #[test]
    fn an_unknown_integrator_is_rejected_with_what_was_found() {
        let text = scenario_text(
            "[[programme.step]]\nramp_k_min = 10.0\nto_k = 900.0\n\n[numerics]\nintegrator = \"euler\"\n",
        );
        let message = milligram_scenario_from_str(&here(), &text)
            .unwrap_err()
            .to_string();
        assert!(
            message.contains(":11:")
                && message.contains("numerics.integrator")
                && message.contains("euler"),
            "{message}"
        );
    }

    #[test]
    fn a_replacement_material_keeps_the_composition_by_name() {
        let text = scenario_text("[[programme.step]]\nramp_k_min = 10.0\nto_k = 900.0\n");
        let mut scenario = milligram_scenario_from_str(&here(), &text).unwrap();
        let material = |name: &str| {
            crate::case::material::material_from_str(
                Path::new("new.toml"),
                &format!(
                    "title = \"t\"\nheat_of_combustion_mj_kg = 20.0\n[[component]]\n\
                     name = \"{name}\"\ndensity_kg_m3 = 1000.0\nconductivity_w_m_k = 0.2\n\
                     specific_heat_j_kg_k = 1500.0\nemissivity = 0.9\n[[reaction]]\n\
                     from = \"{name}\"\npre_exponential_per_s = 1.0e12\n\
                     activation_energy_kj_mol = 180.0\nheat_of_reaction_kj_kg = 500.0\n"
                ),
            )
            .unwrap()
        };
        let message = scenario
            .use_material(Path::new("new.toml"), material("other"))
            .unwrap_err()
            .to_string();
        assert!(
            message.contains("new.toml") && message.contains("`virgin`"),
            "{message}"
        );
        scenario
            .use_material(Path::new("new.toml"), material("virgin"))
            .unwrap();
        assert_eq!(scenario.initial_mass_fractions, vec![1.0]);
        assert_eq!(
            scenario.material.material.reactions[0].pre_exponential_per_s,
            1.0e12
        );
    }

    #[test]
    fn csv_has_the_documented_columns() {
        let text = scenario_text("[[programme.step]]\nramp_k_min = 60.0\nto_k = 310.0\n");
        let scenario = milligram_scenario_from_str(&here(), &text).unwrap();
        let history = simulate_programme(&scenario).unwrap();
        let csv = String::from_utf8(zero_d_csv(&history).unwrap()).unwrap();
        assert_eq!(
            csv.lines().next().unwrap(),
            "time_s,temperature_k,mass_fraction,mlr_per_s,dsc_w_g,mcc_w_g"
        );
        assert_eq!(csv.lines().count(), 1 + history.time_s.len());
    }
}
