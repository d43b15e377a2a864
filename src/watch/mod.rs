//! watch (being written).
