//! `pim emitters --emitters FILE`: how an emitter list is read, before any analysis: the
//! field each column became, its unit and its first values converted, the columns not
//! used, what was assumed, and every row refused with why.

use std::io::Write;
use std::path::PathBuf;

use pim_core::error::{Error, Place};
use pim_io::emitters::{read_emitters_with, ReadOptions};

use crate::args::ColumnsArgs;
use crate::common::{finish, open, stdout, CliResult, Columns};

#[derive(clap::Args, Debug)]
pub struct Args {
    /// Emitter file: CSV with a header, or a JSON array.
    #[arg(long, value_name = "FILE")]
    pub emitters: PathBuf,
    #[command(flatten)]
    pub columns: ColumnsArgs,
}

pub fn run(args: Args) -> CliResult {
    let columns = Columns::new(&args.columns.columns)?;
    let source = args.emitters.display().to_string();
    let options = ReadOptions {
        columns: columns.map(),
        keep_going: true,
    };
    let file = read_emitters_with(&source, open(&args.emitters)?, options)?;
    columns.saw(&source, &file.layout);
    columns.check()?;
    let mut out = stdout();
    write!(
        out,
        "{}",
        pim_report::emitters::reading_report(&source, &file)
    )?;
    finish(out)?;
    if file.refused.is_empty() {
        Ok(())
    } else {
        Err(Error::input(
            Place::new(&source),
            format!(
                "{} of {} rows refused (listed above)",
                file.refused.len(),
                file.rows
            ),
        )
        .into())
    }
}
