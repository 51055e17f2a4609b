//! Transmitters that may feed a junction, and receivers a product may land in.

use serde::Serialize;

use crate::emission::ModulationClass;
use crate::freq::Hz;
use crate::geo::GeoPoint;

/// Whether an emitter is on the air all the time or only now and then.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Keying {
    /// On the air all the time (a broadcaster, a paging transmitter on a duty cycle near 1).
    Continuous,
    /// Keyed when there is traffic (a repeater, a dispatch channel).
    Intermittent,
}

/// A transmitter at or near the site.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Emitter {
    /// The emitter's name in its file (a call sign or a site's own label).
    pub id: String,
    /// Carrier frequency.
    pub freq: Hz,
    /// Occupied bandwidth (0 for a plain carrier).
    pub bandwidth: Hz,
    /// Effective radiated power (relative to a half-wave dipole) in dBm.
    pub erp_dbm: Option<f64>,
    /// Where its antenna stands (WGS84).
    pub position: Option<GeoPoint>,
    /// Height of the antenna's centre above ground, in metres.
    pub height_m: Option<f64>,
    /// Free text: fm, am, paging, repeater, land mobile, ...
    pub kind: Option<String>,
    /// Whether it transmits all the time or when keyed.
    pub keyed: Option<Keying>,
    /// Who holds the licence, where the file says.
    pub owner: Option<String>,
    /// The class of its spectrum, from an emission designator or a `modulation` column
    /// (see [`crate::emission`]); `None` when the file does not say.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub modulation: Option<ModulationClass>,
    /// Free text from the file.
    pub note: Option<String>,
    /// The line of the emitter file it came from (header = line 1).
    pub line: u64,
}

impl Emitter {
    /// A bare emitter with only an id, frequency and bandwidth, as the search needs.
    pub fn new(id: impl Into<String>, freq: Hz, bandwidth: Hz) -> Self {
        Emitter {
            id: id.into(),
            freq,
            bandwidth,
            erp_dbm: None,
            position: None,
            height_m: None,
            kind: None,
            keyed: None,
            owner: None,
            modulation: None,
            note: None,
            line: 0,
        }
    }

    /// The emitter with its ERP (dBm) and antenna position, as the level model needs.
    pub fn radiating(mut self, erp_dbm: f64, position: GeoPoint) -> Self {
        self.erp_dbm = Some(erp_dbm);
        self.position = Some(position);
        self
    }

    /// The frequency and width the product search needs.
    pub fn carrier(&self) -> Carrier {
        Carrier {
            freq: self.freq,
            bandwidth: self.bandwidth,
        }
    }
}

/// The carriers of a list of emitters, in the same order (what the product search takes).
pub fn carriers(emitters: &[Emitter]) -> Vec<Carrier> {
    emitters.iter().map(Emitter::carrier).collect()
}

/// A signal's centre frequency and occupied bandwidth.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Carrier {
    /// Centre frequency.
    pub freq: Hz,
    /// Occupied bandwidth.
    pub bandwidth: Hz,
}

/// A receive channel at the site.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Receiver {
    /// The receiver's name in its file.
    pub id: String,
    /// Centre of its receive channel.
    pub freq: Hz,
    /// Channel width, when the file gives one.
    pub bandwidth: Option<Hz>,
    /// Where its antenna stands (WGS84), when known.
    pub position: Option<GeoPoint>,
    /// Free text from the file.
    pub note: Option<String>,
    /// Its line in the file (the header is line 1).
    pub line: u64,
}

/// Watts to dBm.
pub fn watts_to_dbm(watts: f64) -> f64 {
    10.0 * watts.log10() + 30.0
}
