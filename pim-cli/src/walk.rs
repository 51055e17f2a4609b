//! `pim walk --log FILE`: the bearing walk on a phone, served by the `pim-walk` crate;
//! here only its options, the files it reads and the estimator it runs.

use std::net::SocketAddr;
use std::path::PathBuf;

use pim_io::fieldlog::read_spots;

use crate::common::{open, CliError, CliResult};
use crate::fix::{fix_from_log, fix_json, FixArgs};

#[derive(clap::Args, Debug)]
pub struct Args {
    /// The field log to add readings to (created with its header when missing).
    #[arg(long, value_name = "FILE")]
    pub log: PathBuf,
    /// Address and port to listen on; 0.0.0.0:PORT serves phones on the same network
    /// (over HTTPS: any address but loopback is served over HTTPS only).
    #[arg(long, value_name = "ADDR:PORT", default_value = "127.0.0.1:0")]
    pub listen: SocketAddr,
    /// A host name phones may use for this machine (accepted in the Host header and
    /// named in the certificate); may be given more than once.
    #[arg(long = "name", value_name = "HOST")]
    pub names: Vec<String>,
    /// Folder the HTTPS certificate and its key are kept in between runs (default:
    /// `pim-walk-tls` beside the log).
    #[arg(long, value_name = "DIR")]
    pub tls_dir: Option<PathBuf>,
    /// Also write the address as a QR code to this SVG file (replaced each run).
    #[arg(long, value_name = "FILE.svg")]
    pub qr: Option<PathBuf>,
    /// Site structures (CSV) to show on the map.
    #[arg(long, value_name = "FILE")]
    pub structures: Option<PathBuf>,
    /// Emitters (CSV) to show on the map.
    #[arg(long, value_name = "FILE")]
    pub emitters: Option<PathBuf>,
    /// Spots one can reach (CSV with lat, lon and an `id` or `name`) to suggest the next one from; by
    /// default a ring around the fix at the walk's typical range.
    #[arg(long, value_name = "FILE")]
    pub candidates: Option<PathBuf>,
    /// The running fix's estimator, as in `pim fix`.
    #[command(flatten)]
    pub fix: FixArgs,
    #[command(flatten)]
    pub columns: crate::args::ColumnsArgs,
}

pub fn run(args: Args) -> CliResult {
    let (structures, emitters) = crate::common::load_site_items(
        args.structures.as_deref(),
        args.emitters.as_deref(),
        &args.columns,
    )?;
    let candidates = match &args.candidates {
        Some(p) => Some(read_spots(&p.display().to_string(), open(p)?)?),
        None => None,
    };
    let inputs = [
        Some(&args.log),
        args.structures.as_ref(),
        args.emitters.as_ref(),
        args.candidates.as_ref(),
        args.fix.track.as_ref(),
    ]
    .into_iter()
    .flatten()
    .cloned()
    .collect();
    let estimator = args.fix.clone();
    let fixer = Box::new(move |log: &std::path::Path, text: &str| {
        match fix_from_log(log, Some(text), &estimator) {
            Ok((fix, prepared)) => {
                let json = serde_json::to_value(fix_json(&fix, &prepared.corrections))
                    .map_err(|e| pim_core::Error::refused(format!("the fix as JSON: {e}")))?;
                Ok((fix, json))
            }
            Err(CliError::Core(e)) => Err(e),
            Err(CliError::BrokenPipe) => Err(pim_core::Error::refused("unreadable")),
        }
    });
    let config = pim_walk::Config {
        log: args.log,
        listen: args.listen,
        names: args.names,
        tls_dir: args.tls_dir,
        qr: args.qr,
        inputs,
        structures,
        emitters,
        candidates,
    };
    pim_walk::serve(config, fixer)?;
    Ok(())
}
