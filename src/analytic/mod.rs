//! analytic (being written).
