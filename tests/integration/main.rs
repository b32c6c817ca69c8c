//! The integration tests, compiled as one binary: one link of the library and its
//! dependencies instead of one per file, which is most of a fresh `cargo test`. Each module
//! is one group of checks (DEVELOPERS.md lists what each checks against); run one group with
//! `cargo test --test integration GROUP::` (e.g. `cargo test --test integration
//! calibration:: -- --nocapture` to see its printed figures).

mod bench_readings;
mod bounds_checks;
mod bounds_reference;
mod calibration;
mod cli_bounds;
mod cli_check;
mod cli_convective;
mod cli_estimate;
mod cli_invalid_input;
mod cli_simulate;
mod degenerate_inputs;
mod design_checks;
mod design_cli;
mod design_search;
mod dialects;
mod estimate_pipeline;
mod finite_answers;
mod first_hour;
mod forward_closed_forms;
mod forward_convective;
mod forward_fem_polar;
mod forward_fem_reference;
mod forward_polar;
mod forward_properties;
mod h_calibration;
mod hard_inputs;
mod its90_reference;
mod report_outputs;
mod round_parts;
mod snapshots_of_outputs;
mod support;
mod tikhonov_reference;
mod track_alarms;
mod track_cli;
mod track_equality;
mod track_parquet;
mod track_per_row_speed;
