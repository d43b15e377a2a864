//! The `dampfront` command: parses the command line, runs it, maps the outcome to an exit code
//! (0 every input ran, 1 some input had problems, 2 usage or system error).

use std::process::ExitCode;

use clap::Parser;
use dampfront::cli::{self, Cli, Outcome};

fn main() -> ExitCode {
    // The reader child processes start once per input (or per batch of inputs): they skip the
    // command-line parser, the log set-up and the panic hook of the other commands.
    if let Some(code) = reader_child() {
        return ExitCode::from(u8::try_from(code).unwrap_or(2));
    }
    let cli = match Cli::try_parse() {
        Ok(cli) => cli,
        Err(e) => {
            // Help and version are successes; anything else is a usage error.
            let code = if e.use_stderr() { 2 } else { 0 };
            let _ = e.print();
            return ExitCode::from(code);
        }
    };
    // The reader child process answers on stdout only; it logs nothing.
    if let cli::Command::ReadCellsChild { extension } = &cli.command {
        let code = dampfront::workbook::read::child_main(extension);
        return ExitCode::from(u8::try_from(code).unwrap_or(2));
    }
    cli::init_logging(cli.log_json);
    // A panic inside one input's run is caught and reported for that input; the default hook
    // would also print "thread ... panicked" and a backtrace hint. One log line is enough.
    std::panic::set_hook(Box::new(|info| {
        let place = info
            .location()
            .map(|l| format!(" at {}:{}", l.file(), l.line()))
            .unwrap_or_default();
        let message = info
            .payload()
            .downcast_ref::<&str>()
            .map(|s| s.to_string())
            .or_else(|| info.payload().downcast_ref::<String>().cloned())
            .unwrap_or_else(|| String::from("no message"));
        tracing::error!("internal error{place}: {message}");
    }));
    match cli::run(cli) {
        Ok(Outcome::Ok) => ExitCode::SUCCESS,
        Ok(Outcome::Problems) => ExitCode::from(1),
        Err(e) => {
            eprintln!("dampfront: {e:#}");
            ExitCode::from(2)
        }
    }
}

/// Runs the reader child if the arguments are exactly those the parent gives it
/// (`read-cells-child EXT` or `read-cells-server`): its exit code, else `None`.
fn reader_child() -> Option<i32> {
    use dampfront::workbook::read;
    let mut args = std::env::args_os().skip(1);
    let (first, second, rest) = (args.next()?, args.next(), args.next());
    match (first.to_str()?, second.as_ref().map(|s| s.to_str()), rest) {
        (read::CHILD_COMMAND, Some(Some(extension)), None) => Some(read::child_main(extension)),
        (read::SERVER_COMMAND, None, None) => Some(read::server_main()),
        _ => None,
    }
}
