//! One TGA simulation at 10 K/min from 300 to 900 K (issue 7: under 1 ms), with each
//! integrator. Before timing, prints each setting's error against Kissinger's exact first-order
//! peak condition (Kissinger 1957), the accuracy side of the comparison in
//! docs/milligram-scale.md. Run with `cargo bench --bench tga`.

use criterion::{black_box, criterion_group, Criterion};

use emberfit::microscale::fit::single_step_material;
use emberfit::physics::kinetics::GAS_CONSTANT_J_MOL_K;
use emberfit::physics::material::Material;
use emberfit::physics::zero_d::{simulate_zero_d, Integrator, TemperatureProgramme, ZeroDSettings};

const PRE_EXPONENTIAL_PER_S: f64 = 1.0e13;
const ACTIVATION_ENERGY_J_MOL: f64 = 2.0e5;
const HEATING_RATE_K_S: f64 = 10.0 / 60.0;

fn settings() -> Vec<(&'static str, ZeroDSettings)> {
    let base = ZeroDSettings::default();
    let with = |integrator, relative_tolerance: f64| ZeroDSettings {
        integrator,
        relative_tolerance,
        absolute_tolerance: relative_tolerance * 1e-2,
        ..base
    };
    vec![
        ("auto (default settings)", base),
        (
            "auto, 10 s output",
            ZeroDSettings {
                output_interval_s: 10.0,
                ..base
            },
        ),
        (
            "dormand-prince rtol 1e-8",
            with(Integrator::DormandPrince, 1e-8),
        ),
        (
            "dormand-prince rtol 1e-6",
            with(Integrator::DormandPrince, 1e-6),
        ),
        ("implicit rtol 1e-6", with(Integrator::Implicit, 1e-6)),
        ("implicit rtol 1e-4", with(Integrator::Implicit, 1e-4)),
        ("implicit rtol 1e-3", with(Integrator::Implicit, 1e-3)),
    ]
}

fn material() -> Material {
    single_step_material(PRE_EXPONENTIAL_PER_S, ACTIVATION_ENERGY_J_MOL, 1.0)
        .expect("valid bench material")
}

fn programme() -> TemperatureProgramme {
    TemperatureProgramme::ramp(300.0, HEATING_RATE_K_S, 900.0).expect("valid bench programme")
}

/// Kissinger's condition E·β/(R·T²) = A·exp(−E/(R·T)) solved by bisection.
fn kissinger_peak_k() -> f64 {
    let (a, e, r) = (
        PRE_EXPONENTIAL_PER_S,
        ACTIVATION_ENERGY_J_MOL,
        GAS_CONSTANT_J_MOL_K,
    );
    let (mut low, mut high) = (300.0, 1500.0);
    for _ in 0..200 {
        let mid = 0.5 * (low + high);
        if e * HEATING_RATE_K_S / (r * mid * mid) > a * (-e / (r * mid)).exp() {
            low = mid;
        } else {
            high = mid;
        }
    }
    low
}

fn print_accuracy() {
    let (material, programme) = (material(), programme());
    let exact_k = kissinger_peak_k();
    for (name, settings) in settings() {
        let history = simulate_zero_d(&material, &[1.0], &programme, &settings)
            .expect("bench simulation runs");
        let (_, peak_k, _) = history.mass_loss_rate_peak().expect("a peak");
        let final_mass = history.mass_fraction.last().copied().unwrap_or(f64::NAN);
        println!(
            "{name}: peak error {:+.4} K vs kissinger, {} steps, final mass {final_mass:.2e}",
            peak_k - exact_k,
            history.n_steps
        );
    }
}

fn tga_10k(c: &mut Criterion) {
    let (material, programme) = (material(), programme());
    for (name, settings) in settings() {
        c.bench_function(&format!("tga 10 K/min 300-900 K, {name}"), |b| {
            b.iter(|| {
                simulate_zero_d(
                    black_box(&material),
                    &[1.0],
                    black_box(&programme),
                    &settings,
                )
                .expect("bench simulation runs")
            })
        });
    }
}

criterion_group!(benches, tga_10k);

fn main() {
    print_accuracy();
    benches();
    Criterion::default().configure_from_args().final_summary();
}
