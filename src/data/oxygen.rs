//! Heat release rate by oxygen consumption (docs/physics.md §4): the O₂-only equation of ISO 5660-1,
//! the general form with CO₂ and CO of Janssens (1991), the exhaust mass flow from the orifice
//! plate, the orifice constant from a methane calibration run, and the signal handling they
//! need (analyser delay-time shift, pre-exposure baselines).
//!
//! Pure functions of numbers: heat release rates in kW, mass flows in kg/s, mole fractions in
//! mol/mol (dry, as the analysers read them), pressures in Pa, temperatures in K.

/// Heat released per mass of O₂ consumed, kJ/kg: 13.1 MJ/kg, within about 5 % for most organic
/// fuels (Huggett, C., Fire and Materials 4 (1980) 61–65).
pub const HEAT_PER_OXYGEN_KJ_KG: f64 = 13.1e3;

/// Heat released per mass of O₂ consumed when CO burns to CO₂, kJ/kg (Janssens, M., Fire
/// Technology 27 (1991) 234–249).
pub const HEAT_PER_OXYGEN_CO_KJ_KG: f64 = 17.6e3;

/// Ratio of the molar masses of O₂ and air, 1.10 (ISO 5660-1).
pub const OXYGEN_AIR_MOLAR_MASS_RATIO: f64 = 1.10;

/// Expansion factor α of the combustion gases, 1.105 (ISO 5660-1; Janssens 1991).
pub const EXPANSION_FACTOR: f64 = 1.105;

/// O₂ mole fraction of ambient dry air, 0.2095 (common practice).
pub const AMBIENT_DRY_OXYGEN: f64 = 0.2095;

/// Heat released per mass of O₂ consumed by methane, Δh_c/r₀ = 12.54×10³ kJ/kg, used to
/// calibrate the orifice constant (ISO 5660-1; quoted from memory).
pub const METHANE_HEAT_PER_OXYGEN_KJ_KG: f64 = 12.54e3;

/// Exhaust mass flow through the orifice plate, ṁ_e = C·√(Δp/T_e), kg/s.
///
/// `orifice_constant` C in m^½·kg^½·K^½ (ISO 5660-1).
pub fn exhaust_mass_flow_kg_s(
    orifice_constant: f64,
    pressure_drop_pa: f64,
    exhaust_temperature_k: f64,
) -> f64 {
    orifice_constant * (pressure_drop_pa.max(0.0) / exhaust_temperature_k).sqrt()
}

/// Heat release rate from O₂ alone (ISO 5660-1), kW:
/// q̇ = (Δh_c/r₀)·1.10·ṁ_e·(X⁰_O2 − X_O2)/(1.105 − 1.5·X_O2).
pub fn hrr_oxygen_only_kw(exhaust_mass_flow_kg_s: f64, ambient_oxygen: f64, oxygen: f64) -> f64 {
    HEAT_PER_OXYGEN_KJ_KG
        * OXYGEN_AIR_MOLAR_MASS_RATIO
        * exhaust_mass_flow_kg_s
        * (ambient_oxygen - oxygen)
        / (EXPANSION_FACTOR - 1.5 * oxygen)
}

/// The O₂ reading that a heat release rate produces, the inverse of [`hrr_oxygen_only_kw`]:
/// X_O2 = (K·X⁰ − 1.105·q̇)/(K − 1.5·q̇) with K = (Δh_c/r₀)·1.10·ṁ_e. Used to build synthetic
/// tests from a known HRR curve.
pub fn oxygen_for_hrr(exhaust_mass_flow_kg_s: f64, ambient_oxygen: f64, hrr_kw: f64) -> f64 {
    let k = HEAT_PER_OXYGEN_KJ_KG * OXYGEN_AIR_MOLAR_MASS_RATIO * exhaust_mass_flow_kg_s;
    (k * ambient_oxygen - EXPANSION_FACTOR * hrr_kw) / (k - 1.5 * hrr_kw)
}

/// Ambient (baseline) analyser readings, mol/mol, and the ambient water vapour, mol/mol.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct AmbientGas {
    /// X⁰_O2, dry.
    pub oxygen: f64,
    /// X⁰_CO2, dry.
    pub carbon_dioxide: f64,
    /// X⁰_H2O of the incoming air.
    pub water: f64,
}

/// Analyser readings during the test, mol/mol, dry, already shifted by their delay times.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct GasReading {
    /// X_O2.
    pub oxygen: f64,
    /// X_CO2.
    pub carbon_dioxide: f64,
    /// X_CO.
    pub carbon_monoxide: f64,
}

/// Oxygen depletion factor φ (Janssens 1991):
/// φ = [X⁰_O2(1 − X_CO2 − X_CO) − X_O2(1 − X⁰_CO2)] / [X⁰_O2(1 − X_CO2 − X_CO − X_O2)].
pub fn depletion_factor(ambient: &AmbientGas, reading: &GasReading) -> f64 {
    let numerator = ambient.oxygen * (1.0 - reading.carbon_dioxide - reading.carbon_monoxide)
        - reading.oxygen * (1.0 - ambient.carbon_dioxide);
    let denominator =
        ambient.oxygen * (1.0 - reading.carbon_dioxide - reading.carbon_monoxide - reading.oxygen);
    numerator / denominator
}

/// Heat release rate with O₂, CO₂ and CO measured (Janssens 1991), kW:
/// q̇ = [E·φ − (E_CO − E)·((1 − φ)/2)·X_CO/X_O2] · ṁ_e/(1 + φ(α − 1)) · (M_O2/M_a) ·
/// (1 − X⁰_H2O) · X⁰_O2.
///
/// M_O2/M_a is taken as ISO 5660-1's 1.10, so that with X_CO2 = X_CO = X⁰_CO2 = X⁰_H2O = 0
/// this equals [`hrr_oxygen_only_kw`] up to ISO's rounding of (X⁰_O2 + α − 1)/X⁰_O2 = 1.5012
/// to 1.5 (a 0.03 % difference at typical readings).
pub fn hrr_general_kw(
    exhaust_mass_flow_kg_s: f64,
    ambient: &AmbientGas,
    reading: &GasReading,
) -> f64 {
    let phi = depletion_factor(ambient, reading);
    let co_term = if reading.oxygen > 0.0 {
        (HEAT_PER_OXYGEN_CO_KJ_KG - HEAT_PER_OXYGEN_KJ_KG)
            * ((1.0 - phi) / 2.0)
            * reading.carbon_monoxide
            / reading.oxygen
    } else {
        0.0
    };
    (HEAT_PER_OXYGEN_KJ_KG * phi - co_term) * exhaust_mass_flow_kg_s
        / (1.0 + phi * (EXPANSION_FACTOR - 1.0))
        * OXYGEN_AIR_MOLAR_MASS_RATIO
        * (1.0 - ambient.water)
        * ambient.oxygen
}

/// Orifice constant C (m^½·kg^½·K^½) from a methane burner run of known heat release rate
/// (ISO 5660-1 calibration): C = q̇_b / [12.54×10³ · 1.10 · √(Δp/T_e) · (X⁰ − X)/(1.105 − 1.5X)],
/// averaged over the samples given (the steady part of the run). Returns `None` when no sample
/// shows an O₂ depletion.
pub fn orifice_constant_from_methane(
    burner_hrr_kw: f64,
    ambient_oxygen: f64,
    pressure_drop_pa: &[f64],
    exhaust_temperature_k: &[f64],
    oxygen: &[f64],
) -> Option<f64> {
    let constants: Vec<f64> = pressure_drop_pa
        .iter()
        .zip(exhaust_temperature_k)
        .zip(oxygen)
        .filter_map(|((dp, te), x)| {
            let per_unit_constant = METHANE_HEAT_PER_OXYGEN_KJ_KG
                * OXYGEN_AIR_MOLAR_MASS_RATIO
                * (dp.max(0.0) / te).sqrt()
                * (ambient_oxygen - x)
                / (EXPANSION_FACTOR - 1.5 * x);
            (per_unit_constant > 0.0 && per_unit_constant.is_finite())
                .then(|| burner_hrr_kw / per_unit_constant)
        })
        .collect();
    if constants.is_empty() {
        None
    } else {
        Some(constants.iter().sum::<f64>() / constants.len() as f64)
    }
}

/// Shifts an analyser signal by its delay time: the value at time t is the reading taken at
/// t + `delay_s`, linearly interpolated; NaN where t + delay lies past the last sample.
pub fn shift_by_delay(time_s: &[f64], values: &[f64], delay_s: f64) -> Vec<f64> {
    time_s
        .iter()
        .map(|t| interpolate(time_s, values, t + delay_s))
        .collect()
}

/// Linear interpolation of (time_s, values) at `at_s`; NaN outside the samples. Times must be
/// increasing.
pub fn interpolate(time_s: &[f64], values: &[f64], at_s: f64) -> f64 {
    let n = time_s.len();
    if n == 0 || at_s < time_s[0] || at_s > time_s[n - 1] {
        return f64::NAN;
    }
    let upper = time_s.partition_point(|&t| t < at_s);
    if upper == 0 {
        return values[0];
    }
    let lower = upper - 1;
    let span_s = time_s[upper] - time_s[lower];
    if span_s <= 0.0 {
        return values[upper];
    }
    let weight = (at_s - time_s[lower]) / span_s;
    values[lower] + weight * (values[upper] - values[lower])
}

/// Mean of the finite values sampled before `before_s` (the pre-exposure baseline), or `None`
/// when there are none.
pub fn baseline(time_s: &[f64], values: &[f64], before_s: f64) -> Option<f64> {
    let selected: Vec<f64> = time_s
        .iter()
        .zip(values)
        .filter(|(t, v)| **t < before_s && v.is_finite())
        .map(|(_, v)| *v)
        .collect();
    if selected.is_empty() {
        None
    } else {
        Some(selected.iter().sum::<f64>() / selected.len() as f64)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn forward_and_inverse_oxygen_relations_agree() {
        let flow = 0.024;
        for hrr_kw in [0.0, 1.0, 7.5, 15.0] {
            let x = oxygen_for_hrr(flow, AMBIENT_DRY_OXYGEN, hrr_kw);
            assert!((hrr_oxygen_only_kw(flow, AMBIENT_DRY_OXYGEN, x) - hrr_kw).abs() < 1e-9);
        }
    }

    #[test]
    fn the_methane_calibration_inverts_the_oxygen_equation() {
        // A 5 kW burner (ISO 5660-1 calibration flow) read through a known constant must give
        // that constant back, with methane's own Δh_c/r₀ in place of 13.1 MJ/kg.
        let c = 0.042;
        let (dp, te) = (95.0, 420.0);
        let flow = exhaust_mass_flow_kg_s(c, dp, te);
        let k = METHANE_HEAT_PER_OXYGEN_KJ_KG * OXYGEN_AIR_MOLAR_MASS_RATIO * flow;
        let x = (k * AMBIENT_DRY_OXYGEN - EXPANSION_FACTOR * 5.0) / (k - 1.5 * 5.0);
        let got =
            orifice_constant_from_methane(5.0, AMBIENT_DRY_OXYGEN, &[dp], &[te], &[x]).unwrap();
        assert!((got - c).abs() < 1e-12);
    }

    #[test]
    fn delay_shift_moves_a_step_earlier() {
        let t: Vec<f64> = (0..10).map(|i| i as f64).collect();
        let y: Vec<f64> = t
            .iter()
            .map(|&ti| if ti >= 5.0 { 1.0 } else { 0.0 })
            .collect();
        let shifted = shift_by_delay(&t, &y, 2.0);
        assert_eq!(shifted[3], 1.0);
        assert_eq!(shifted[2], 0.0);
        assert!(shifted[8].is_nan());
    }
}
