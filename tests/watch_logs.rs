//! One log line per input, with its file, outcome and time. Kept in its own test binary
//! because it installs the process-wide subscriber (runs happen on worker threads).

#[path = "watch_support.rs"]
mod support;

use std::io;
use std::sync::atomic::AtomicBool;
use std::sync::{Arc, Mutex};
use std::time::Duration;

use dampfront::watch::{BatchOptions, Processor, batch_until};
use support::{Behaviour, Fake, Scratch};

#[derive(Clone, Default)]
struct Captured(Arc<Mutex<Vec<u8>>>);

impl io::Write for Captured {
    fn write(&mut self, buf: &[u8]) -> io::Result<usize> {
        self.0.lock().unwrap().extend_from_slice(buf);
        Ok(buf.len())
    }

    fn flush(&mut self) -> io::Result<()> {
        Ok(())
    }
}

#[test]
fn each_input_gets_one_info_line_with_file_outcome_and_seconds() {
    let captured = Captured::default();
    let writer = captured.clone();
    tracing_subscriber::fmt()
        .with_max_level(tracing::Level::INFO)
        .with_ansi(false)
        .with_writer(move || writer.clone())
        .init();

    let dir = Scratch::new();
    dir.write("beech.csv", "x");
    dir.write("broken.xlsx", "x");
    let fake = Fake::new(Behaviour {
        not_ready_calls: 1,
        ..Behaviour::default()
    });
    let opts = BatchOptions {
        jobs: 2,
        settle: Duration::from_millis(100),
        ..BatchOptions::new(dir.path())
    };
    let processor: Arc<dyn Processor> = fake.clone();
    batch_until(&opts, processor, Arc::new(AtomicBool::new(false))).unwrap();

    let text = String::from_utf8(captured.0.lock().unwrap().clone()).unwrap();
    for file in ["beech.csv", "broken.xlsx"] {
        let lines: Vec<&str> = text
            .lines()
            .filter(|l| l.contains(&format!("file={file}")))
            .collect();
        // The not-ready first try is not an outcome of its own: still one line.
        assert_eq!(lines.len(), 1, "{file}: {text}");
        assert!(lines[0].contains("INFO"), "{}", lines[0]);
        assert!(lines[0].contains("outcome=solved"), "{}", lines[0]);
        assert!(lines[0].contains("seconds="), "{}", lines[0]);
    }
}
