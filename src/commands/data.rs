//! `reduce` and `ignition`: lab test files to report quantities and the ignition analysis.
//!
//! **Invariant:** the limits of a test's values are `data::description`'s: the flags of
//! `reduce FILE.csv` are checked by `TestDescription::parse` as the TEST.toml keys they stand
//! for, not here.

use std::path::Path;

use anyhow::{bail, Context, Result};

use emberfit::data::description::ColumnName;
use emberfit::data::ignition::{analyse, points_from_tests, IgnitionList, IgnitionSettings};
use emberfit::data::{reduce as reduce_test, DataError, TestDescription};
use emberfit::export::write_atomically;
use emberfit::present;

use super::{print_notices, refuse_warnings_when_strict};
use crate::cli::{IgnitionArgs, ReduceArgs};

pub fn reduce(args: ReduceArgs) -> Result<()> {
    let is_csv = args
        .input
        .extension()
        .and_then(|e| e.to_str())
        .is_some_and(|e| matches!(e.to_lowercase().as_str(), "csv" | "txt" | "tsv"));
    let test = if is_csv {
        description_from_flags(&args)?
    } else {
        let csv_only = [
            ("--area-m2", args.area_m2.is_some()),
            ("--flux-kw-m2", args.flux_kw_m2.is_some()),
            ("--time-column", args.time_column.is_some()),
            ("--mass-column", args.mass_column.is_some()),
            ("--hrr-column", args.hrr_column.is_some()),
            ("--time-unit", args.time_unit.is_some()),
            ("--mass-unit", args.mass_unit.is_some()),
            ("--hrr-unit", args.hrr_unit.is_some()),
            ("--ignition-time-s", args.ignition_time_s.is_some()),
            ("--time-offset-s", args.time_offset_s.is_some()),
            ("--not-tared", args.not_tared),
            (
                "--heat-of-combustion-mj-kg",
                args.heat_of_combustion_mj_kg.is_some(),
            ),
            (
                "--combustion-efficiency",
                args.combustion_efficiency.is_some(),
            ),
            ("--smooth", args.smooth.is_some()),
        ];
        if let Some((flag, _)) = csv_only.iter().find(|(_, given)| *given) {
            bail!(
                "{flag} applies to a CSV input only; with a TEST.toml set it in the file \
                 (see docs/test-files.md)"
            );
        }
        TestDescription::load(&args.input).context("loading the test description")?
    };
    let reduced =
        reduce_test(&test).with_context(|| format!("reducing {}", test.source.display()))?;
    refuse_warnings_when_strict(&reduced.notices, args.strict)?;
    if let Some(out) = &args.out {
        write_atomically(
            out,
            present::reduce::reduced_curves_csv(&reduced).as_bytes(),
        )
        .with_context(|| format!("writing {}", out.display()))?;
    }
    if args.json {
        println!("{}", present::reduce::report_json(&reduced));
    } else {
        print_notices(&reduced.notices);
        print!("{}", present::reduce::report_table(&reduced));
        if let Some(out) = &args.out {
            println!(
                "curves written to {} ({} rows)",
                out.display(),
                reduced.time_s.len()
            );
        }
    }
    Ok(())
}

/// The test description a bare CSV and the flags make. The limits on the values are those of
/// `TestDescription::parse`, their one owner: the flags go through it as the keys of a
/// TEST.toml would ([`checked_flag_values`]), and a refusal names the flag.
fn description_from_flags(args: &ReduceArgs) -> Result<TestDescription> {
    let Some(area_m2) = args.area_m2 else {
        bail!("a CSV input needs --area-m2 (exposed area, e.g. 0.01 for a 100 mm square)");
    };
    let Some(flux_kw_m2) = args.flux_kw_m2 else {
        bail!("a CSV input needs --flux-kw-m2 (irradiance set on the heater, e.g. 50)");
    };
    if args.combustion_efficiency.is_some() && args.heat_of_combustion_mj_kg.is_none() {
        bail!("--combustion-efficiency needs --heat-of-combustion-mj-kg");
    }
    let checked = checked_flag_values(args, area_m2, flux_kw_m2)?;
    let mut test = TestDescription::for_csv(
        &args.input,
        checked.exposed_area_m2,
        checked.irradiance_kw_m2,
    );
    let column = |given: &Option<String>, default: &str, unit: &Option<String>| {
        let name = given.clone().unwrap_or_else(|| default.to_string());
        (!name.eq_ignore_ascii_case("none")).then(|| ColumnName {
            name,
            unit: unit.clone(),
            // A column the user named must exist; the default names may be absent.
            is_required: given.is_some(),
        })
    };
    if let Some(time) = column(&args.time_column, "time", &args.time_unit) {
        test.columns.time = ColumnName {
            is_required: true,
            ..time
        };
    } else {
        bail!("--time-column cannot be `none`: every record needs a time");
    }
    test.columns.mass = column(&args.mass_column, "mass", &args.mass_unit);
    test.columns.hrr = column(&args.hrr_column, "hrr", &args.hrr_unit);
    test.ignition_time_s = checked.ignition_time_s;
    test.time_offset_s = checked.time_offset_s;
    test.is_mass_tared = !args.not_tared;
    test.hrr_from_mass = checked.hrr_from_mass;
    test.smoothing = checked.smoothing;
    Ok(test)
}

/// Each value flag of `reduce FILE.csv` and the TEST.toml key whose limits it has.
const FLAG_KEYS: [(&str, &str); 7] = [
    ("--area-m2", "exposed_area_m2"),
    ("--flux-kw-m2", "irradiance_kw_m2"),
    ("--ignition-time-s", "ignition_time_s"),
    ("--time-offset-s", "time_offset_s"),
    (
        "--heat-of-combustion-mj-kg",
        "hrr_from_mass.heat_of_combustion_mj_kg",
    ),
    (
        "--combustion-efficiency",
        "hrr_from_mass.combustion_efficiency",
    ),
    ("--smooth", "processing.smoothing_window_points"),
];

/// The flags' values validated by `TestDescription::parse`, from the TEST.toml they would
/// make; a value it refuses is reported under its flag (`--area-m2 must be …, got 2`).
fn checked_flag_values(
    args: &ReduceArgs,
    area_m2: f64,
    flux_kw_m2: f64,
) -> Result<TestDescription> {
    let mut file = toml::Table::new();
    let data_file = args
        .input
        .file_name()
        .map_or_else(|| "data.csv".into(), |n| n.to_string_lossy().into_owned());
    file.insert("data_file".into(), data_file.into());
    file.insert("irradiance_kw_m2".into(), flux_kw_m2.into());
    file.insert("exposed_area_m2".into(), area_m2.into());
    // A file needs its time column and a signal; the flags' columns are set on the
    // description itself, not checked here.
    let mut columns = toml::Table::new();
    columns.insert("time".into(), "time".into());
    columns.insert("mass".into(), "mass".into());
    file.insert("columns".into(), columns.into());
    if let Some(t) = args.ignition_time_s {
        file.insert("ignition_time_s".into(), t.into());
    }
    if let Some(t) = args.time_offset_s {
        file.insert("time_offset_s".into(), t.into());
    }
    if let Some(heat_mj_kg) = args.heat_of_combustion_mj_kg {
        let mut hrr_from_mass = toml::Table::new();
        hrr_from_mass.insert("heat_of_combustion_mj_kg".into(), heat_mj_kg.into());
        if let Some(efficiency) = args.combustion_efficiency {
            hrr_from_mass.insert("combustion_efficiency".into(), efficiency.into());
        }
        file.insert("hrr_from_mass".into(), hrr_from_mass.into());
    }
    if let Some(points) = args.smooth {
        let points = i64::try_from(points).unwrap_or(i64::MAX);
        let mut processing = toml::Table::new();
        processing.insert("smoothing_window_points".into(), points.into());
        file.insert("processing".into(), processing.into());
    }
    let text = toml::to_string(&file).context("checking the flags")?;
    match TestDescription::parse(&args.input, &text) {
        Ok(checked) => Ok(checked),
        Err(DataError::Invalid { field, problem, .. }) => {
            let flag = FLAG_KEYS
                .iter()
                .find(|(_, key)| *key == field)
                .map_or(field.as_str(), |(flag, _)| flag);
            bail!("{flag} {problem}")
        }
        Err(other) => Err(other).context("checking the flags"),
    }
}

pub fn ignition(args: IgnitionArgs) -> Result<()> {
    let is_list = args.inputs.len() == 1 && is_ignition_list(&args.inputs[0])?;
    let (mut points, notices, mut settings) = if is_list {
        let list = IgnitionList::load(&args.inputs[0]).context("loading the ignition list")?;
        let (mut points, notices) =
            points_from_tests(&list.tests).context("reducing the listed tests")?;
        points.extend(list.points);
        (points, notices, list.settings)
    } else {
        let (points, notices) = points_from_tests(&args.inputs).context("reducing the tests")?;
        (points, notices, IgnitionSettings::default())
    };
    refuse_warnings_when_strict(&notices, args.strict)?;
    points.sort_by(|a, b| a.irradiance_kw_m2.total_cmp(&b.irradiance_kw_m2));
    if let Some(t_c) = args.ignition_temperature_c {
        if !(50.0..=1500.0).contains(&t_c) {
            bail!("--ignition-temperature-c must be within 50..1500 °C, got {t_c}");
        }
        settings.ignition_temperature_k = Some(t_c + 273.15);
    }
    if let Some(t_c) = args.ambient_temperature_c {
        if !(-40.0..=60.0).contains(&t_c) {
            bail!("--ambient-temperature-c must be within -40..60 °C, got {t_c}");
        }
        settings.ambient_temperature_k = t_c + 273.15;
    }
    let analysis = analyse(&points, &settings).context("analysing the ignition times")?;
    if args.json {
        println!("{}", present::ignition::ignition_json(&analysis, &notices));
    } else {
        print_notices(&notices);
        print!("{}", present::ignition::ignition_table(&analysis));
    }
    Ok(())
}

/// Whether a single input is an ignition list (a TOML without `data_file`) rather than a test.
fn is_ignition_list(path: &Path) -> Result<bool> {
    let text = emberfit::input::read_text(path, emberfit::input::InputKind::Toml)
        .with_context(|| format!("cannot read {}", path.display()))?;
    let table: toml::Table =
        toml::from_str(&text).with_context(|| format!("cannot parse {}", path.display()))?;
    Ok(!table.contains_key("data_file"))
}

#[cfg(test)]
mod tests {
    use super::*;
    use clap::Parser;

    use crate::cli::{Cli, Command};

    fn reduce_args(flags: &[&str]) -> ReduceArgs {
        let mut argv = vec!["emberfit", "reduce", "lab/t-50.csv"];
        argv.extend_from_slice(flags);
        match Cli::try_parse_from(argv).map(|cli| cli.command) {
            Ok(Command::Reduce(args)) => *args,
            other => panic!("not a reduce command: {other:?}"),
        }
    }

    fn refusal(flags: &[&str]) -> String {
        let args = reduce_args(flags);
        format!("{:#}", description_from_flags(&args).unwrap_err())
    }

    #[test]
    fn a_value_the_test_file_would_refuse_is_refused_under_its_flag() {
        let base = ["--area-m2", "0.01", "--flux-kw-m2", "50"];
        assert_eq!(
            refusal(&["--area-m2", "2", "--flux-kw-m2", "50"]),
            "--area-m2 must be in m2 (a cone specimen is about 0.01), got 2"
        );
        assert!(refusal(&["--area-m2", "0.01", "--flux-kw-m2", "250"])
            .starts_with("--flux-kw-m2 must be at most 200 kW/m²"));
        let with = |extra: &[&'static str]| {
            let mut flags = base.to_vec();
            flags.extend_from_slice(extra);
            refusal(&flags)
        };
        assert_eq!(
            with(&["--ignition-time-s=-1"]),
            "--ignition-time-s must be >= 0, got -1"
        );
        assert!(with(&["--heat-of-combustion-mj-kg", "90"])
            .starts_with("--heat-of-combustion-mj-kg must be"));
        assert!(with(&["--smooth", "4"]).starts_with("--smooth must be odd"));
    }

    #[test]
    fn values_within_the_limits_are_kept_as_given() {
        let args = reduce_args(&[
            "--area-m2",
            "0.0088",
            "--flux-kw-m2",
            "35",
            "--ignition-time-s",
            "12.5",
            "--heat-of-combustion-mj-kg",
            "25",
            "--combustion-efficiency",
            "0.9",
            "--smooth",
            "7",
        ]);
        let test = description_from_flags(&args).unwrap();
        assert_eq!(test.exposed_area_m2, 0.0088);
        assert_eq!(test.irradiance_kw_m2, 35.0);
        assert_eq!(test.ignition_time_s, Some(12.5));
        let hrr = test.hrr_from_mass.unwrap();
        assert_eq!(
            (hrr.heat_of_combustion_mj_kg, hrr.combustion_efficiency),
            (25.0, 0.9)
        );
        assert_eq!(
            test.smoothing.map(|s| (s.window_points, s.degree)),
            Some((7, 2))
        );
        assert_eq!(test.data_file, std::path::Path::new("lab/t-50.csv"));
    }
}
