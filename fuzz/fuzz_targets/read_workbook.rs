//! Any bytes as a spreadsheet (xlsx, xlsm, xls or ods, detected from the bytes) down to the
//! validated case: reading and parsing must answer with cells or with problems, never panic.
#![no_main]

use dampfront::workbook::{parse, read};
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    if let Ok(book) = read::read_bytes(data, "xlsx") {
        let _ = parse::parse(&book, "fuzz");
    }
});
