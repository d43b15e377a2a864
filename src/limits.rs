//! Every size, time and memory limit in one place.
//!
//! A folder that anyone on a plant network can drop files into receives every kind of file, so
//! each stage that could be made to use unbounded memory or time has a limit here, and passing
//! it is an input problem with a message that names what was too large (never a crash of the
//! watcher). The README has the same list as a table, with what happens at each edge.

/// Largest input file read, in bytes. Case workbooks are kilobytes.
pub const MAX_FILE_BYTES: u64 = 64 * 1024 * 1024;

/// Largest sum of the uncompressed sizes a zip container (xlsx, xlsm, ods) declares for its
/// members, in bytes. A zip bomb declares gigabytes; a case workbook a few hundred kilobytes.
pub const MAX_UNZIPPED_BYTES: u64 = 128 * 1024 * 1024;

/// Most members in one zip container.
pub const MAX_ZIP_ENTRIES: usize = 10_000;

/// Largest number of non-empty cells read from one workbook, all sheets together (every
/// reader: xlsx, xls, ods and CSV).
pub const MAX_CELLS: usize = 200_000;

/// Most rows (records, blank ones included) of a CSV input.
pub const MAX_CSV_ROWS: usize = 1_000_000;

/// Longest text in one cell, in characters: the most a spreadsheet cell can hold (Excel's
/// specification limit, common practice), so every text read can also be written back.
pub const MAX_TEXT_CHARS: usize = 32_767;

/// Address space a spreadsheet reader child process may use, in bytes. The xls and ods
/// readers build a dense grid between the first and last cell of a sheet, so one far-away
/// cell asks for gigabytes; in the child that ends the child, not the watcher.
pub const READER_ADDRESS_SPACE_BYTES: u64 = 448 * 1024 * 1024;

/// CPU seconds a spreadsheet reader child process may use.
pub const READER_CPU_SECS: u64 = 15;

/// Wall-clock seconds the watcher waits for a spreadsheet reader child process.
pub const READER_WALL_SECS: u64 = 30;

/// Most files one reader child of `batch` and `watch` reads before a fresh one takes over.
/// Each file gets the memory and CPU limits above on top of what the child already holds;
/// a child that holds more than [`READER_RECYCLE_CPU_SECS`] or
/// [`READER_RECYCLE_ADDRESS_SPACE_BYTES`] from earlier files, or whose file failed, is
/// replaced as well.
pub const READER_FILES_PER_CHILD: usize = 100;

/// CPU seconds of earlier files after which a reader child is replaced.
pub const READER_RECYCLE_CPU_SECS: u64 = 2;

/// Address space a reader child may have gained over earlier files before it is replaced,
/// in bytes.
pub const READER_RECYCLE_ADDRESS_SPACE_BYTES: u64 = 64 * 1024 * 1024;

/// Most cells in one run (all layers together).
pub const MAX_TOTAL_CELLS: usize = 100_000;

/// Most output cells one result may hold: curve rows times curve columns plus profile
/// positions times profile times (a workbook writer holds every cell in memory).
pub const MAX_OUTPUT_CELLS: u64 = 2_000_000;

/// Most profile times in `profile_hours`.
pub const MAX_PROFILE_TIMES: usize = 1000;

/// Most curve rows asked for through `output_every_min` (end time / spacing).
pub const MAX_OUTPUT_ROWS: f64 = 1e6;

/// Most variants one study runs (rows of the `variants` sheet); later rows are input errors.
/// Each variant is a whole case, with the case time limit of its own.
pub const MAX_VARIANTS: usize = 100;

/// Most points of one variant's curve on `variant_curves` (spread evenly over the run, the
/// last always kept), so a study's result stays within a few hundred thousand cells.
pub const MAX_VARIANT_CURVE_POINTS: usize = 1000;

/// Seconds one case may take to solve by default under `solve`, before it is stopped with a
/// message (`--case-seconds` changes it): a person at a terminal who asked for a long run.
pub const CASE_SECONDS: f64 = 600.0;

/// The same for `watch` and `batch`, where anyone on the network can drop a file: an input
/// that would keep a worker busy longer is answered with an errors workbook instead. Ordinary
/// cases take well under a second; a fine mesh or a long coupled run can be given more.
pub const FOLDER_CASE_SECONDS: f64 = 20.0;

/// How long an input that cannot be opened but is no longer changing is retried before it
/// is reported, in seconds.
pub const UNREADABLE_STABLE_SECS: f64 = 3.0;

/// After a run failed or its answer could not be written, the first wait before the same
/// unchanged input is tried again, in seconds; it doubles up to [`FAILURE_BACKOFF_MAX_SECS`].
pub const FAILURE_BACKOFF_SECS: f64 = 60.0;

/// The longest wait between tries of an unchanged input whose run keeps failing, in seconds.
pub const FAILURE_BACKOFF_MAX_SECS: f64 = 3600.0;
