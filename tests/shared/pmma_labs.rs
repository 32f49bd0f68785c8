//! The set-up of the fits on the open PMMA cone tests (MaCFP condensed-phase working group, MIT
//! licence; the folder named by `EMBERFIT_REFERENCE_DATA`), shared by
//! `tests/integration/pmma_fit.rs` and `benches/leave_one_out.rs` through `#[path]`:
//! the two labs that ran 25 and 65 kW/m², the files a fit job needs (test descriptions, the
//! wool backing, the scenario) and the job's parameters. docs/calibration-pmma.md explains
//! every choice.

use std::path::{Path, PathBuf};

/// One cone test: file in the set, irradiance kW/m², initial mass g (the set's tests.toml).
pub type Entry = (&'static str, f64, f64);

/// A lab that ran both irradiances.
pub struct Lab {
    pub name: &'static str,
    pub entries: &'static [Entry],
    /// The area the lab divided by (the frame opening), m²; the whole 0.01 m² slab burns.
    pub exposed_area_m2: f64,
    /// The backing wool's conductivity in tests.toml, W/(m·K).
    pub backing_conductivity_w_m_k: f64,
    pub mass_column: &'static str,
    /// How late the lab's HRR runs against its mass, s (`hrr_delay_s`): the shift that lines
    /// HRR up with the mass-loss rate, which `emberfit reduce` reports (8.8–10.9 s for each of
    /// lab c's seven files, −1.6 to −0.5 s for lab d's; docs/calibration-pmma.md §1).
    pub hrr_delay_s: f64,
}

/// Lab c: ceramic-fibre wool backing, 0.04 W/(m·K) at 303 K, divided by 0.00884 m².
const LAB_C: [Entry; 7] = [
    ("cone/cone_25kw_lab-c_1.csv", 25.0, 71.62),
    ("cone/cone_25kw_lab-c_2.csv", 25.0, 74.09),
    ("cone/cone_25kw_lab-c_3.csv", 25.0, 70.85),
    ("cone/cone_65kw_lab-c_1.csv", 65.0, 72.47),
    ("cone/cone_65kw_lab-c_2.csv", 65.0, 69.91),
    ("cone/cone_65kw_lab-c_3.csv", 65.0, 73.45),
    ("cone/cone_65kw_lab-c_4.csv", 65.0, 74.67),
];

/// Lab d: alkaline-earth silicate wool backing, 0.16 W/(m·K) at 600 K, divided by 0.0084 m².
const LAB_D: [Entry; 6] = [
    ("cone/cone_25kw_lab-d_1.csv", 25.0, 71.44),
    ("cone/cone_25kw_lab-d_2.csv", 25.0, 71.72),
    ("cone/cone_25kw_lab-d_3.csv", 25.0, 69.88),
    ("cone/cone_65kw_lab-d_1.csv", 65.0, 69.9),
    ("cone/cone_65kw_lab-d_2.csv", 65.0, 73.72),
    ("cone/cone_65kw_lab-d_3.csv", 65.0, 69.86),
];

pub const LABS: [Lab; 2] = [
    Lab {
        name: "lab-c",
        entries: &LAB_C,
        exposed_area_m2: 0.00884,
        backing_conductivity_w_m_k: 0.04,
        mass_column: "Mass",
        hrr_delay_s: 9.0,
    },
    Lab {
        name: "lab-d",
        entries: &LAB_D,
        exposed_area_m2: 0.0084,
        backing_conductivity_w_m_k: 0.16,
        mass_column: "mass",
        hrr_delay_s: 0.0,
    },
];

/// The signals of every case: the curves at weight 0.01 beside the report quantities, the
/// peak HRR at weight 4 (the one-step model cannot meet lab d's 25 kW/m² time to peak and
/// 65 kW/m² peak at once; the weight says which matters more; docs/calibration-pmma.md §2).
pub const SIGNALS: &str =
    "[{ signal = \"mlr\", weight = 0.01 }, { signal = \"hrr\", weight = 0.01 }, \
                           { signal = \"ignition_time\" }, { signal = \"peak_hrr\", weight = 4 }, \
                           { signal = \"time_to_peak_hrr\" }, { signal = \"total_heat_release\" }]";

/// The eight fitted parameters and their bounds.
pub const PARAMETERS: &str = "[[parameter]]\npath = \"component.virgin.conductivity_w_m_k\"\nmin = 0.08\nmax = 0.6\n\n\
     [[parameter]]\npath = \"component.virgin.specific_heat_j_kg_k\"\nmin = 800.0\nmax = 3000.0\n\n\
     [[parameter]]\npath = \"reaction.0.peak_temperature_k\"\nmin = 600.0\nmax = 700.0\n\n\
     [[parameter]]\npath = \"reaction.0.heat_of_reaction_kj_kg\"\nmin = 200.0\nmax = 3000.0\n\n\
     [[parameter]]\npath = \"component.virgin.absorption_per_m\"\nmin = 300.0\nmax = 100000.0\nscale = \"log\"\n\n\
     [[parameter]]\npath = \"heat_of_combustion_mj_kg\"\nmin = 15.0\nmax = 32.0\n\n\
     [[parameter]]\npath = \"exposure.flame_heat_flux_kw_m2\"\nmin = 0.0\nmax = 40.0\n\n\
     [[parameter]]\npath = \"exposure.flame_blockage\"\nmin = 0.0\nmax = 0.6\n\n";

/// Writes one test's description into `dir`; returns its path.
pub fn write_description(dir: &Path, folder: &Path, lab: &Lab, entry: &Entry) -> PathBuf {
    let data = folder.join(entry.0);
    let name = data
        .file_stem()
        .map(|s| s.to_string_lossy().to_string())
        .unwrap_or_default();
    let path = dir.join(format!("{name}.toml"));
    std::fs::write(
        &path,
        format!(
            "data_file = \"{}\"\nirradiance_kw_m2 = {}\nexposed_area_m2 = {}\nspecimen_area_m2 = 0.01\n\
             initial_mass_g = {}\nthickness_mm = 6.0\nhrr_delay_s = {}\n\n[columns]\ntime = \"Time\"\nmass = \"{}\"\nhrr = \"HRR\"\n",
            data.display(),
            entry.1,
            lab.exposed_area_m2,
            entry.2,
            lab.hrr_delay_s,
            lab.mass_column
        ),
    )
    .expect("test description");
    path
}

/// Writes every test description of the lab; returns (irradiance, path) pairs.
pub fn write_descriptions(dir: &Path, folder: &Path, lab: &Lab) -> Vec<(f64, PathBuf)> {
    lab.entries
        .iter()
        .map(|entry| (entry.1, write_description(dir, folder, lab, entry)))
        .collect()
}

/// The start of the fitted flame values: the template's (models/pmma-on-blanket.toml says them
/// in its comments; a material file has no exposure).
pub const FLAME_HEAT_FLUX_START_KW_M2: f64 = 17.3;
pub const FLAME_BLOCKAGE_START: f64 = 0.0;

/// Writes `wool.toml` and `scenario.toml` (6 mm of the template on 19 mm of the lab's wool,
/// ambient back face, tightened numerics) into `dir`. The wool's density and heat capacity and
/// the 19 mm (a 25 mm holder less the slab) are assumptions, typical values quoted from memory.
pub fn write_scenario(dir: &Path, template: &Path, lab: &Lab, duration_s: f64) {
    std::fs::write(
        dir.join("wool.toml"),
        format!(
            "title = \"wool backing (assumed density and heat capacity)\"\n\n[[component]]\nname = \"wool\"\n\
             density_kg_m3 = 128.0\nconductivity_w_m_k = {}\nspecific_heat_j_kg_k = 1000.0\nemissivity = 0.9\n",
            lab.backing_conductivity_w_m_k
        ),
    )
    .expect("wool");
    std::fs::write(
        dir.join("scenario.toml"),
        format!(
            "title = \"black PMMA 6 mm on wool, cone\"\nduration_s = {duration_s}\n\n[[layer]]\nmaterial = \"{}\"\nthickness_mm = 6.0\n\n\
             [[layer]]\nmaterial = \"wool.toml\"\nthickness_mm = 19.0\n\n[exposure]\nirradiance_kw_m2 = 25.0\nflame_heat_flux_kw_m2 = {FLAME_HEAT_FLUX_START_KW_M2}\nflame_blockage = {FLAME_BLOCKAGE_START}\n\n\
             [back]\nboundary = \"ambient\"\n\n[numerics]\nmax_temperature_change_k = 2.0\nmax_conversion_per_step = 0.02\nmax_step_s = 1.0\n",
            template.display()
        ),
    )
    .expect("scenario");
}

/// One `[[case]]` of the job: the lab's tests at `flux`.
pub fn case(lab: &Lab, descriptions: &[(f64, PathBuf)], flux: f64) -> String {
    let tests: Vec<String> = descriptions
        .iter()
        .filter(|(q, _)| *q == flux)
        .map(|(_, p)| format!("\"{}\"", p.display()))
        .collect();
    format!(
        "[[case]]\nname = \"{flux} kW/m² {}\"\ntests = [{}]\nsignals = {SIGNALS}\n\n",
        lab.name,
        tests.join(", ")
    )
}
