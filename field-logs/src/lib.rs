//! The invented demo scenario, Marrow Hill: an old tower carrying a paging collinear, a
//! county's bases and an amateur repeater, a corroded joint among their antennas, and
//! the files a crew would bring back from it. Embedded so that `pim demo` runs from any
//! directory; every call sign, site and owner is invented.

use pim_core::freq::Hz;
use pim_core::geo::GeoPoint;

pub mod recording;

/// The invented demo site's emitters, structures and bearing walk.
pub const EMITTERS_CSV: &str = include_str!("../emitters.csv");
pub const STRUCTURES_CSV: &str = include_str!("../structures.csv");
pub const WALK_CSV: &str = include_str!("../walk.csv");
/// The attenuator test and the power steps of SKP-152 and FIRE-DSP, done on the visit.
pub const ATTENUATOR_CSV: &str = include_str!("../attenuator-readings.csv");
pub const POWER_STEPS_CSV: &str = include_str!("../power-steps.csv");
/// A maximum-hold trace of the site's receive band, 144–160 MHz.
pub const TRACE_CSV: &str = include_str!("../trace.csv");
/// The site's receivers, for the forward study.
pub const RECEIVERS_CSV: &str = include_str!("../receivers.csv");
/// The emitters' keying from their owners' logs, and the times the carrier was listened
/// for, for the on-air check.
pub const ON_AIR_CSV: &str = include_str!("../on-air.csv");
pub const HEARD_CSV: &str = include_str!("../heard.csv");
/// The coordinator's candidate channels and the channels to protect, for `pim plan`.
pub const PLAN_CANDIDATES_CSV: &str = include_str!("../plan-candidates.csv");
pub const PLAN_PROTECT_CSV: &str = include_str!("../plan-protect.csv");

/// The repeater input on which the mystery carrier is heard.
pub const HEARD: Hz = Hz(146_340_000);
/// The repeater's receive antenna: on the old tower, which also carries the paging
/// collinear and the county's bases.
pub const RX_SITE: GeoPoint = GeoPoint {
    lat_deg: 45.10462,
    lon_deg: -122.414033,
};
/// Where on the tower the crew expects the junction: among the antennas, m above ground.
pub const JUNCTION_HEIGHT_M: f64 = 36.0;

/// The `pim` command lines that do what the demo did, on the inputs it wrote into `dir`,
/// each quoted for a POSIX shell by the one quoting of every suggested command.
pub fn commands(dir: &std::path::Path) -> Vec<String> {
    use pim_io::text::pim_command;
    let file = |name: &str| dir.join(name).display().to_string();
    let beside = |suffix: &str| format!("{}{suffix}", dir.display());
    let heard = HEARD.mhz_text();
    let (rx_lat, rx_lon) = (RX_SITE.lat_deg.to_string(), RX_SITE.lon_deg.to_string());
    let height = JUNCTION_HEIGHT_M.to_string();
    // the receiver on the old tower, the joint among its antennas
    let at_tower = [
        "--rx-lat",
        rx_lat.as_str(),
        "--rx-lon",
        rx_lon.as_str(),
        "--junction-height-m",
        height.as_str(),
    ];
    vec![
        pim_command(["fix", "--log", &file("walk.csv"), "--freq", &heard]),
        pim_command([
            "log",
            "--log",
            &file("walk.csv"),
            "--list",
            "--freq",
            &heard,
        ]),
        pim_command([
            "next",
            "--log",
            &file("walk.csv"),
            "--radius-m",
            "150",
            "--freq",
            &heard,
        ]),
        pim_command([
            "slope",
            "--kind",
            "attenuator",
            "--readings",
            &file("attenuator-readings.csv"),
        ]),
        pim_command([
            "slope",
            "--kind",
            "power",
            "--readings",
            &file("power-steps.csv"),
            "--freq",
            &heard,
            "--emitters",
            &file("emitters.csv"),
        ]),
        pim_command(
            ["explain", &heard, "--emitters", &file("emitters.csv")]
                .into_iter()
                .chain(at_tower)
                .chain([
                    "--on-air",
                    &file("on-air.csv"),
                    "--heard",
                    &file("heard.csv"),
                    "--power-steps",
                    &file("power-steps.csv"),
                ]),
        ),
        pim_command([
            "study",
            "--emitters",
            &file("emitters.csv"),
            "--receivers",
            &file("receivers.csv"),
            "--junction-height-m",
            &height,
        ]),
        pim_command([
            "plan",
            "--channels",
            &file("plan-candidates.csv"),
            "--protect",
            &file("plan-protect.csv"),
        ]),
        pim_command([
            "sweep",
            "--recording",
            &file("recording.csv"),
            "--emitters",
            &file("emitters.csv"),
            "--svg",
            &beside("-waterfall.svg"),
        ]),
        pim_command(
            [
                "ticket",
                &heard,
                "--emitters",
                &file("emitters.csv"),
                "--log",
                &file("walk.csv"),
                "--structures",
                &file("structures.csv"),
                "--trace",
                &file("trace.csv"),
                "--attenuator-readings",
                &file("attenuator-readings.csv"),
                "--power-steps",
                &file("power-steps.csv"),
            ]
            .into_iter()
            .chain(at_tower)
            .chain(["--site", "Marrow Hill", "--out", &beside("-again")]),
        ),
    ]
}
