//! Benchmarks that measure the estimators against simulated truth (seeded, reproducible).

pub mod accuracy;
