//! physics (being written).
