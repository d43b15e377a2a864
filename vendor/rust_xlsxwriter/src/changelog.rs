//! Changes and fixes in the `rust_xlsxwriter` library.
#![doc = include_str!("../CHANGELOG.md")]
