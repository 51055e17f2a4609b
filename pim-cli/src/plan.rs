//! `pim plan (--channels FILE | --grid START_MHZ,STEP_KHZ,COUNT)`: the largest set of
//! channels on which no product of them, up to the order asked, lands on a chosen channel
//! or a protected receive frequency.

use std::path::PathBuf;
use std::time::{Duration, Instant};

use pim_core::emitter::{Carrier, Emitter};
use pim_core::freq::Hz;
use pim_core::plan::{closest_products, plan_until, PlanSpec};
use pim_io::channels::Grid;
use pim_io::{read_channels, ListedChannel};

use crate::common::{finish, khz_arg, open, stdout, AnswerFormat, CliResult};
use pim_report::plan::{label, write_json, write_table, PlanReport};

/// clap parser for the order: 3 or 5.
fn order_arg(text: &str) -> Result<u32, String> {
    match text.trim() {
        "3" => Ok(3),
        "5" => Ok(5),
        _ => Err(format!("order `{text}` is neither 3 nor 5")),
    }
}

/// clap parser for the time limit in seconds.
fn seconds_arg(text: &str) -> Result<f64, String> {
    match pim_io::text::parse_quantity(text, "s") {
        Ok(s) if s > 0.0 && s <= 86_400.0 => Ok(s),
        Err(e) => Err(e),
        _ => Err(format!("`{text}` is not a time above 0 and up to 86400 s")),
    }
}

#[derive(clap::Args, Debug)]
#[command(
    allow_negative_numbers = true,
    group(clap::ArgGroup::new("candidates").required(true).args(["channels", "grid"]))
)]
pub struct Args {
    /// Candidate channels: CSV with `freq_mhz`, optional `bw_khz`, `id`, `note`.
    #[arg(long, value_name = "FILE")]
    pub channels: Option<PathBuf>,
    /// Candidate channels on a uniform grid: first frequency in MHz, step in kHz, count.
    #[arg(long, value_name = "START_MHZ,STEP_KHZ,COUNT", value_parser = Grid::parse, allow_hyphen_values = true)]
    pub grid: Option<Grid>,
    /// Highest order of the products that must not land: 3 or 5.
    #[arg(long, value_name = "3|5", default_value = "3", value_parser = order_arg)]
    pub max_order: u32,
    /// Clearance on each side of a chosen channel or protected frequency, in kHz.
    #[arg(long = "guard-khz", value_name = "KHZ", default_value = "0", value_parser = khz_arg)]
    pub guard: Hz,
    /// Receive frequencies no product may land on: CSV with `freq_mhz`, optional `bw_khz`, `id`.
    #[arg(long, value_name = "FILE")]
    pub protect: Option<PathBuf>,
    /// Seconds the search may take; past them the best set found is given, not proved largest.
    #[arg(long = "time-limit-s", value_name = "S", default_value = "5", value_parser = seconds_arg)]
    pub time_limit: f64,
    /// Output format.
    #[arg(long, value_enum, default_value_t = AnswerFormat::Table)]
    pub format: AnswerFormat,
}

fn load_list(path: &std::path::Path) -> CliResult<Vec<ListedChannel>> {
    let source = path.display().to_string();
    let file = read_channels(&source, open(path)?)?;
    crate::common::note_unused(&source, &file.ignored_columns);
    Ok(file.channels)
}

pub fn run(args: Args) -> CliResult {
    let (candidates, description) = match (&args.channels, args.grid) {
        (Some(path), _) => {
            let list = load_list(path)?;
            let d = format!("{} candidate channels from {}", list.len(), path.display());
            (list, d)
        }
        (None, Some(g)) => (g.channels(), g.describe()),
        (None, None) => {
            return Err(pim_core::Error::argument(
                "--channels",
                "give the candidates with --channels FILE or --grid START_MHZ,STEP_KHZ,COUNT",
            )
            .into())
        }
    };
    let protected = match &args.protect {
        Some(path) => load_list(path)?,
        None => Vec::new(),
    };
    let cand_carriers: Vec<Carrier> = candidates.iter().map(ListedChannel::carrier).collect();
    let prot_carriers: Vec<Carrier> = protected.iter().map(ListedChannel::carrier).collect();
    let spec = PlanSpec {
        order: args.max_order,
        guard: args.guard,
    };
    let start = Instant::now();
    let deadline = start.checked_add(Duration::from_secs_f64(args.time_limit));
    let out_of_time = || deadline.is_some_and(|d| Instant::now() >= d);
    let result = plan_until(&cand_carriers, &prot_carriers, &spec, &out_of_time)?;
    let elapsed = start.elapsed();
    let chosen: Vec<&ListedChannel> = result.chosen.iter().map(|&i| &candidates[i]).collect();
    let chosen_carriers: Vec<Carrier> = chosen.iter().map(|c| c.carrier()).collect();
    let names: Vec<Emitter> = chosen
        .iter()
        .map(|c| Emitter::new(label(c), c.freq, c.bandwidth))
        .collect();
    let closest = closest_products(&chosen_carriers, args.max_order);

    let report = PlanReport {
        chosen,
        closest,
        names,
        result: &result,
        candidates: candidates.len(),
        description,
        order: args.max_order,
        guard: args.guard,
        protected: &protected,
        time_limit_s: args.time_limit,
        elapsed_s: elapsed.as_secs_f64(),
    };
    let mut out = stdout();
    match args.format {
        AnswerFormat::Json => write_json(&mut out, &report)?,
        AnswerFormat::Table => write_table(&mut out, &report)?,
    }
    finish(out)
}
