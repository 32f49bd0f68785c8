//! Short names for free parameters that can be told apart on a narrow screen
//! (`k(300 K) virgin`), and a sentence saying what the number is (for a law: at what
//! temperature). The job's path stays the full name; these are for screens and tables.

use crate::physics::material::{Material, PropertyLaw};

use super::targets::{PropertyPart, Target};
use crate::fit::parameters::FreeParameter;

/// A parameter's short label and what its value means.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct ParameterLabel {
    /// At most about 20 characters, unique within a job (see [`labels`]).
    pub short: String,
    /// One sentence: the quantity, of what, at what temperature or heating rate.
    pub meaning: String,
}

fn trimmed(value: f64) -> String {
    let text = format!("{value:.1}");
    text.strip_suffix(".0").unwrap_or(&text).to_string()
}

fn property(
    symbol: &str,
    what: &str,
    law: Option<&PropertyLaw>,
    part: PropertyPart,
    component: &str,
) -> ParameterLabel {
    match (part, law) {
        (
            PropertyPart::Value,
            Some(PropertyLaw::PowerLaw {
                reference_temperature_k,
                exponent,
                ..
            }),
        ) => {
            let t = trimmed(*reference_temperature_k);
            let law = if *exponent == 0.0 {
                "constant in temperature".to_string()
            } else {
                format!("power law in T with exponent {exponent}")
            };
            ParameterLabel {
                short: format!("{symbol}({t} K) {component}"),
                meaning: format!("{what} of {component} at {t} K ({law})"),
            }
        }
        (PropertyPart::Value, _) => ParameterLabel {
            short: format!("{symbol} {component}"),
            meaning: format!("{what} of {component}"),
        },
        (PropertyPart::Exponent, _) => ParameterLabel {
            short: format!("{symbol} exp. {component}"),
            meaning: format!("exponent of the power law in T of the {what} of {component}"),
        },
        (PropertyPart::Factor, _) => ParameterLabel {
            short: format!("{symbol} factor {component}"),
            meaning: format!(
                "factor on every value of the {what} of {component} (1 = as in the template)"
            ),
        },
    }
}

/// The label of one parameter, from its first target (`targets`: its path, then its tied
/// paths) and the job's material.
pub fn describe(
    parameter: &FreeParameter,
    targets: &[Target],
    material: &Material,
) -> ParameterLabel {
    let component = |c: usize| {
        material
            .components
            .get(c)
            .map_or_else(|| format!("component {c}"), |c| c.name.clone())
    };
    let reaction = |r: usize| {
        let Some(reaction) = material.reactions.get(r) else {
            return format!("reaction {r}");
        };
        let product = reaction
            .product
            .map_or_else(|| "gas".to_string(), &component);
        format!(
            "reaction {r} ({} → {product})",
            component(reaction.reactant)
        )
    };
    let simple = |short: String, meaning: String| ParameterLabel { short, meaning };
    let Some(target) = targets.first() else {
        return simple(parameter.name.clone(), parameter.name.clone());
    };
    let tied = targets.len() - 1;
    let mut label = match target {
        Target::Density { component: c } => simple(
            format!("ρ {}", component(*c)),
            format!("density of {}", component(*c)),
        ),
        Target::Conductivity { component: c, part } => property(
            "k",
            "thermal conductivity",
            material.components.get(*c).map(|x| &x.conductivity_w_m_k),
            *part,
            &component(*c),
        ),
        Target::SpecificHeat { component: c, part } => property(
            "c",
            "specific heat",
            material.components.get(*c).map(|x| &x.specific_heat_j_kg_k),
            *part,
            &component(*c),
        ),
        Target::Emissivity { component: c } => simple(
            format!("ε {}", component(*c)),
            format!("emissivity of {}", component(*c)),
        ),
        Target::Absorption { component: c } => simple(
            format!("κ {}", component(*c)),
            format!("in-depth absorption coefficient of {}", component(*c)),
        ),
        Target::PreExponential { reaction: r } => simple(
            format!("A r{r}"),
            format!("pre-exponential factor of {}", reaction(*r)),
        ),
        Target::ActivationEnergy { reaction: r } => simple(
            format!("E r{r}"),
            format!("activation energy of {}", reaction(*r)),
        ),
        Target::Order { reaction: r } => simple(
            format!("n r{r}"),
            format!("reaction order of {}", reaction(*r)),
        ),
        Target::HeatOfReaction { reaction: r } => simple(
            format!("ΔH r{r}"),
            format!(
                "heat of reaction of {}, per kg of reactant, endothermic positive",
                reaction(*r)
            ),
        ),
        Target::Yield { reaction: r } => simple(
            format!("yield r{r}"),
            format!("condensed yield of {}", reaction(*r)),
        ),
        Target::FuelFraction { reaction: r } => simple(
            format!("fuel frac. r{r}"),
            format!("fraction of the gas of {} that burns", reaction(*r)),
        ),
        Target::HeatOfCombustion { reactions } => match reactions.as_slice() {
            [r] if parameter.name.starts_with("reaction.") => simple(
                format!("ΔHc r{r}"),
                format!("heat of combustion of the fuel of {}", reaction(*r)),
            ),
            _ => simple(
                "ΔHc".into(),
                "heat of combustion of the fuel gases (every reaction without its own)".into(),
            ),
        },
        Target::PeakTemperature {
            reaction: r,
            heating_rate_k_s,
        } => {
            let rate = trimmed(heating_rate_k_s * 60.0);
            simple(
                format!("T peak r{r}"),
                format!(
                    "temperature of the peak rate of {} at {rate} K/min (sets A from E)",
                    reaction(*r)
                ),
            )
        }
        Target::Log10RateAt {
            reaction: r,
            temperature_k,
        } => {
            let t = trimmed(*temperature_k);
            simple(
                format!("log k({t} K) r{r}"),
                format!(
                    "log10 of the rate constant of {} at {t} K (sets A from E)",
                    reaction(*r)
                ),
            )
        }
        Target::FlameHeatFlux => simple(
            "q flame".into(),
            "flame heat flux to the exposed face once the specimen burns".into(),
        ),
        Target::FlameBlockage => simple(
            "flame block".into(),
            "fraction of the irradiance the flame absorbs before it reaches the face".into(),
        ),
        Target::ConvectiveCoefficient => simple(
            "h conv.".into(),
            "convective heat transfer coefficient of the exposed face".into(),
        ),
        Target::CriticalFuelMassFlux => simple(
            "ign. mass flux".into(),
            "critical fuel mass flux for ignition".into(),
        ),
    };
    if tied > 0 {
        label.meaning.push_str(&format!(
            "; also sets {tied} tied path{}",
            if tied == 1 { "" } else { "s" }
        ));
    }
    label
}

/// Labels of all of a job's parameters; a short label that two parameters would share gets
/// its position appended (`#2`), so every one can be told apart.
pub fn labels(
    parameters: &[FreeParameter],
    targets: &[Vec<Target>],
    material: &Material,
) -> Vec<ParameterLabel> {
    let first_targets = |idx: usize| targets.get(idx).map_or(&[][..], |t| t.as_slice());
    let mut out: Vec<ParameterLabel> = parameters
        .iter()
        .enumerate()
        .map(|(idx, p)| describe(p, first_targets(idx), material))
        .collect();
    // A law whose exponent is fitted too: the template's exponent is not the one that holds.
    let exponent_of = |target: &Target| match target {
        Target::Conductivity {
            component,
            part: PropertyPart::Exponent,
        } => Some(("k", *component)),
        Target::SpecificHeat {
            component,
            part: PropertyPart::Exponent,
        } => Some(("c", *component)),
        _ => None,
    };
    let fitted_exponents: Vec<(&str, usize)> = (0..parameters.len())
        .filter_map(|idx| first_targets(idx).first().and_then(exponent_of))
        .collect();
    for (idx, label) in out.iter_mut().enumerate() {
        let value_of = match first_targets(idx).first() {
            Some(Target::Conductivity {
                component,
                part: PropertyPart::Value,
            }) => Some(("k", *component)),
            Some(Target::SpecificHeat {
                component,
                part: PropertyPart::Value,
            }) => Some(("c", *component)),
            _ => None,
        };
        if value_of.is_some_and(|v| fitted_exponents.contains(&v)) {
            if let Some(start) = label.meaning.find(" (power law in T with exponent") {
                label.meaning.truncate(start);
                label
                    .meaning
                    .push_str(" (power law in T; its exponent is fitted too)");
            }
        }
    }
    let shorts: Vec<String> = out.iter().map(|l| l.short.clone()).collect();
    for (i, label) in out.iter_mut().enumerate() {
        if shorts.iter().filter(|s| **s == shorts[i]).count() > 1 {
            label.short = format!("{} #{}", label.short, i + 1);
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::case::job::load_job;

    #[test]
    fn the_demo_jobs_labels_say_what_and_at_what_temperature() {
        let root = std::path::Path::new(env!("CARGO_MANIFEST_DIR"));
        let job = load_job(&root.join("demo-cases/ridgeline-panel/fit.toml")).unwrap();
        let labels = labels(&job.parameters, &job.targets, &job.material.material);
        let shorts: Vec<&str> = labels.iter().map(|l| l.short.as_str()).collect();
        assert_eq!(
            shorts,
            [
                "k(300 K) virgin",
                "c(300 K) virgin",
                "T peak r0",
                "ΔH r0",
                "κ virgin",
                "ΔHc",
                "q flame"
            ]
        );
        assert_eq!(
            labels[0].meaning,
            "thermal conductivity of virgin at 300 K (power law in T with exponent -0.25)"
        );
        assert_eq!(
            labels[2].meaning,
            "temperature of the peak rate of reaction 0 (virgin → gas) at 10 K/min (sets A from E)"
        );
        for label in &labels {
            assert!(label.short.chars().count() <= 20, "{label:?}");
        }
    }

    #[test]
    fn a_law_whose_exponent_is_fitted_does_not_quote_the_templates_exponent() {
        let root = std::path::Path::new(env!("CARGO_MANIFEST_DIR"));
        let job = load_job(&root.join("tests/cases/viewer-fit.toml")).unwrap();
        let labels = labels(&job.parameters, &job.targets, &job.material.material);
        assert_eq!(labels[0].short, "k(300 K) virgin");
        assert_eq!(
            labels[0].meaning,
            "thermal conductivity of virgin at 300 K (power law in T; its exponent is fitted too)"
        );
        assert_eq!(labels[1].short, "k exp. virgin");
        // The specific heat's exponent is not fitted: the template's is quoted.
        assert!(labels[2]
            .meaning
            .ends_with("(power law in T with exponent 0.9)"));
        let shorts: std::collections::BTreeSet<&str> =
            labels.iter().map(|l| l.short.as_str()).collect();
        assert_eq!(shorts.len(), labels.len(), "labels can be told apart");
    }
}
