//! Milligram-scale cases of a fit job (docs/fit-jobs.md, "Milligram-scale cases"): one TGA, DSC
//! or MCC file read by `microscale::files`, the heating programme from the case's milligram
//! scenario or fitted to the file's temperatures, and the file's signal. Also the checks that
//! keep cone and milligram keys apart, each naming file, line and key.

use std::path::Path;

use toml::Spanned;

use super::cases::weight_and_window;
use super::weighting::{sigma_policy, signal_scale};
use super::{CaseFile, CaseSetup, FitCase, MilligramSetup, SignalData, SignalFile, SignalKind};
use crate::case::source::{error_chain, Source};
use crate::case::{CaseError, MaterialModel};
use crate::microscale::{
    is_milligram_scenario, load_milligram_scenario, read_thermogram, MeasurementKind,
    MilligramCase, Thermogram,
};
use crate::physics::zero_d::ZeroDSettings;

/// What a `[[case]]` is.
pub(super) enum CaseKind {
    Cone,
    /// A milligram case; the kind when the job states it (else the file's).
    Milligram(Option<MeasurementKind>),
}

/// A case is a milligram case when its `kind` says so, or when it names a milligram `scenario`.
pub(super) fn case_kind(
    source: &Source,
    idx: usize,
    raw: &CaseFile,
) -> Result<CaseKind, CaseError> {
    let key = format!("case[{idx}].kind");
    let Some(kind) = &raw.kind else {
        return Ok(match raw.scenario {
            Some(_) => CaseKind::Milligram(None),
            None => CaseKind::Cone,
        });
    };
    Ok(match kind.get_ref().as_str() {
        "cone" => {
            if let Some(scenario) = &raw.scenario {
                return Err(source.invalid(
                    &scenario.span(),
                    &format!("case[{idx}].scenario"),
                    "belongs to milligram cases; a cone case runs the job's `scenario`",
                ));
            }
            CaseKind::Cone
        }
        "tga" => CaseKind::Milligram(Some(MeasurementKind::Tga)),
        "dsc" => CaseKind::Milligram(Some(MeasurementKind::Dsc)),
        "mcc" => CaseKind::Milligram(Some(MeasurementKind::Mcc)),
        other => {
            return Err(source.invalid(
                &kind.span(),
                &key,
                format!("must be \"cone\", \"tga\", \"dsc\" or \"mcc\", got \"{other}\""),
            ))
        }
    })
}

/// The error for a cone case in a job without a `scenario`, at the case's first test.
pub(super) fn cone_case_without_scenario(source: &Source, idx: usize, raw: &CaseFile) -> CaseError {
    let problem = format!(
        "is missing: case `{}` (case[{idx}]) is a cone case and runs the job's scenario; only \
         milligram cases (`kind = \"tga\"`, \"dsc\" or \"mcc\") run without one",
        raw.name
    );
    match raw.tests.first() {
        Some(test) => source.invalid(&test.span(), "scenario", problem),
        None => source.inconsistent(format!("`scenario` {problem}")),
    }
}

/// Refuses what belongs to milligram cases in a cone case: a thermogram among the tests, or a
/// milligram signal.
pub(super) fn check_cone_case(
    source: &Source,
    idx: usize,
    raw: &CaseFile,
) -> Result<(), CaseError> {
    if let Some(test) = raw
        .tests
        .iter()
        .find(|t| t.get_ref().to_lowercase().ends_with(".csv"))
    {
        return Err(source.invalid(
            &test.span(),
            &format!("case[{idx}].tests"),
            format!(
                "`{}` is a data file; a cone case names test descriptions (.toml, \
                 docs/test-files.md), and a TGA, DSC or MCC file needs the case's \
                 `kind = \"tga\"`, \"dsc\" or \"mcc\"",
                test.get_ref()
            ),
        ));
    }
    for (signal_idx, signal) in raw.signals.iter().enumerate() {
        if let Some(kind) = signal.kind().milligram_kind() {
            return Err(source.invalid(
                &signal.signal.span(),
                &format!("case[{idx}].signals[{signal_idx}].signal"),
                format!(
                    "`{}` is a milligram-scale signal ({}); case `{}` is a cone case (give it \
                     `kind = \"{}\"` and a {} file, or a cone signal: mlr, hrr, mass, \
                     ignition_time, surface_temperature, back_temperature, \
                     in_depth_temperature)",
                    signal.kind().name(),
                    kind.name().to_uppercase(),
                    raw.name,
                    kind.name(),
                    kind.name().to_uppercase()
                ),
            ));
        }
    }
    Ok(())
}

/// Builds a milligram case: its file, programme, composition and signal.
#[allow(clippy::too_many_arguments)]
pub(super) fn build_milligram_case(
    source: &Source,
    idx: usize,
    raw: &CaseFile,
    declared: Option<MeasurementKind>,
    base: &Path,
    job_material: (&Path, &MaterialModel),
    output_interval_s: f64,
    warnings: &mut Vec<crate::data::Notice>,
) -> Result<FitCase, CaseError> {
    let key = |field: &str| format!("case[{idx}].{field}");
    let cone_only = [
        ("irradiance_kw_m2", &raw.irradiance_kw_m2),
        ("thickness_mm", &raw.thickness_mm),
        ("duration_s", &raw.duration_s),
    ];
    for (field, value) in cone_only {
        if let Some(value) = value {
            return Err(source.invalid(
                &value.span(),
                &key(field),
                "belongs to cone cases; a milligram case takes its programme from its file or \
                 its `scenario`",
            ));
        }
    }
    if raw.align.is_some() {
        return Err(source.inconsistent(format!(
            "case `{}`: `align` belongs to cone cases (a milligram case reads one file)",
            raw.name
        )));
    }
    let test = match raw.tests.as_slice() {
        [] => return Err(source.inconsistent(format!("case `{}` names no tests", raw.name))),
        [test] => test,
        [_, second, ..] => {
            return Err(source.invalid(
                &second.span(),
                &key("tests"),
                format!(
                    "a milligram case reads one file, got {}; give each heating rate or \
                     repeat its own [[case]]",
                    raw.tests.len()
                ),
            ))
        }
    };
    let test_path = base.join(test.get_ref());
    let thermogram = read_thermogram(&test_path).map_err(|err| {
        source.invalid(
            &test.span(),
            &key("tests"),
            format!("cannot use {}: {}", test_path.display(), error_chain(&err)),
        )
    })?;
    warnings.extend(thermogram.notices.iter().filter(|n| n.is_warning).cloned());
    if let (Some(declared), Some(kind_span)) = (declared, raw.kind.as_ref().map(Spanned::span)) {
        if declared != thermogram.kind {
            return Err(source.invalid(
                &kind_span,
                &key("kind"),
                format!(
                    "is \"{}\", but {} reads as a {} file (by its signal column's unit and name)",
                    declared.name(),
                    test_path.display(),
                    thermogram.kind.name().to_uppercase()
                ),
            ));
        }
    }
    let mut test_files = vec![test_path.clone()];
    let (material_path, material) = job_material;
    let setup = match &raw.scenario {
        Some(scenario_file) => {
            let scenario_path = base.join(scenario_file.get_ref());
            let invalid =
                |problem: String| source.invalid(&scenario_file.span(), &key("scenario"), problem);
            if scenario_path.is_file() && !is_milligram_scenario(&scenario_path) {
                return Err(invalid(format!(
                    "{} is not a milligram-scale scenario (it has no [programme] table)",
                    scenario_path.display()
                )));
            }
            let mut scenario = load_milligram_scenario(&scenario_path).map_err(|err| {
                invalid(format!(
                    "cannot use {}: {}",
                    scenario_path.display(),
                    error_chain(&err)
                ))
            })?;
            scenario
                .use_material(material_path, material.clone())
                .map_err(|err| invalid(error_chain(&err)))?;
            test_files.push(scenario_path);
            MilligramSetup {
                kind: thermogram.kind,
                programme: scenario.programme,
                programme_start_s: 0.0,
                initial_mass_fractions: scenario.initial_mass_fractions,
                settings: scenario.settings,
            }
        }
        None => {
            let case = MilligramCase::from_thermogram(&thermogram).map_err(|err| {
                source.invalid(
                    &test.span(),
                    &key("tests"),
                    format!(
                        "cannot follow the temperature of {}: {}",
                        test_path.display(),
                        error_chain(&err)
                    ),
                )
            })?;
            // The programme follows the file's time column: bound its run as every run is
            // bounded (rows, memory), naming the file whose times ask for it.
            if let Err(size) = crate::case::budget::check_run_size(
                case.programme.duration_s(),
                output_interval_s,
                (8 * 8) as f64,
                None,
            ) {
                return Err(source.invalid(
                    &test.span(),
                    &key("tests"),
                    format!(
                        "the heating programme read from the times of {} {}",
                        test_path.display(),
                        size.problem
                    ),
                ));
            }
            let mut initial_mass_fractions = vec![0.0; material.material.components.len()];
            initial_mass_fractions[0] = 1.0;
            MilligramSetup {
                kind: thermogram.kind,
                programme: case.programme,
                programme_start_s: thermogram.time_s[0],
                initial_mass_fractions,
                settings: ZeroDSettings {
                    output_interval_s,
                    ..ZeroDSettings::default()
                },
            }
        }
    };
    let expected = SignalKind::of_milligram(thermogram.kind);
    let mut signals = Vec::new();
    if raw.signals.is_empty() {
        signals.push(signal_data(
            source,
            raw,
            &thermogram,
            expected,
            None,
            &key("signals[0]"),
        )?);
    }
    for (signal_idx, raw_signal) in raw.signals.iter().enumerate() {
        let signal_key = key(&format!("signals[{signal_idx}]"));
        if raw_signal.kind() != expected {
            return Err(source.invalid(
                &raw_signal.signal.span(),
                &format!("{signal_key}.signal"),
                format!(
                    "is `{}`, but {} is a {} file, whose signal is `{}`",
                    raw_signal.kind().name(),
                    test_path.display(),
                    thermogram.kind.name().to_uppercase(),
                    expected.name()
                ),
            ));
        }
        if let Some(depth) = &raw_signal.depth_mm {
            return Err(source.invalid(
                &depth.span(),
                &format!("{signal_key}.depth_mm"),
                "belongs to `in_depth_temperature` signals of cone cases",
            ));
        }
        signals.push(signal_data(
            source,
            raw,
            &thermogram,
            expected,
            Some(raw_signal),
            &signal_key,
        )?);
    }
    Ok(FitCase {
        name: raw.name.clone(),
        setup: CaseSetup::Milligram(setup),
        exposed_area_m2: 0.0,
        specimen_area_m2: 0.0,
        signals,
        test_files,
    })
}

/// The measured signal of a file within the signal's window, with its weight and σ (the
/// stated `sigma`, else the largest absolute value in the window, as for cone signals).
fn signal_data(
    source: &Source,
    raw: &CaseFile,
    thermogram: &Thermogram,
    kind: SignalKind,
    raw_signal: Option<&SignalFile>,
    signal_key: &str,
) -> Result<SignalData, CaseError> {
    let field = |name: &str| format!("{signal_key}.{name}");
    let (weight, (window_start, window_end)) = weight_and_window(source, raw_signal, &field)?;
    let (mut time_s, mut value) = (Vec::new(), Vec::new());
    for (&t, &v) in thermogram.time_s.iter().zip(&thermogram.values) {
        if t >= window_start && t <= window_end && v.is_finite() {
            time_s.push(t);
            value.push(v);
        }
    }
    if time_s.is_empty() {
        return Err(source.inconsistent(format!(
            "case `{}`: signal `{}` has no data in its window",
            raw.name,
            kind.name()
        )));
    }
    let stated_sigma = match raw_signal.and_then(|s| s.sigma.as_ref()) {
        Some(v) => Some(source.positive(v, &field("sigma"))?),
        None => None,
    };
    let scale = signal_scale(kind, &value);
    let (sigma, sigma_source) = sigma_policy(kind, stated_sigma, None, scale, time_s.len());
    Ok(SignalData {
        kind,
        weight,
        effective_points: time_s.len() as f64,
        time_s,
        value,
        sigma,
        sigma_source,
        probe: None,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::case::job::load_job;

    /// A TGA case without `signals` fits its file's mass fraction on a programme that starts at
    /// the first data time; with a milligram scenario the programme is the scenario's and
    /// starts at data time 0, and the scenario file joins the case's files.
    #[test]
    fn a_tga_case_defaults_to_its_files_signal_and_takes_a_scenarios_programme() {
        let manifest = Path::new(env!("CARGO_MANIFEST_DIR"));
        let dir = std::env::temp_dir().join(format!("emberfit-mgjob-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let job = format!(
            "title = \"t\"\nmaterial = \"{m}/models/thermoplastic.toml\"\n\n[[parameter]]\n\
             path = \"reaction.0.activation_energy_kj_mol\"\nmin = 100.0\nmax = 250.0\n\n\
             [[case]]\nname = \"a\"\nkind = \"tga\"\ntests = [\"{m}/demo-cases/ridgeline-panel/tga-10k.csv\"]\n\n\
             [[case]]\nname = \"b\"\nscenario = \"{m}/demo-cases/pmma-tga/scenario.toml\"\n\
             tests = [\"{m}/demo-cases/ridgeline-panel/tga-10k.csv\"]\n",
            m = manifest.display()
        );
        let path = dir.join("job.toml");
        std::fs::write(&path, job).unwrap();
        let loaded = load_job(&path).unwrap();
        let _ = std::fs::remove_dir_all(&dir);
        let (a, b) = (&loaded.cases[0], &loaded.cases[1]);
        assert_eq!(a.signals.len(), 1);
        assert_eq!(a.signals[0].kind, SignalKind::MassFraction);
        assert_eq!(a.signals[0].sigma_source, "peak");
        let setup_a = a.milligram().unwrap();
        assert_eq!(setup_a.programme_start_s, a.signals[0].time_s[0]);
        assert!((setup_a.programme.heating_rate_k_s_at(10.0) * 60.0 - 10.0).abs() < 1e-3);
        let setup_b = b.milligram().unwrap();
        assert_eq!(setup_b.kind, MeasurementKind::Tga);
        assert_eq!(setup_b.programme_start_s, 0.0);
        // The demo scenario holds for 600 s before its ramp.
        assert_eq!(setup_b.programme.heating_rate_k_s_at(300.0), 0.0);
        assert_eq!(b.test_files.len(), 2);
        assert_eq!(a.exposed_area_m2, 0.0);
    }
}
