//! `watch` with real signals: SIGTERM ends it with `Ok(())` (exit 0) after running cases,
//! a second SIGTERM cancels them at once. In its own test binary because it signals the
//! whole test process (whose handlers `watch` has installed by then).

#[path = "watch_support.rs"]
mod support;

use std::sync::Arc;
use std::thread::JoinHandle;
use std::time::Duration;

use dampfront::watch::{Processor, Status, WatchError, WatchOptions, watch};
use support::{Behaviour, Fake, Scratch, eventually, quick_watch};

fn sigterm_self() {
    let status = std::process::Command::new("kill")
        .args(["-TERM", &std::process::id().to_string()])
        .status()
        .unwrap();
    assert!(status.success());
}

fn start(opts: WatchOptions, fake: &Arc<Fake>) -> JoinHandle<Result<(), WatchError>> {
    let processor: Arc<dyn Processor> = fake.clone();
    std::thread::spawn(move || watch(&opts, processor))
}

#[test]
fn sigterm_lets_the_running_case_finish_and_a_second_one_cancels_it() {
    // One test, so the two parts cannot signal each other's daemon.
    let dir = Scratch::new();
    let fake = Fake::new(Behaviour {
        work: Duration::from_millis(1000),
        ..Behaviour::default()
    });
    let daemon = start(quick_watch(dir.path()), &fake);
    // Once an input runs, the handlers are in place (they are installed first).
    dir.write("first.csv", "x");
    assert!(eventually(|| fake.busy()));
    sigterm_self();
    assert!(eventually(|| daemon.is_finished()));
    daemon.join().unwrap().unwrap();
    assert_eq!(fake.calls().last().map(|c| c.status), Some(Status::Solved));
    assert!(dir.file("first.result.xlsx").exists());
    assert!(dir.leftovers().is_empty(), "{:?}", dir.leftovers());

    let dir = Scratch::new();
    let fake = Fake::new(Behaviour {
        work: Duration::from_secs(600),
        ..Behaviour::default()
    });
    let opts = WatchOptions {
        grace: Duration::from_secs(600),
        ..quick_watch(dir.path())
    };
    let daemon = start(opts, &fake);
    dir.write("long.csv", "x");
    assert!(eventually(|| fake.busy()));
    sigterm_self();
    std::thread::sleep(Duration::from_millis(500));
    assert!(
        !daemon.is_finished(),
        "the grace period should still be running"
    );
    sigterm_self();
    assert!(eventually(|| daemon.is_finished()));
    daemon.join().unwrap().unwrap();
    assert_eq!(fake.calls().last().map(|c| c.status), Some(Status::Failed));
    assert!(dir.leftovers().is_empty(), "{:?}", dir.leftovers());
}
