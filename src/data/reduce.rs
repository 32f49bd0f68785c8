//! Reduction of one test: reads the data file a [`TestDescription`] points at, repairs what can
//! be repaired (and says so), computes HRR (lab's column, or oxygen consumption from raw gas
//! signals), MLR by the five-point derivative, the optional mass-loss estimate of HRR and smoke
//! signals, and the report quantities.
//!
//! Curves start at exposure (t = 0 after the time offset); earlier rows serve as baselines.

use std::path::PathBuf;

use super::derivative::{five_point_derivative, savitzky_golay};
use super::description::{GasAnalysis, GasMethod, OrificeConstant, TestDescription};
use super::lag;
use super::oxygen::{
    self, baseline, exhaust_mass_flow_kg_s, hrr_general_kw, hrr_oxygen_only_kw,
    orifice_constant_from_methane, AmbientGas, GasReading,
};
use super::report::{compute, Report, ReportInput};
use super::table::{read_table, ColumnRequest, Quantity};
use super::{DataError, Notice};

/// Density of air times temperature at 1 atm, ρ·T = 353 kg·K/m³ (ideal gas, M = 28.96 g/mol;
/// common practice), to turn the exhaust mass flow into a volume flow at the photometer.
const AIR_DENSITY_TIMES_TEMPERATURE_KG_K_M3: f64 = 353.2;
/// An HRR this many seconds off the mass-loss rate gets a note: more than the few seconds a
/// derivative's smoothing and the flame's own response explain (common practice).
const HRR_LAG_NOTICE_S: f64 = 3.0;

/// A reduced test: curves on one time base from exposure start, report quantities, repairs.
#[derive(Debug, Clone, PartialEq)]
pub struct Reduced {
    /// Description the test came from.
    pub source: PathBuf,
    /// Set irradiance, kW/m².
    pub irradiance_kw_m2: f64,
    /// Exposed area, m² (what the per-area curves are per).
    pub exposed_area_m2: f64,
    /// Area of the specimen face that burns, m² (`exposed_area_m2` unless the description
    /// says otherwise).
    pub specimen_area_m2: f64,
    /// Time from exposure start, s.
    pub time_s: Vec<f64>,
    /// Heat release rate per exposed area, kW/m² (lab's column or oxygen consumption).
    pub hrr_kw_m2: Option<Vec<f64>>,
    /// Load-cell mass, g (negative readings of a tared specimen clipped to zero). When the
    /// description says the load cell is not tared, this includes holder and backing: use
    /// differences, or the MLR.
    pub mass_g: Option<Vec<f64>>,
    /// Mass loss rate per exposed area, g/(m²·s), positive when mass is lost.
    pub mlr_g_m2s: Option<Vec<f64>>,
    /// Mass-loss estimate of HRR, χ·ΔH_c·MLR, kW/m².
    pub hrr_from_mass_kw_m2: Option<Vec<f64>>,
    /// Smoke extinction coefficient k = ln(I₀/I)/L, 1/m.
    pub extinction_coefficient_1_m: Option<Vec<f64>>,
    /// Smoke production rate V̇·k, m²/s.
    pub smoke_production_m2_s: Option<Vec<f64>>,
    /// Exposed-surface temperature, K.
    pub surface_temperature_k: Option<Vec<f64>>,
    /// Temperature of the specimen's unexposed face, K.
    pub back_temperature_k: Option<Vec<f64>>,
    /// In-depth thermocouples, K, in the description's order.
    pub in_depth_temperature_k: Vec<DepthCurve>,
    /// Orifice constant used (or found, for a methane calibration run), m^½·kg^½·K^½.
    pub orifice_constant: Option<f64>,
    /// Report quantities.
    pub report: Report,
    /// Every repair and assumption, in the order made.
    pub notices: Vec<Notice>,
}

/// Two thermocouple depths closer than this, mm, are the same depth (when repeats are
/// matched, and when a fit signal names its depth).
pub const DEPTH_MATCH_MM: f64 = 0.01;

/// A temperature measured at a depth below the initial exposed surface.
#[derive(Debug, Clone, PartialEq)]
pub struct DepthCurve {
    /// Depth, mm.
    pub depth_mm: f64,
    /// Temperature, K, on the reduced time base.
    pub temperature_k: Vec<f64>,
}

/// Signals read from the data file, cleaned, on the shifted time base (may include t < 0).
struct Signals {
    time_s: Vec<f64>,
    mass_g: Option<Vec<f64>>,
    hrr: Option<(Vec<f64>, String)>,
    oxygen: Option<Vec<f64>>,
    carbon_dioxide: Option<Vec<f64>>,
    carbon_monoxide: Option<Vec<f64>>,
    orifice_pressure_pa: Option<Vec<f64>>,
    exhaust_temperature_k: Option<Vec<f64>>,
    smoke_light: Option<Vec<f64>>,
    surface_temperature_k: Option<Vec<f64>>,
    back_temperature_k: Option<Vec<f64>>,
    in_depth_temperature_k: Vec<Vec<f64>>,
    notices: Vec<Notice>,
}

fn read_signals(test: &TestDescription) -> Result<Signals, DataError> {
    let columns = &test.columns;
    let mut wanted = vec![
        (Some(&columns.time), Quantity::Time),
        (columns.mass.as_ref(), Quantity::Mass),
        (columns.hrr.as_ref(), Quantity::HeatReleaseRate),
        (columns.oxygen.as_ref(), Quantity::MoleFraction),
        (columns.carbon_dioxide.as_ref(), Quantity::MoleFraction),
        (columns.carbon_monoxide.as_ref(), Quantity::MoleFraction),
        (columns.orifice_pressure.as_ref(), Quantity::Pressure),
        (columns.exhaust_temperature.as_ref(), Quantity::Temperature),
        (columns.smoke_light.as_ref(), Quantity::Any),
    ];
    // The instruments' series come first, then the specimen's thermocouples (the series
    // below leave out the time column).
    let first_thermocouple = wanted.len() - 1;
    wanted.push((columns.surface_temperature.as_ref(), Quantity::Temperature));
    wanted.push((columns.back_temperature.as_ref(), Quantity::Temperature));
    for probe in &columns.in_depth_temperature {
        wanted.push((Some(&probe.column), Quantity::Temperature));
    }
    let requests: Vec<ColumnRequest> = wanted
        .iter()
        .filter_map(|(column, quantity)| {
            column.map(|c| ColumnRequest {
                name: c.name.clone(),
                unit: c.unit.clone(),
                quantity: *quantity,
                is_required: c.is_required,
            })
        })
        .collect();
    let table = read_table(&test.data_file, &requests)?;
    let path = table.path.clone();
    let mut notices = table.notices;
    let lines = table.lines;
    let mut columns_read = table.columns.into_iter();
    let time = columns_read
        .next()
        .flatten()
        .ok_or_else(|| DataError::File {
            path: path.clone(),
            problem: "no time column".to_string(),
        })?;
    let time_header = time.header.clone();
    let mut series: Vec<Option<(Vec<f64>, String, String)>> = Vec::new();
    for (column, _) in &wanted[1..] {
        series.push(if column.is_some() {
            columns_read
                .next()
                .flatten()
                .map(|c| (c.values, c.unit, c.header))
        } else {
            None
        });
    }

    // Rows without a time cannot be placed: drop them. Repeated times: keep the first.
    // Time running backwards is an error, because it means two records were pasted together.
    let mut keep = Vec::with_capacity(time.values.len());
    let mut n_no_time = 0;
    let mut n_repeated = 0;
    let mut last_time: Option<f64> = None;
    for (row, &t) in time.values.iter().enumerate() {
        if !t.is_finite() {
            n_no_time += 1;
            continue;
        }
        if let Some(previous) = last_time {
            if t == previous {
                n_repeated += 1;
                continue;
            }
            if t < previous {
                return Err(DataError::Cell {
                    path,
                    line: lines[row],
                    column: time_header,
                    problem: format!("time runs backwards: {t} s after {previous} s"),
                });
            }
        }
        last_time = Some(t);
        keep.push(row);
    }
    if n_no_time > 0 {
        notices.push(Notice::new(format!(
            "{}: dropped {n_no_time} rows with no time",
            path.display()
        )));
    }
    if n_repeated > 0 {
        notices.push(Notice::new(format!(
            "{}: dropped {n_repeated} rows repeating the previous time",
            path.display()
        )));
    }
    let mut time_s: Vec<f64> = keep
        .iter()
        .map(|&row| time.values[row] + test.time_offset_s)
        .collect();
    let mut signals: Vec<Option<(Vec<f64>, String, String)>> = series
        .into_iter()
        .map(|s| s.map(|(v, unit, header)| (keep.iter().map(|&r| v[r]).collect(), unit, header)))
        .collect();
    let row_lines: Vec<usize> = keep.iter().map(|&r| lines[r]).collect();

    // Keep the span in which every instrument signal (mass, HRR, gas analysis, smoke) has a
    // value; fill interior gaps linearly. The specimen's thermocouples do not set the span: one
    // that comes loose or is logged for part of the test only (a lab's back-face readings
    // that stop at 400 s, say) keeps its own span inside it, missing (NaN) outside, so that it
    // does not cut the mass and HRR records short.
    let (instruments, thermocouples) = signals.split_at_mut(first_thermocouple);
    let first = (0..time_s.len()).find(|&i| {
        instruments
            .iter()
            .flatten()
            .all(|(v, _, _)| v[i].is_finite())
    });
    let last = (0..time_s.len()).rev().find(|&i| {
        instruments
            .iter()
            .flatten()
            .all(|(v, _, _)| v[i].is_finite())
    });
    let (Some(first), Some(last)) = (first, last) else {
        return Err(DataError::File {
            path,
            problem: "no row has a value in every column used".to_string(),
        });
    };
    if first > 0 || last + 1 < time_s.len() {
        notices.push(Notice::new(format!(
            "{}: kept lines {}–{}: {} leading and {} trailing rows lack a value in a column used",
            path.display(),
            row_lines[first],
            row_lines[last],
            first,
            time_s.len() - 1 - last
        )));
    }
    time_s = time_s[first..=last].to_vec();
    let kept_lines = &row_lines[first..=last];
    for (values, _, header) in instruments.iter_mut().flatten() {
        *values = values[first..=last].to_vec();
        let n_filled = fill_gaps(&time_s, values);
        if n_filled > 0 {
            notices.push(Notice::new(format!(
                "{}: column `{header}`: filled {n_filled} missing values by linear \
                 interpolation between neighbours",
                path.display()
            )));
        }
    }
    for slot in thermocouples.iter_mut() {
        let Some((values, _, header)) = slot else {
            continue;
        };
        *values = values[first..=last].to_vec();
        let finite = |i: &usize| values[*i].is_finite();
        let (Some(start), Some(end)) = (
            (0..values.len()).find(finite),
            (0..values.len()).rev().find(finite),
        ) else {
            notices.push(Notice::new(format!(
                "{}: column `{header}` has no value in lines {}–{}; it is ignored",
                path.display(),
                kept_lines[0],
                kept_lines[kept_lines.len() - 1]
            )));
            *slot = None;
            continue;
        };
        if start > 0 || end + 1 < values.len() {
            notices.push(Notice::new(format!(
                "{}: column `{header}` has values from {} s to {} s only (lines {}–{}); it is \
                 missing outside them, and the other columns keep their span",
                path.display(),
                time_s[start],
                time_s[end],
                kept_lines[start],
                kept_lines[end]
            )));
        }
        let n_filled = fill_gaps(&time_s[start..=end], &mut values[start..=end]);
        if n_filled > 0 {
            notices.push(Notice::new(format!(
                "{}: column `{header}`: filled {n_filled} missing values by linear \
                 interpolation between neighbours",
                path.display()
            )));
        }
    }
    if time_s.len() < 5 {
        return Err(DataError::File {
            path,
            problem: format!("needs at least 5 usable rows, found {}", time_s.len()),
        });
    }
    let steps: Vec<f64> = time_s.windows(2).map(|w| w[1] - w[0]).collect();
    let (min_step, max_step) = steps.iter().fold((f64::INFINITY, 0.0_f64), |(lo, hi), s| {
        (lo.min(*s), hi.max(*s))
    });
    if max_step > 1.5 * min_step {
        notices.push(Notice::new(format!(
            "{}: time steps are not uniform ({min_step:.3}–{max_step:.3} s); the derivative \
             uses the actual times",
            path.display()
        )));
    }
    if signals.iter().all(Option::is_none) {
        return Err(DataError::File {
            path,
            problem: "has none of the signal columns looked for (mass, HRR or gas analysis)"
                .to_string(),
        });
    }
    fn view<'a>(
        signal: &'a Option<(Vec<f64>, String, String)>,
        lines: &'a [usize],
    ) -> Option<super::plausibility::ColumnView<'a>> {
        signal
            .as_ref()
            .map(|(values, unit, header)| super::plausibility::ColumnView {
                header: header.as_str(),
                unit: unit.as_str(),
                values: values.as_slice(),
                lines,
            })
    }
    notices.extend(super::plausibility::check_cone_signals(
        &path,
        &test.source,
        view(&signals[0], kept_lines),
        view(&signals[1], kept_lines),
        test.initial_mass_g,
    ));
    let mut signals = signals.into_iter();
    let mut next = || signals.next().flatten();
    let mass = next();
    let hrr = next();
    let oxygen = next();
    let carbon_dioxide = next();
    let carbon_monoxide = next();
    let orifice = next();
    let exhaust = next();
    let light = next();
    let surface = next();
    let back = next();
    let in_depth: Vec<Vec<f64>> = (0..test.columns.in_depth_temperature.len())
        .filter_map(|_| next().map(|s| s.0))
        .collect();
    Ok(Signals {
        time_s,
        mass_g: mass.map(|s| s.0),
        hrr: hrr.map(|s| (s.0, s.1)),
        oxygen: oxygen.map(|s| s.0),
        carbon_dioxide: carbon_dioxide.map(|s| s.0),
        carbon_monoxide: carbon_monoxide.map(|s| s.0),
        orifice_pressure_pa: orifice.map(|s| s.0),
        exhaust_temperature_k: exhaust.map(|s| s.0),
        smoke_light: light.map(|s| s.0),
        surface_temperature_k: surface.map(|s| s.0),
        back_temperature_k: back.map(|s| s.0),
        in_depth_temperature_k: in_depth,
        notices,
    })
}

/// Fills NaN values strictly inside finite neighbours by linear interpolation in time; returns
/// how many were filled. The ends are finite by construction.
fn fill_gaps(time_s: &[f64], values: &mut [f64]) -> usize {
    let mut filled = 0;
    let mut idx = 0;
    while idx < values.len() {
        if values[idx].is_finite() {
            idx += 1;
            continue;
        }
        let before = idx - 1; // idx > 0 because values[0] is finite
        let after = (idx..values.len())
            .find(|&j| values[j].is_finite())
            .unwrap_or(before);
        for j in idx..after {
            let w = (time_s[j] - time_s[before]) / (time_s[after] - time_s[before]);
            values[j] = values[before] + w * (values[after] - values[before]);
            filled += 1;
        }
        idx = after.max(idx + 1);
    }
    filled
}

/// Gas signals after delay shift, with their baselines.
struct ShiftedGas {
    oxygen: Vec<f64>,
    carbon_dioxide: Option<Vec<f64>>,
    carbon_monoxide: Option<Vec<f64>>,
    ambient: AmbientGas,
}

fn shift_gas(
    test: &TestDescription,
    gas: &GasAnalysis,
    signals: &Signals,
    notices: &mut Vec<Notice>,
) -> Result<ShiftedGas, DataError> {
    let time_s = &signals.time_s;
    let missing = |what: &str| DataError::Reduction {
        problem: format!(
            "{}: gas analysis needs the {what} column",
            test.source.display()
        ),
    };
    let oxygen_raw = signals.oxygen.as_ref().ok_or_else(|| missing("oxygen"))?;
    let oxygen = oxygen::shift_by_delay(time_s, oxygen_raw, gas.oxygen_delay_s);
    let carbon_dioxide = signals
        .carbon_dioxide
        .as_ref()
        .map(|v| oxygen::shift_by_delay(time_s, v, gas.carbon_dioxide_delay_s));
    let carbon_monoxide = signals
        .carbon_monoxide
        .as_ref()
        .map(|v| oxygen::shift_by_delay(time_s, v, gas.carbon_monoxide_delay_s));
    let oxygen_base = baseline(time_s, &oxygen, gas.baseline_until_s);
    let ambient_oxygen = match oxygen_base {
        Some(x) => x,
        None => {
            notices.push(Notice::new(format!(
                "{}: no O2 readings before {} s for a baseline; used the ambient value {}",
                test.source.display(),
                gas.baseline_until_s,
                test.ambient.oxygen
            )));
            test.ambient.oxygen
        }
    };
    let ambient_co2 = carbon_dioxide
        .as_ref()
        .and_then(|v| baseline(time_s, v, gas.baseline_until_s))
        .unwrap_or(test.ambient.carbon_dioxide);
    Ok(ShiftedGas {
        oxygen,
        carbon_dioxide,
        carbon_monoxide,
        ambient: AmbientGas {
            oxygen: ambient_oxygen,
            carbon_dioxide: ambient_co2,
            water: test.ambient.water_mole_fraction,
        },
    })
}

/// The orifice constant found from a methane calibration run (a description with
/// `[methane_burner]`), m^½·kg^½·K^½, with the notices made while reading it.
pub fn orifice_constant_from_run(
    calibration: &TestDescription,
) -> Result<(f64, Vec<Notice>), DataError> {
    let burner = calibration
        .methane_burner
        .ok_or_else(|| DataError::Reduction {
            problem: format!(
                "{}: is not a methane calibration run (no [methane_burner] table)",
                calibration.source.display()
            ),
        })?;
    let gas = calibration
        .gas
        .as_ref()
        .ok_or_else(|| DataError::Reduction {
            problem: format!(
                "{}: a methane calibration run needs [gas_analysis] for the delays and baseline",
                calibration.source.display()
            ),
        })?;
    let signals = read_signals(calibration)?;
    let mut notices = signals.notices.clone();
    let shifted = shift_gas(calibration, gas, &signals, &mut notices)?;
    let (Some(dp), Some(te)) = (&signals.orifice_pressure_pa, &signals.exhaust_temperature_k)
    else {
        return Err(DataError::Reduction {
            problem: format!(
                "{}: a methane calibration run needs the orifice pressure and exhaust \
                 temperature columns",
                calibration.source.display()
            ),
        });
    };
    let mut selected = (Vec::new(), Vec::new(), Vec::new());
    for idx in 0..signals.time_s.len() {
        let t = signals.time_s[idx];
        if t >= burner.steady_from_s && t <= burner.steady_to_s && shifted.oxygen[idx].is_finite() {
            selected.0.push(dp[idx]);
            selected.1.push(te[idx]);
            selected.2.push(shifted.oxygen[idx]);
        }
    }
    let constant = orifice_constant_from_methane(
        burner.burner_hrr_kw,
        shifted.ambient.oxygen,
        &selected.0,
        &selected.1,
        &selected.2,
    )
    .ok_or_else(|| DataError::Reduction {
        problem: format!(
            "{}: no O2 depletion between {} and {} s; is the steady period right?",
            calibration.source.display(),
            burner.steady_from_s,
            burner.steady_to_s
        ),
    })?;
    Ok((constant, notices))
}

/// Reduces one test (see the module doc). A methane calibration run reduces to its orifice
/// constant, with its burner HRR as the curve.
pub fn reduce(test: &TestDescription) -> Result<Reduced, DataError> {
    let signals = read_signals(test)?;
    let mut notices = signals.notices.clone();
    let area_m2 = test.exposed_area_m2;
    let time_all_s = signals.time_s.clone();

    // Heat release rate, on the full time base (pre-exposure included).
    let mut orifice_constant = None;
    let mut exhaust_flow_kg_s: Option<Vec<f64>> = None;
    let mut hrr_all: Option<Vec<f64>> = None;
    if let Some(gas) = &test.gas {
        let constant = if test.methane_burner.is_some() {
            orifice_constant_from_run(test)?.0
        } else {
            match &gas.orifice_constant {
                OrificeConstant::Given(c) => *c,
                OrificeConstant::FromCalibration(path) => {
                    let calibration = TestDescription::load(path)?;
                    let (c, calibration_notices) = orifice_constant_from_run(&calibration)?;
                    notices.extend(calibration_notices);
                    notices.push(Notice::new(format!(
                        "{}: orifice constant {c:.5} from the methane run {}",
                        test.source.display(),
                        path.display()
                    )));
                    c
                }
                OrificeConstant::ThisCalibrationRun => {
                    return Err(DataError::Reduction {
                        problem: format!(
                            "{}: [gas_analysis] says this is a calibration run, but there is \
                             no [methane_burner] table",
                            test.source.display()
                        ),
                    })
                }
            }
        };
        orifice_constant = Some(constant);
        if signals.hrr.is_some() {
            notices.push(Notice::new(format!(
                "{}: HRR computed from the gas analysers; the file's own HRR column is not used",
                test.source.display()
            )));
        }
        let shifted = shift_gas(test, gas, &signals, &mut notices)?;
        let (Some(dp), Some(te)) = (&signals.orifice_pressure_pa, &signals.exhaust_temperature_k)
        else {
            return Err(DataError::Reduction {
                problem: format!(
                    "{}: gas analysis needs the orifice pressure and exhaust temperature columns",
                    test.source.display()
                ),
            });
        };
        let flow: Vec<f64> = dp
            .iter()
            .zip(te)
            .map(|(p, t)| exhaust_mass_flow_kg_s(constant, *p, *t))
            .collect();
        let hrr: Vec<f64> = (0..time_all_s.len())
            .map(|idx| {
                let x_o2 = shifted.oxygen[idx];
                let q_kw = match gas.method {
                    GasMethod::OxygenOnly => {
                        hrr_oxygen_only_kw(flow[idx], shifted.ambient.oxygen, x_o2)
                    }
                    GasMethod::WithCarbonOxides => {
                        let reading = GasReading {
                            oxygen: x_o2,
                            carbon_dioxide: shifted.carbon_dioxide.as_ref().map_or(0.0, |v| v[idx]),
                            carbon_monoxide: shifted
                                .carbon_monoxide
                                .as_ref()
                                .map_or(0.0, |v| v[idx]),
                        };
                        hrr_general_kw(flow[idx], &shifted.ambient, &reading)
                    }
                };
                q_kw / area_m2
            })
            .collect();
        exhaust_flow_kg_s = Some(flow);
        hrr_all = Some(hrr);
    } else if let Some((hrr, unit)) = &signals.hrr {
        let per_area: Vec<f64> = if unit == "kW" {
            notices.push(Notice::new(format!(
                "{}: HRR column is in kW; divided by the exposed area {area_m2} m2",
                test.source.display()
            )));
            hrr.iter().map(|q| q / area_m2).collect()
        } else {
            hrr.clone()
        };
        hrr_all = Some(if test.hrr_delay_s > 0.0 {
            notices.push(Notice::new(format!(
                "{}: HRR moved {} s earlier (hrr_delay_s)",
                test.source.display(),
                test.hrr_delay_s
            )));
            oxygen::shift_by_delay(&time_all_s, &per_area, test.hrr_delay_s)
        } else {
            per_area
        });
    }

    // Smoke: extinction coefficient against the pre-exposure (or first) light reading.
    let mut extinction_all: Option<Vec<f64>> = None;
    let mut smoke_all: Option<Vec<f64>> = None;
    if let Some(light) = &signals.smoke_light {
        let baseline_until_s = test.gas.as_ref().map_or(0.0, |g| g.baseline_until_s);
        let reference = match baseline(&time_all_s, light, baseline_until_s) {
            Some(i0) => i0,
            None => {
                notices.push(Notice::new(format!(
                    "{}: no photometer readings before {baseline_until_s} s; I0 is the first \
                     reading",
                    test.source.display()
                )));
                light[0]
            }
        };
        if reference.is_nan() || reference <= 0.0 {
            return Err(DataError::Reduction {
                problem: format!(
                    "{}: photometer reference intensity must be > 0, got {reference}",
                    test.source.display()
                ),
            });
        }
        let mut n_clipped = 0;
        let k: Vec<f64> = light
            .iter()
            .map(|i| {
                if *i <= 0.0 {
                    n_clipped += 1;
                    f64::NAN
                } else {
                    (reference / i).ln() / test.smoke.path_length_m
                }
            })
            .collect();
        if n_clipped > 0 {
            notices.push(Notice::new(format!(
                "{}: {n_clipped} photometer readings at or below zero left out (no extinction \
                 coefficient)",
                test.source.display()
            )));
        }
        let volume_flow: Option<Vec<f64>> =
            match (test.smoke.duct_volume_flow_m3_s, &exhaust_flow_kg_s) {
                (Some(v), _) => Some(vec![v; k.len()]),
                (None, Some(flow)) => signals.exhaust_temperature_k.as_ref().map(|te| {
                    flow.iter()
                        .zip(te)
                        .map(|(m, t)| m * t / AIR_DENSITY_TIMES_TEMPERATURE_KG_K_M3)
                        .collect()
                }),
                (None, None) => {
                    notices.push(Notice::new(format!(
                        "{}: smoke release needs a duct flow (smoke.duct_volume_flow_m3_s or gas \
                     analysis); only the extinction coefficient is given",
                        test.source.display()
                    )));
                    None
                }
            };
        smoke_all = volume_flow.map(|v| v.iter().zip(&k).map(|(v, k)| v * k).collect());
        extinction_all = Some(k);
    }

    // Mass: clip negative readings of a tared specimen.
    let mass_all = signals.mass_g.clone().map(|mut mass| {
        if test.is_mass_tared {
            let minimum = mass.iter().copied().fold(f64::INFINITY, f64::min);
            let n_negative = mass.iter().filter(|m| **m < 0.0).count();
            if n_negative > 0 {
                notices.push(Notice::new(format!(
                    "{}: {n_negative} mass readings below zero (lowest {minimum:.3} g) clipped \
                     to 0 g",
                    test.source.display()
                )));
                for m in mass.iter_mut() {
                    *m = m.max(0.0);
                }
            }
        }
        mass
    });

    // Curves from exposure start.
    let start = time_all_s.partition_point(|t| *t < 0.0);
    if start > 0 {
        notices.push(Notice::new(format!(
            "{}: {start} rows before exposure start (t < 0) used for baselines only",
            test.source.display()
        )));
    }
    let mut end = time_all_s.len();
    // Delay shifting leaves the last samples without gas readings.
    if let Some(hrr) = &hrr_all {
        while end > start && !hrr[end - 1].is_finite() {
            end -= 1;
        }
        if end < time_all_s.len() {
            notices.push(Notice::new(format!(
                "{}: last {} rows dropped: the analyser delay (or hrr_delay_s) leaves them without HRR readings",
                test.source.display(),
                time_all_s.len() - end
            )));
        }
    }
    if end - start < 5 {
        return Err(DataError::Reduction {
            problem: format!(
                "{}: needs at least 5 rows after exposure start, found {}",
                test.source.display(),
                end - start
            ),
        });
    }
    let cut = |v: &Vec<f64>| v[start..end].to_vec();
    let time_s = time_all_s[start..end].to_vec();
    let hrr_kw_m2 = hrr_all.as_ref().map(cut);
    let mass_g = mass_all.as_ref().map(cut);
    let extinction_coefficient_1_m = extinction_all.as_ref().map(cut);
    let smoke_production_m2_s = smoke_all.as_ref().map(cut);
    let surface_temperature_k = signals.surface_temperature_k.as_ref().map(cut);
    let back_temperature_k = signals.back_temperature_k.as_ref().map(cut);
    let in_depth_temperature_k = test
        .columns
        .in_depth_temperature
        .iter()
        .zip(&signals.in_depth_temperature_k)
        .map(|(probe, values)| DepthCurve {
            depth_mm: probe.depth_mm,
            temperature_k: cut(values),
        })
        .collect();

    let mlr_g_m2s = match &mass_g {
        Some(mass) => {
            let for_derivative = match test.smoothing {
                Some(smoothing) => {
                    notices.push(Notice::new(format!(
                        "{}: mass smoothed (Savitzky–Golay, {} points, degree {}) before the \
                         derivative",
                        test.source.display(),
                        smoothing.window_points,
                        smoothing.degree
                    )));
                    savitzky_golay(&time_s, mass, smoothing)?
                }
                None => mass.clone(),
            };
            let derivative = five_point_derivative(&time_s, &for_derivative)?;
            Some(
                derivative
                    .iter()
                    .map(|d| -d / area_m2)
                    .collect::<Vec<f64>>(),
            )
        }
        None => None,
    };
    let hrr_from_mass_kw_m2 = match (&test.hrr_from_mass, &mlr_g_m2s) {
        // MJ/kg × g/(m²·s) = kJ/g × g/(m²·s) = kW/m².
        (Some(settings), Some(mlr)) => Some(
            mlr.iter()
                .map(|m| settings.combustion_efficiency * settings.heat_of_combustion_mj_kg * m)
                .collect::<Vec<f64>>(),
        ),
        (Some(_), None) => {
            return Err(DataError::Reduction {
                problem: format!(
                    "{}: [hrr_from_mass] needs a mass column",
                    test.source.display()
                ),
            })
        }
        _ => None,
    };
    if let (Some(hrr), Some(mlr)) = (&hrr_kw_m2, &mlr_g_m2s) {
        if let Some(lag) = lag::hrr_lag_behind_mass(&time_s, hrr, mlr) {
            if lag.seconds.abs() >= HRR_LAG_NOTICE_S {
                let advice = if test.gas.is_some() {
                    "check the analysers' delay times"
                } else {
                    "if the lab did not remove its gas-analysis delay, set `hrr_delay_s`"
                };
                notices.push(Notice::new(format!(
                    "{}: HRR runs {:.1} s {} the mass-loss rate (best match, correlation \
                     {:.3}); {advice}",
                    test.source.display(),
                    lag.seconds.abs(),
                    if lag.seconds > 0.0 {
                        "behind"
                    } else {
                        "ahead of"
                    },
                    lag.correlation
                )));
            }
        }
    }
    let hrr_for_report = hrr_kw_m2.as_ref().or(hrr_from_mass_kw_m2.as_ref());
    if hrr_kw_m2.is_none() && hrr_from_mass_kw_m2.is_some() {
        notices.push(Notice::new(format!(
            "{}: no measured HRR; report quantities use the mass-loss estimate of HRR",
            test.source.display()
        )));
    }
    let report = compute(&ReportInput {
        time_s: &time_s,
        hrr_kw_m2: hrr_for_report.map(Vec::as_slice),
        mass_g: mass_g.as_deref(),
        mlr_g_m2s: mlr_g_m2s.as_deref(),
        extinction_coefficient_1_m: extinction_coefficient_1_m.as_deref(),
        smoke_production_m2_s: smoke_production_m2_s.as_deref(),
        exposed_area_m2: area_m2,
        given_ignition_time_s: test.ignition_time_s,
        given_initial_mass_g: test.initial_mass_g,
        is_mass_tared: test.is_mass_tared,
        ignition_rule: test.ignition_rule,
    });
    Ok(Reduced {
        source: test.source.clone(),
        irradiance_kw_m2: test.irradiance_kw_m2,
        exposed_area_m2: area_m2,
        specimen_area_m2: test.specimen_area_m2.unwrap_or(area_m2),
        time_s,
        hrr_kw_m2,
        mass_g,
        mlr_g_m2s,
        hrr_from_mass_kw_m2,
        extinction_coefficient_1_m,
        smoke_production_m2_s,
        surface_temperature_k,
        back_temperature_k,
        in_depth_temperature_k,
        orifice_constant,
        report,
        notices,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn gaps_are_filled_on_the_line_between_neighbours() {
        let time_s = [0.0, 1.0, 2.0, 4.0, 5.0];
        let mut values = [1.0, f64::NAN, f64::NAN, 7.0, 9.0];
        assert_eq!(fill_gaps(&time_s, &mut values), 2);
        assert_eq!(values, [1.0, 2.5, 4.0, 7.0, 9.0]);
    }
}
