//! Writing speed: how long a result workbook takes to build and save, how much of that is the
//! deflate step (the workbook's parts compressed again at other levels), and what
//! `write_atomically` adds (`cargo bench --bench write`).

use std::hint::black_box;
use std::io::{Cursor, Read as _, Write as _};
use std::time::Instant;

use dampfront::check;
use dampfront::solver;
use dampfront::workbook::template::{self, Kind};
use dampfront::workbook::{parse, read, write};

/// Median of `runs` timings of `f`, in ms.
fn median_ms(runs: usize, mut f: impl FnMut()) -> f64 {
    let mut t: Vec<f64> = (0..runs)
        .map(|_| {
            let start = Instant::now();
            f();
            start.elapsed().as_secs_f64() * 1e3
        })
        .collect();
    t.sort_by(f64::total_cmp);
    t[t.len() / 2]
}

/// The parts of an xlsx (name, uncompressed bytes).
fn parts(xlsx: &[u8]) -> Vec<(String, Vec<u8>)> {
    let mut zip = zip::ZipArchive::new(Cursor::new(xlsx)).expect("a zip");
    (0..zip.len())
        .map(|i| {
            let mut f = zip.by_index(i).expect("a part");
            let mut bytes = Vec::new();
            f.read_to_end(&mut bytes).expect("inflates");
            (f.name().expect("a name").to_string(), bytes)
        })
        .collect()
}

/// The same parts deflated again at `level` into a new zip, as the writer's zip crate does.
fn rezip(parts: &[(String, Vec<u8>)], level: i64) -> usize {
    let mut out = zip::ZipWriter::new(Cursor::new(Vec::new()));
    let options = zip::write::SimpleFileOptions::default()
        .compression_method(zip::CompressionMethod::Deflated)
        .compression_level(Some(level));
    for (name, bytes) in parts {
        out.start_file(name.as_str(), options).expect("starts");
        out.write_all(bytes).expect("writes");
    }
    out.finish().expect("finishes").into_inner().len()
}

fn main() {
    let scratch = tempfile::tempdir().expect("a scratch folder");
    println!(
        "{:<8} {:>5} {:>7} {:>7} {:>10} {:>14} {:>14} {:>14} {:>12}",
        "result",
        "rows",
        "KB",
        "xml KB",
        "build+save",
        "level 1 ms/KB",
        "level 2 ms/KB",
        "level 6 ms/KB",
        "atomic+fsync"
    );
    for kind in [Kind::Wood, Kind::Food, Kind::Clay] {
        let csv = template::to_csv(&template::sheets(kind));
        let book = read::read_bytes(csv.as_bytes(), "csv").expect("reads");
        let parsed = parse::parse(&book, kind.name()).expect("parses");
        let case = parsed.case.case();
        let run = solver::solve(case).expect("solves");
        let table = check::series_check(case, &run);
        let input = write::ResultInput {
            case,
            run: &run,
            warnings: &parsed.warnings,
            inputs: &parsed.inputs,
            measured: &parsed.measured,
            fit: None,
            check: table.as_ref(),
            input_sha256: "0000",
        };
        let bytes = write::result_workbook(&input).expect("builds");
        if std::env::args().any(|a| a == "--profile") {
            // One more build for a profiler (valgrind --tool=callgrind), nothing timed.
            black_box(write::result_workbook(&input).expect("builds"));
            return;
        }
        let total = median_ms(41, || {
            black_box(write::result_workbook(&input).expect("builds"));
        });
        let parts = parts(&bytes);
        let stored: usize = parts.iter().map(|(_, b)| b.len()).sum();
        let level = |l: i64| {
            let ms = median_ms(41, || {
                black_box(rezip(&parts, l));
            });
            format!("{ms:.3} / {:.1}", rezip(&parts, l) as f64 / 1024.0)
        };
        let path = scratch.path().join(format!("{}.result.xlsx", kind.name()));
        let atomic = median_ms(21, || {
            write::write_atomically(&path, &bytes).expect("writes");
        });
        println!(
            "{:<8} {:>5} {:>7.1} {:>7.1} {:>10.3} {:>14} {:>14} {:>14} {:>12.3}",
            kind.name(),
            run.curves.len(),
            bytes.len() as f64 / 1024.0,
            stored as f64 / 1024.0,
            total,
            level(1),
            level(2),
            level(6),
            atomic
        );
    }
    println!(
        "(ms, medians; build+save = write::result_workbook; level N = the same parts deflated \
         again at zip level N, ms and KB; xml KB = the parts uncompressed; atomic+fsync = write::write_atomically)"
    );
}
