//! `pim`: find the source of passive intermodulation.
//!
//! A thin binary over pim-core: parse the arguments, call the library, render the answer.
//! One file per command; errors are shown once, here, and mapped to exit codes.

#![deny(clippy::unwrap_used, clippy::expect_used)]

use std::io::Write;
use std::process::ExitCode;

use clap::{Parser, Subcommand};

/// `eprintln!` for every note and warning: text from files in the message is shown with
/// its control and invisible characters escaped (`pim_io::text::terminal_escape`), so no
/// input can drive the terminal.
macro_rules! eprintln_safe {
    ($($arg:tt)*) => {{
        let text = format!($($arg)*);
        eprintln!("{}", pim_io::text::terminal_escape(&text, true));
    }};
}

mod args;
mod common;
mod demo;
mod emitters;
mod explain;
mod fix;
mod log;
mod next;
mod plan;

mod slope;
mod study;
mod sweep;
mod ticket;
mod walk;

use common::CliError;

/// Find the source of passive intermodulation: explain a mystery carrier, fix the
/// junction from bearings, write the ticket.
#[derive(Parser)]
#[command(name = "pim", version, about, long_about = None, arg_required_else_help = true)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Which emitter combinations make a carrier heard on a receive channel.
    Explain(explain::Args),
    /// Locate the junction from a bearing walk, with its confidence ellipse.
    Fix(fix::Args),
    /// Add a bearing reading to a field log and show the running fix.
    Log(log::Args),
    /// Where the next bearing would shrink the ellipse most.
    Next(next::Args),
    /// Every product that lands on each receiver of a site.
    Study(study::Args),
    /// The largest set of channels on which no product of them lands.
    Plan(plan::Args),
    /// Every peak of an analyser trace of the receive band, explained at once.
    Sweep(sweep::Args),
    /// Read an attenuator or power-step test from the level slope.
    Slope(slope::Args),
    /// Write the maintenance ticket: ranked suspects, the fix on a map, what to inspect.
    Ticket(ticket::Args),
    /// Serve the bearing walk page to a phone: log readings, see the running fix.
    Walk(walk::Args),
    /// Run the job on the built-in invented demo site.
    Demo(demo::Args),
    /// How an emitter file is read: each column's field, unit and first values, the
    /// columns not used and the rows refused.
    Emitters(emitters::Args),
}

/// Exit codes: 0 success, 2 bad arguments, 3 bad input file, 4 file not readable or
/// writable, 5 inputs valid but no answer possible, 70 internal failure.
fn exit_code(err: &CliError) -> u8 {
    use pim_core::ErrorClass;
    match err {
        CliError::Core(e) => match e.class {
            ErrorClass::Argument => 2,
            ErrorClass::Input => 3,
            ErrorClass::Io => 4,
            ErrorClass::Refused => 5,
        },
        CliError::BrokenPipe => 0,
    }
}

/// The argument parser's own refusal in the style of every other error (`pim: …`, exit
/// 2); help and version are printed as they are and exit 0.
fn argument_error(e: clap::Error) -> ExitCode {
    use clap::error::ErrorKind;
    match e.kind() {
        ErrorKind::DisplayHelp | ErrorKind::DisplayVersion => {
            let _ = e.print();
            ExitCode::SUCCESS
        }
        ErrorKind::DisplayHelpOnMissingArgumentOrSubcommand => {
            let _ = e.print();
            ExitCode::from(2)
        }
        _ => {
            let text = e.render().to_string();
            let text = text.trim_end();
            let text = text.strip_prefix("error: ").unwrap_or(text);
            let _ = writeln!(std::io::stderr(), "pim: {text}");
            ExitCode::from(2)
        }
    }
}

fn main() -> ExitCode {
    std::panic::set_hook(Box::new(|info| {
        let _ = writeln!(
            std::io::stderr(),
            "pim: internal failure, please report it with the command and files used: {info}"
        );
        std::process::exit(70);
    }));
    let cli = match Cli::try_parse() {
        Ok(cli) => cli,
        Err(e) => return argument_error(e),
    };
    let result = match cli.command {
        Command::Explain(args) => explain::run(args),
        Command::Fix(args) => fix::run(args),
        Command::Log(args) => log::run(args),
        Command::Next(args) => next::run(args),
        Command::Study(args) => study::run(args),
        Command::Plan(args) => plan::run(args),
        Command::Slope(args) => slope::run(args),
        Command::Sweep(args) => sweep::run(args),
        Command::Ticket(args) => ticket::run(args),
        Command::Demo(args) => demo::run(args),
        Command::Walk(args) => walk::run(args),
        Command::Emitters(args) => emitters::run(args),
    };
    match result {
        Ok(()) => ExitCode::SUCCESS,
        Err(err) => {
            if let CliError::Core(e) = &err {
                // text from files never reaches the terminal raw
                let shown = e.to_string();
                let _ = writeln!(
                    std::io::stderr(),
                    "pim: {}",
                    pim_io::text::terminal_escape(&shown, true)
                );
            }
            ExitCode::from(exit_code(&err))
        }
    }
}

#[cfg(test)]
mod tests {
    use clap::CommandFactory;

    /// Every command's options are consistent (unique names, valid groups).
    #[test]
    fn command_line_is_consistent() {
        super::Cli::command().debug_assert();
    }
}
