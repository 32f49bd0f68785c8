//! The short fuzz run (issue 15): a few thousand inputs per reader, every TOML format and both
//! CSV readers, 0 panics and 0 hangs. The long run (≥ 10⁵ inputs per reader) is
//! `cargo bench --bench fuzz`; its counts are in docs/input-limits.md.

#[path = "../fuzz/harness.rs"]
mod harness;

use std::time::Duration;

#[test]
fn the_readers_survive_a_short_fuzz_run() {
    let per_reader = std::env::var("EMBERFIT_FUZZ_INPUTS")
        .ok()
        .and_then(|n| n.parse().ok())
        .unwrap_or(1500);
    let results = harness::fuzz_all(per_reader, 15, Duration::from_secs(10));
    let mut problems = Vec::new();
    for (name, counts) in &results {
        println!(
            "{name}: {} inputs, {} accepted, {} refused, {} panics, {} hangs, slowest {:?}",
            counts.inputs,
            counts.accepted,
            counts.refused,
            counts.panics.len(),
            counts.hangs.len(),
            counts.slowest
        );
        assert!(
            counts.inputs >= per_reader * 9 / 10,
            "{name}: too few inputs ran"
        );
        assert!(
            counts.refused > 0,
            "{name}: no input was refused: the mutator does nothing"
        );
        problems.extend(counts.panics.iter().map(|p| format!("{name}: PANIC {p}")));
        problems.extend(counts.hangs.iter().map(|h| format!("{name}: HANG {h}")));
    }
    assert_eq!(results.len(), 7);
    assert!(problems.is_empty(), "{}", problems.join("\n---\n"));
}
