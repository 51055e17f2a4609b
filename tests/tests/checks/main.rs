//! Cross-checks of the engine against published sources, reference libraries and
//! brute-force oracles. One test executable; a module per subject, each check naming
//! its source.

mod fix_checks;
mod intermod_oracle;
mod large_inputs;
mod level_checks;
mod level_coverage;
mod plan_golomb;
mod published_checks;
mod recording_checks;
mod region_coverage;
mod slope_simulated;
mod sweep_checks;
mod top_k_checks;
