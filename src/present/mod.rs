//! Every table and JSON document the commands print, as pure functions from library results
//! to text (`String`) or `serde_json::Value`: one file per command family.
//!
//! **Invariant:** no I/O, no clock and no errors: a printer reads results already computed
//! and never calls the physics, the fit or a file reader (`use crate::` here names result
//! types, the shared number formats of `crate::headless`, the word wrap of `crate::tui::draw`
//! and `export::report::CAUTION`). Each printer has a unit test on a small hand-made result.

pub mod fit;
pub mod ignition;
pub mod milligram;
pub mod predict;
pub mod reduce;
pub mod simulate;

use crate::data::Notice;

/// One `note: …` (a repair) or `warning: …` (an implausible value) line per notice.
pub fn notice_lines(notices: &[Notice]) -> Vec<String> {
    notices
        .iter()
        .map(|notice| format!("{}: {notice}", notice.label()))
        .collect()
}

/// JSON has no NaN or infinity: such a value becomes `null`.
pub fn finite(value: f64) -> Option<f64> {
    value.is_finite().then_some(value)
}

#[cfg(test)]
pub(crate) mod fixtures {
    //! Small hand-made results whose printed form is worked out by hand in each test.

    use crate::physics::output::{EnergyBudget, MassBudget, Summary};

    /// A run that ignites at 12.34 s; every figure chosen so its rounding is easy to check.
    pub fn summary() -> Summary {
        Summary {
            ignition_time_s: Some(12.34),
            flameout_time_s: None,
            peak_hrr_w_m2: 456_789.0,
            time_of_peak_hrr_s: 100.04,
            peak_mlr_kg_m2_s: 0.012_346,
            time_of_peak_mlr_s: 99.0,
            total_heat_release_j_m2: 87_654_321.0,
            initial_mass_kg_m2: 7.2,
            mass_lost_kg_m2: 1.8,
            mean_gasification_temperature_k: None,
            energy: EnergyBudget {
                absorbed_j_m2: 1000.0,
                reradiated_j_m2: 400.0,
                convected_j_m2: 100.0,
                back_loss_j_m2: 0.0,
                reaction_heat_j_m2: 200.0,
                stored_j_m2: 299.0,
            },
            mass: MassBudget {
                initial_kg_m2: 8.0,
                remaining_kg_m2: 6.0,
                released_gas_kg_m2: 1.996,
            },
            n_steps: 321,
            n_rejected_steps: 4,
            n_iterations: 999,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_repair_is_a_note_and_an_implausible_value_a_warning() {
        let notices = [
            Notice::new("3 blank cells"),
            Notice::warning("mass above initial"),
        ];
        assert_eq!(
            notice_lines(&notices),
            ["note: 3 blank cells", "warning: mass above initial"]
        );
    }

    #[test]
    fn non_finite_numbers_become_null() {
        assert_eq!(finite(2.5), Some(2.5));
        assert_eq!(finite(f64::NAN), None);
        assert_eq!(finite(f64::INFINITY), None);
    }
}
