//! `pim plan (--channels FILE | --grid START_MHZ,STEP_KHZ,COUNT)`: the largest set of
//! channels on which no product of them, up to the order asked, lands on a chosen channel
//! or a protected receive frequency.

use std::io::Write;
use std::path::PathBuf;
use std::time::{Duration, Instant};

use pim_core::emitter::{Carrier, Emitter};
use pim_core::freq::{parse_khz, parse_mhz, Hz, MAX_FREQUENCY};
use pim_core::plan::{closest_products, grid, plan_until, Plan, PlanMethod, PlanSpec};
use pim_core::rank::formula;
use pim_io::{read_channels, ListedChannel};
use serde::Serialize;
use serde_json::json;

use crate::common::{finish, khz_arg, open, stdout, AnswerFormat, CliResult};
use pim_report::text_table::{Align, TextTable};

/// The most channels a grid may have.
pub const MAX_GRID_COUNT: usize = 100_000;

/// A uniform grid of candidate channels.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct GridArg {
    pub start: Hz,
    pub step: Hz,
    pub count: usize,
}

/// clap parser for `START_MHZ,STEP_KHZ,COUNT`.
pub fn grid_arg(text: &str) -> Result<GridArg, String> {
    let parts: Vec<&str> = text.split(',').map(str::trim).collect();
    let [start, step, count] = parts[..] else {
        return Err(format!(
            "`{text}` is not START_MHZ,STEP_KHZ,COUNT (such as 150.0,12.5,35)"
        ));
    };
    let start_hz = parse_mhz(start).map_err(|e| format!("start: {e}"))?;
    if start_hz.0 <= 0 {
        return Err(format!("start {start} MHz must be above zero"));
    }
    let step_hz = parse_khz(step).map_err(|e| format!("step: {e}"))?;
    if step_hz.0 <= 0 {
        return Err(format!("step {step} kHz must be above zero"));
    }
    let count: usize = count
        .parse()
        .map_err(|_| format!("count `{count}` is not a whole number"))?;
    if !(1..=MAX_GRID_COUNT).contains(&count) {
        return Err(format!("count {count} is outside 1…{MAX_GRID_COUNT}"));
    }
    let top = (count as i64 - 1)
        .checked_mul(step_hz.0)
        .and_then(|span| span.checked_add(start_hz.0));
    if top.is_none_or(|top| top > MAX_FREQUENCY.0) {
        return Err("the grid reaches above 300 GHz".to_string());
    }
    Ok(GridArg {
        start: start_hz,
        step: step_hz,
        count,
    })
}

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
    match text.parse::<f64>() {
        Ok(s) if s.is_finite() && s > 0.0 && s <= 86_400.0 => Ok(s),
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
    #[arg(long, value_name = "START_MHZ,STEP_KHZ,COUNT", value_parser = grid_arg, allow_hyphen_values = true)]
    pub grid: Option<GridArg>,
    /// Highest order of the products that must not land: 3 or 5.
    #[arg(long, default_value = "3", value_parser = order_arg)]
    pub order: u32,
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

/// The JSON answer; the first three fields are the contract.
#[derive(Serialize)]
struct PlanJson<'a> {
    channels_mhz: Vec<f64>,
    count: usize,
    optimal: bool,
    candidates: usize,
    order: u32,
    guard_khz: f64,
    protected_mhz: Vec<f64>,
    search: serde_json::Value,
    channels: Vec<ChannelJson<'a>>,
}

#[derive(Serialize)]
struct ChannelJson<'a> {
    freq_mhz: f64,
    id: Option<&'a str>,
    bw_khz: f64,
    closest_product: Option<ClosestJson>,
}

#[derive(Serialize)]
struct ClosestJson {
    formula: String,
    product_mhz: f64,
    distance_khz: f64,
    order: u32,
}

fn load_list(path: &std::path::Path) -> CliResult<Vec<ListedChannel>> {
    let source = path.display().to_string();
    let file = read_channels(&source, open(path)?)?;
    if !file.ignored_columns.is_empty() {
        eprintln_safe!(
            "pim: note: {source}: columns not used: {}",
            file.ignored_columns.join(", ")
        );
    }
    Ok(file.channels)
}

fn label(c: &ListedChannel) -> String {
    c.id.clone().unwrap_or_else(|| c.freq.mhz_text())
}

fn order_words(order: u32) -> &'static str {
    if order == 3 {
        "third"
    } else {
        "fifth"
    }
}

fn search_text(p: &Plan, time_limit: f64, elapsed: Duration) -> String {
    let secs = elapsed.as_secs_f64();
    match p.method {
        PlanMethod::BranchAndBound => format!(
            "Proved the largest: the branch and bound examined every larger set ({} conflicts, {} nodes, {secs:.2} s).",
            p.conflicts, p.nodes
        ),
        PlanMethod::BranchAndBoundCutShort => format!(
            "Best found, not proved the largest: the branch and bound was cut short by the {time_limit} s limit ({} conflicts, {} nodes); a longer --time-limit-s may prove it or find more.",
            p.conflicts, p.nodes
        ),
        PlanMethod::Greedy => format!(
            "Best found, not proved the largest: the candidates' conflicts could not be listed within the limits of the exact search (at most {} candidates, {} conflicts, the time limit), so greedy passes ran for {secs:.1} s.",
            pim_core::plan::EXACT_MAX_CANDIDATES,
            pim_core::plan::MAX_CONFLICTS
        ),
    }
}

pub fn run(args: Args) -> CliResult {
    let (candidates, description) = match (&args.channels, args.grid) {
        (Some(path), _) => {
            let list = load_list(path)?;
            let d = format!("{} candidate channels from {}", list.len(), path.display());
            (list, d)
        }
        (None, Some(g)) => {
            let list: Vec<ListedChannel> = grid(g.start, g.step, g.count)
                .into_iter()
                .map(|c| ListedChannel {
                    id: None,
                    freq: c.freq,
                    bandwidth: c.bandwidth,
                    note: None,
                    line: 0,
                })
                .collect();
            let d = format!(
                "{} candidate channels on a grid from {} MHz in {} kHz steps",
                g.count,
                g.start.mhz_text(),
                g.step.khz_text()
            );
            (list, d)
        }
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
        order: args.order,
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
    let closest = closest_products(&chosen_carriers, args.order);

    let mut out = stdout();
    match args.format {
        AnswerFormat::Json => {
            let channels = chosen
                .iter()
                .zip(&closest)
                .map(|(c, near)| ChannelJson {
                    freq_mhz: c.freq.mhz(),
                    id: c.id.as_deref(),
                    bw_khz: c.bandwidth.khz(),
                    closest_product: near.map(|n| ClosestJson {
                        formula: formula(&n.product, &names),
                        product_mhz: n.product.freq.mhz(),
                        distance_khz: n.distance.khz(),
                        order: n.product.order(),
                    }),
                })
                .collect();
            let v = PlanJson {
                channels_mhz: chosen.iter().map(|c| c.freq.mhz()).collect(),
                count: chosen.len(),
                optimal: result.optimal,
                candidates: candidates.len(),
                order: args.order,
                guard_khz: args.guard.khz(),
                protected_mhz: protected.iter().map(|c| c.freq.mhz()).collect(),
                search: json!({
                    "method": result.method,
                    "conflicts": result.conflicts,
                    "nodes": result.nodes,
                    "elapsed_s": (elapsed.as_secs_f64() * 1000.0).round() / 1000.0,
                    "time_limit_s": args.time_limit,
                }),
                channels,
            };
            serde_json::to_writer_pretty(&mut out, &v).map_err(std::io::Error::from)?;
            writeln!(out)?;
        }
        AnswerFormat::Table => {
            writeln!(out, "Channel plan: {} of {description}.", chosen.len())?;
            writeln!(
                out,
                "No product of two or three chosen channels, up to {} order, lands within {} kHz of a chosen channel{}.",
                order_words(args.order),
                args.guard.khz_text(),
                match protected.len() {
                    0 => String::new(),
                    1 => " or of the protected frequency".to_string(),
                    n => format!(" or of any of the {n} protected frequencies"),
                }
            )?;
            writeln!(out, "{}\n", search_text(&result, args.time_limit, elapsed))?;
            let with_ids = chosen.iter().any(|c| c.id.is_some());
            let mut headers = vec![("#", Align::Right), ("channel MHz", Align::Right)];
            if with_ids {
                headers.push(("id", Align::Left));
            }
            headers.extend([
                ("closest product", Align::Left),
                ("at MHz", Align::Right),
                ("distance kHz", Align::Right),
                ("order", Align::Right),
            ]);
            let mut t = TextTable::new(&headers);
            for (i, (c, near)) in chosen.iter().zip(&closest).enumerate() {
                let (f, at, d, o) = match near {
                    Some(n) => (
                        formula(&n.product, &names),
                        n.product.freq.mhz_text(),
                        n.distance.khz_text(),
                        n.product.order().to_string(),
                    ),
                    None => ("—".into(), "—".into(), "—".into(), "—".into()),
                };
                let mut row = vec![(i + 1).to_string(), c.freq.mhz_text()];
                if with_ids {
                    row.push(c.id.clone().unwrap_or_default());
                }
                row.extend([f, at, d, o]);
                t.push(row);
            }
            write!(out, "{}", t.render())?;
        }
    }
    finish(out)
}
