//! `reduce` and `ignition`: lab test files to report quantities and the ignition analysis.

use std::path::Path;

use anyhow::{bail, Context, Result};

use emberfit::data::derivative::Smoothing;
use emberfit::data::description::{ColumnName, HrrFromMass};
use emberfit::data::ignition::{analyse, points_from_tests, IgnitionList, IgnitionSettings};
use emberfit::data::{reduce as reduce_test, TestDescription};
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

/// The test description a bare CSV and the flags make.
fn description_from_flags(args: &ReduceArgs) -> Result<TestDescription> {
    let Some(area_m2) = args.area_m2 else {
        bail!("a CSV input needs --area-m2 (exposed area, e.g. 0.01 for a 100 mm square)");
    };
    let Some(flux_kw_m2) = args.flux_kw_m2 else {
        bail!("a CSV input needs --flux-kw-m2 (irradiance set on the heater, e.g. 50)");
    };
    if !(area_m2 > 0.0 && area_m2 <= 1.0) {
        bail!("--area-m2 must be > 0 and at most 1 m², got {area_m2}");
    }
    if !(0.0..=200.0).contains(&flux_kw_m2) {
        bail!("--flux-kw-m2 must be within 0..200 kW/m², got {flux_kw_m2}");
    }
    let mut test = TestDescription::for_csv(&args.input, area_m2, flux_kw_m2);
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
    test.ignition_time_s = args.ignition_time_s;
    if let Some(t) = args.ignition_time_s {
        if t.is_nan() || t < 0.0 {
            bail!("--ignition-time-s must be >= 0, got {t}");
        }
    }
    test.time_offset_s = args.time_offset_s.unwrap_or(0.0);
    test.is_mass_tared = !args.not_tared;
    if let Some(heat_mj_kg) = args.heat_of_combustion_mj_kg {
        let efficiency = args.combustion_efficiency.unwrap_or(1.0);
        if !(1.0..=60.0).contains(&heat_mj_kg) {
            bail!("--heat-of-combustion-mj-kg must be within 1..60 MJ/kg, got {heat_mj_kg}");
        }
        if !(efficiency > 0.0 && efficiency <= 1.0) {
            bail!("--combustion-efficiency must be > 0 and at most 1, got {efficiency}");
        }
        test.hrr_from_mass = Some(HrrFromMass {
            heat_of_combustion_mj_kg: heat_mj_kg,
            combustion_efficiency: efficiency,
        });
    } else if args.combustion_efficiency.is_some() {
        bail!("--combustion-efficiency needs --heat-of-combustion-mj-kg");
    }
    if let Some(points) = args.smooth {
        if points < 3 || points % 2 == 0 {
            bail!("--smooth must be an odd number of points, at least 3, got {points}");
        }
        test.smoothing = Some(Smoothing {
            window_points: points,
            degree: 2,
        });
    }
    Ok(test)
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
