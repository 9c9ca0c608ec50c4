//! The columns of the transient files: `profile.csv` (one row per station per slice),
//! `fronts.csv` (one row per probe) and `stations.csv` (one row per station). The
//! transient replay writes them in full; a live session writes their leading columns
//! followed by its run columns.

/// Columns of `profile.csv`: the contract of DESIGN.md §3, then extras.
pub const PROFILE_COLUMNS: &[&str] = &[
    "station",
    "slice_start_s",
    "slice_end_s",
    "since_front_s",
    "y90_mm",
    "depth_averaged_void_fraction",
    "equivalent_depth_mm",
    "profile_exponent",
    "fit_rmse",
    "probes_used",
    // extra columns, after the contract
    "slice",
    "partial",
    "power_law_void_fraction",
    "power_law_diffusivity",
    "exponential_diffusivity",
    "exponential_rmse",
    "exponential_void_fraction",
    "better_model",
    "flags",
    "probes_left_out",
    "decay_c0",
    "decay_cf",
    "decay_tau_s",
    "decay_tau_star",
    "decay_rmse",
    "decay_points",
    "decay_flags",
    // the estimate in the contract columns, its standard errors (delta method), the
    // model-free trapezoid and both joint fits
    "estimate",
    "y90_se_mm",
    "void_fraction_se",
    "exponent_se",
    "equivalent_depth_se_mm",
    "trapezoid_y90_mm",
    "trapezoid_void_fraction",
    "trapezoid_equivalent_depth_mm",
    "trapezoid_void_fraction_se",
    "power_law_y90_mm",
    "power_law_chi2",
    "exponential_y90_mm",
    "exponential_chi2",
    "exponential_diffusivity_se",
    "fit_dof",
];

/// Columns of `fronts.csv`: the contract, then extras.
pub const FRONT_COLUMNS: &[&str] = &[
    "probe",
    "station",
    "arrival_s",
    // extra columns
    "station_arrival_s",
    "after_station_s",
    "confirmed_s",
    "rule",
    "false_starts",
    "elevation_mm",
    "flags",
    "confirmed_arrival_s",
    "first_contact_s",
];

/// Columns of `stations.csv`.
pub const STATION_COLUMNS: &[&str] = &[
    "station",
    "x_mm",
    "arrival_s",
    "origin_s",
    "first_probe",
    "probes",
    "probes_arrived",
    "celerity_from_previous_m_s",
    "flags",
];
