//! Predicted product levels: the field each emitter sets up at a junction, how a junction
//! (or a transmitter, or the receiver itself) turns those fields into a product, and how
//! much of the product falls inside the receive channel.
//!
//! **Drive.** Each emitter drives the junction by its field strength there, in free
//! space (ITU-R P.525): e = √(30·p)/d (V/m, W, m), i.e. E = P(dBW) − 20·log10(d/km) +
//! 74.77 dB(µV/m), with p the EIRP = ERP + 2.15 dB (a half-wave dipole's gain over an
//! isotropic antenna). d is the slant distance from the antenna (at its `height_m`, when
//! given) to the junction (at [`LevelModel::junction_height_m`]), terrain taken as flat.
//! The structure round the junction takes from the field the power an aperture of
//! [`LevelModel::coupling_aperture_m2`] would, the same at every frequency: equal fields
//! give equal drive, whatever the band.
//!
//! **Near field.** Inside the far-field distance r_ff = 2D²/λ of an antenna of length D
//! ([`LevelModel::antenna_length_m`]) the field of a collinear array is taken as
//! cylindrical, power density falling as 1/d (the cylindrical model of FCC OET Bulletin
//! 65, from memory), joined continuously to the far field at r_ff. Distances inside the
//! reactive near field, λ/2π (common practice), are raised to it: nothing is predicted
//! closer.
//!
//! **Junction (passive IM).** Described as the trade measures it: the third-order
//! two-tone product 2f₁ − f₂ of two +43 dBm (20 W) tones, in dBc of one tone (the
//! IEC 62037-1 test condition; [`LevelModel::im3_dbc`]). Below that drive the product
//! follows a power law referred to those tones,
//!
//! `P_law = L₃ + F + Σ α·|kᵢ|·(Pᵢ − P_ref) − s·(n − 3) − e·[n even]`,
//!
//! bending smoothly to a passive ceiling: a positive nonlinear resistance converts at most
//! 1/n² of its drive into the n-th harmonic (C. H. Page, "Harmonic generation with ideal
//! rectifiers", Proc. IRE 46, 1958; from memory), so no n-th-order product stands above
//! the weakest drive less 20·log10(n) dB, C = min Pᵢ − 20·log10(n). The level is the
//! power sum of the two as losses, `P_p = −10·log10(10^(−P_law/10) + 10^(−C/10))`: the
//! law where it is far below the ceiling, 3 dB under both where they meet, never above C.
//!
//! - L₃ = P_ref + [`LevelModel::im3_dbc`]: the third-order two-tone product of two tones
//!   of P_ref = +43 dBm each. Default −90 dBc, a corroded joint: good connectors and
//!   cable assemblies measure −150 to −165 dBc, loose, corroded or ferrous hardware about
//!   −80 to −120 dBc (IEC 62037-1 test practice; common practice, from memory);
//! - F = 20·log10(M/M₂(n)), M = n!/Π|kᵢ|! the multinomial coefficient of the product's
//!   term in the expansion of (Σ xᵢ)ⁿ, M₂(n) that of the two-tone product of the same
//!   order (⌈n/2⌉, ⌊n/2⌋): f₁ + f₂ − f₃ stands 6.02 dB above 2f₁ − f₂, 2f₁ + f₂ − 2f₃
//!   9.54 dB above 3f₁ − 2f₂ (an ideal memoryless nonlinearity a·xⁿ driven by equal tones);
//! - α: the drive exponent, 1 for the ideal law (an n-th-order product rises n dB per dB
//!   of its tones; Pozar, *Microwave Engineering*); a measured slope sets it (an IM3
//!   slope of 2.1 dB/dB is α = 0.7);
//! - s: the step per order above the third at the reference drive;
//! - e: the even-order penalty. Metal–oxide–metal contacts are nearly symmetric and make
//!   mainly odd orders; even orders need a rectifying junction (Bond, Guenzer &
//!   Carosella, Proc. IEEE 67, 1979; from memory).
//!
//! **Bound for pruning.** With α ≥ 0 every mechanism's level is a non-decreasing function
//! of each emitter's drive (field strength at the junction, or the power it brings to a
//! transmitter or receiver): the drive enters only through the terms α·|kᵢ|·Pᵢ, |kᵢ|·Pᵢ,
//! min Pᵢ or the coupled power, all non-decreasing, and the power sum of non-decreasing
//! terms is non-decreasing. The ceiling only lowers a level, so an upper bound on the
//! drives (the strongest field any emitter can set up, at its near-field floor) bounds a
//! product's level exactly through the law alone: L₃ + F_max(n) + α·n·(P_max − P_ref) −
//! s·(n − 3) − e·[n even], with F_max(n) the largest form weight of order n.
//!
//! **Other mechanisms.** [`Mechanism::Transmitter`]: one emitter's harmonic, levelled at
//! the ITU-R SM.329 category A spurious limit of its service ([`Service`]; from memory):
//! land mobile and the rest 43 + 10·log10(P/W) dB or 70 dBc, whichever is less
//! stringent; FM broadcast 46 + 10·log10(P/W) dB or 70 dBc, and no more than 1 mW;
//! television 46 + 10·log10(P/W) dB or 60 dBc, and no more than 1 mW; MF/HF (AM)
//! broadcast 50 dBc and no more than 50 mW. P is taken as the ERP (the transmitter power
//! and the antenna's gain at the harmonic are unknown): an upper figure for a compliant
//! transmitter. [`Mechanism::TransmitterIm`]: 2f_A − f_B made in A's output stage from
//! B's signal coupled through the isolation between the antennas (free-space loss between
//! dipoles, never below [`LevelModel::min_antenna_isolation_db`]), a conversion loss below
//! the coupled level ([`LevelModel::tx_conversion_loss_db`]; common practice, from
//! memory: a few to about 20 dB). An output network passes only its own band: where B's
//! carrier or the product lies more than [`TX_BAND_FRACTION`] of A's frequency from A,
//! each is taken [`LevelModel::tx_out_of_band_rejection_db`] down (common practice, from
//! memory: a transmitter's harmonic filter and matching network reject other bands by
//! tens of dB). [`Mechanism::Receiver`]: third-order products made in the receiver from
//! the carriers at its antenna, P = Σ|kᵢ|·Pᵢ − 2·IIP3 + F (Pozar; Razavi, *RF
//! Microelectronics*), only when an IIP3 is given, and only below compression: a
//! third-order law's input 1 dB compression point lies about 9.6 dB below IIP3 (Razavi);
//! a carrier above it overloads the receiver, and no level is given. A front-end filter
//! ([`RxFilter`], a duplexer's or cavity's rejection by offset) lowers each carrier at
//! the input first; without one none is assumed, and the receiver's own products are an
//! upper figure.
//!
//! **Channel.** Each emitter's spectrum is taken as Gaussian, by the class of its
//! emission ([`Shape`]): analogue FM (voice, broadcast) with the deviation's part of
//! Carson's bandwidth, B − 2M, as its 99 % width (σ = (B − 2M)/5.152: for FM the spectrum
//! follows the instantaneous frequency, Woodward's theorem); FSK paging and narrowband
//! digital with their necessary bandwidth B; an unmodulated carrier and an AM broadcast
//! (whose carrier holds most of its power) count as a line.
//! Independent modulations convolve, so a product's width is the root-sum-square of
//! |kᵢ|·Bᵢ (J. R. Carson, 1922, for an FM signal's width; for FM the spectrum follows the
//! instantaneous frequency, Σkᵢ·fᵢ(t), whose variance adds), and the fraction inside the
//! receive channel counts. A product without width counts fully inside the channel and
//! not at all outside it (a floor of −120 dB keeps the order total). The landing test of
//! the search keeps the linear span Σ|kᵢ|·Bᵢ, an outer reach.
//!
//! The defaults are order-of-magnitude figures: real joints differ by tens of dB. A heard
//! level calibrates them (see [`crate::rank`]).

use serde::Serialize;
use statrs::function::erf::erf;

use crate::emitter::Emitter;
use crate::freq::Hz;
use crate::geo::{distance_m, GeoPoint};

/// Speed of light in vacuum, m/s.
pub const SPEED_OF_LIGHT_M_S: f64 = 299_792_458.0;

/// Gain of a half-wave dipole over an isotropic antenna, dB: EIRP = ERP + 2.15 dB.
pub const DIPOLE_GAIN_DBI: f64 = 2.15;

/// 10·log10(120π): the impedance of free space in dB(Ω).
const FREE_SPACE_IMPEDANCE_DB: f64 = 25.763_084_3;

/// The fraction of a product in the channel is never taken below this (−120 dB).
pub const MIN_CHANNEL_FRACTION: f64 = 1e-12;

/// The lowest level a prediction is shown at, dBm: thermal noise at 290 K is −174 dBm in
/// 1 Hz, and a level 26 dB under that in 1 Hz is beyond any receiver. The power law,
/// extrapolated far below its drive, predicts levels under it; outputs show them at this
/// floor, marked (the ranking keeps the model's values, so that it stays exact).
pub const LEVEL_FLOOR_DBM: f64 = -200.0;

/// The IEC 62037-1 test tone, dBm (two carriers of 20 W): the drive a junction's
/// strength is stated at.
pub const IEC_62037_TONE_DBM: f64 = 43.0;

/// How far below IIP3 a third-order law's input 1 dB compression point lies, dB
/// (20·log10 of √(0.145)…: 9.64 dB; Razavi, *RF Microelectronics*).
pub const P1DB_BELOW_IIP3_DB: f64 = 9.64;

/// A transmitter's output network passes signals within this fraction of its own
/// frequency (±10 %: its band; common practice, from memory).
pub const TX_BAND_FRACTION: f64 = 0.10;

/// The service of an emitter, for its spurious-emission limit (ITU-R SM.329).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Service {
    /// Land mobile, paging, fixed and every service not named below.
    LandMobile,
    /// FM sound broadcasting.
    FmBroadcast,
    /// Television broadcasting.
    TvBroadcast,
    /// MF/HF (AM) sound broadcasting.
    AmBroadcast,
}

impl Service {
    /// The service an emitter list's `kind` names (`fm`, `am`, `tv` and words with
    /// `broadcast`); anything else is land mobile.
    pub fn of_kind(kind: Option<&str>) -> Service {
        let k = kind.unwrap_or("").to_ascii_lowercase();
        let has = |w: &str| {
            k.split(|c: char| !c.is_ascii_alphanumeric())
                .any(|x| x == w)
        };
        if has("am") || k.contains("am broadcast") || k.contains("mediumwave") {
            Service::AmBroadcast
        } else if has("tv") || k.contains("television") {
            Service::TvBroadcast
        } else if has("fm") || k.contains("broadcast") {
            Service::FmBroadcast
        } else {
            Service::LandMobile
        }
    }

    /// ERP less the SM.329 category A attenuation, with the absolute cap where the
    /// service has one (module docs; from memory), dBm.
    pub fn spurious_limit_erp_dbm(self, erp_dbm: f64) -> f64 {
        let log_p = erp_dbm - 30.0; // 10·log10(P/W)
        match self {
            Service::LandMobile => erp_dbm - (43.0 + log_p).min(70.0),
            Service::FmBroadcast => (erp_dbm - (46.0 + log_p).min(70.0)).min(0.0),
            Service::TvBroadcast => (erp_dbm - (46.0 + log_p).min(60.0)).min(0.0),
            Service::AmBroadcast => (erp_dbm - 50.0).min(10.0 * 50f64.log10()),
        }
    }
}

/// The highest modulating frequency of analogue FM voice, Hz (Carson's M).
pub const FM_VOICE_TOP_HZ: i64 = 3_000;

/// The highest modulating frequency of FM broadcast sound, Hz.
pub const FM_BROADCAST_TOP_HZ: i64 = 15_000;

/// How an emission's power spreads about its carrier, for the share in a channel.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Shape {
    /// Analogue FM voice: Gaussian, the necessary bandwidth (Carson's rule) as 99 %.
    FmVoice,
    /// FSK data and paging: Gaussian over the necessary bandwidth.
    FskData,
    /// Narrowband digital voice or data: Gaussian over the necessary bandwidth.
    NarrowDigital,
    /// FM broadcast: Gaussian over the necessary bandwidth.
    FmBroadcast,
    /// AM broadcast: the carrier holds most of the power; counted as a line.
    AmBroadcast,
    /// An unmodulated carrier: a line.
    Unmodulated,
}

impl Shape {
    /// The shape an emitter list's `kind` implies when no emission class is given:
    /// `am` a line, `fm` FM broadcast, `paging` FSK, `digital`/`dmr`/`p25` narrowband
    /// digital, `cw`/`beacon`/`unmodulated` a line, anything else analogue FM voice.
    pub fn of_kind(kind: Option<&str>) -> Shape {
        let k = kind.unwrap_or("").to_ascii_lowercase();
        let has = |w: &str| {
            k.split(|c: char| !c.is_ascii_alphanumeric())
                .any(|x| x == w)
        };
        match Service::of_kind(kind) {
            Service::AmBroadcast => Shape::AmBroadcast,
            Service::FmBroadcast | Service::TvBroadcast => Shape::FmBroadcast,
            Service::LandMobile if has("paging") || has("pager") || has("fsk") => Shape::FskData,
            Service::LandMobile
                if has("digital") || has("dmr") || has("p25") || has("tetra") || has("nxdn") =>
            {
                Shape::NarrowDigital
            }
            Service::LandMobile
                if has("cw") || has("beacon") || has("unmodulated") || has("carrier") =>
            {
                Shape::Unmodulated
            }
            Service::LandMobile => Shape::FmVoice,
        }
    }

    /// The shape of an emitter's emission: its modulation class (from an emission
    /// designator or a `modulation` column) where the list gives one, else its `kind`'s
    /// ([`Shape::of_kind`]).
    pub fn of_emitter(e: &Emitter) -> Shape {
        use crate::emission::ModulationClass as M;
        match e.modulation {
            Some(M::FmVoice) => Shape::FmVoice,
            Some(M::FskData) => Shape::FskData,
            Some(M::NarrowDigital | M::WideDigital | M::Other) => Shape::NarrowDigital,
            Some(M::AmBroadcast) => Shape::AmBroadcast,
            // AM and SSB telephony carry little carrier: their power spreads over B
            Some(M::AmVoice | M::SsbVoice) => Shape::NarrowDigital,
            Some(M::FmBroadcast) => Shape::FmBroadcast,
            Some(M::Unmodulated) => Shape::Unmodulated,
            None => Shape::of_kind(e.kind.as_deref()),
        }
    }

    /// The width that spreads the emission's power for the channel share (the 99 % width
    /// of its Gaussian): for analogue FM the spectrum follows the deviation (Woodward's
    /// theorem, P. M. Woodward, 1952; from memory), so of Carson's B = 2(D + M) only the
    /// deviation's part B − 2M spreads it (M = 3 kHz voice, 15 kHz broadcast sound; at
    /// least B/3); FSK and digital emissions their necessary bandwidth; none for a line.
    pub fn spread(self, bandwidth: Hz) -> Hz {
        let b = bandwidth.0;
        match self {
            Shape::AmBroadcast | Shape::Unmodulated => Hz(0),
            Shape::FmVoice => Hz((b - 2 * FM_VOICE_TOP_HZ).max(b / 3)),
            Shape::FmBroadcast => Hz((b - 2 * FM_BROADCAST_TOP_HZ).max(b / 3)),
            Shape::FskData | Shape::NarrowDigital => bandwidth,
        }
    }
}

/// How the calibrated junction compares with real joints at the IEC 62037-1 condition.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Plausibility {
    /// Within the range of corroded, loose or ferrous hardware, or weaker.
    Plausible,
    /// Stronger than corroded hardware usually measures, but not beyond a passive contact.
    Unlikely,
    /// Stronger than any corroded joint, or above the passive ceiling.
    Implausible,
}

/// Free-space basic transmission loss in dB (ITU-R P.525): 20·log10(4πd/λ).
///
/// ```
/// let l = pim_core::level::free_space_loss_db(100e6, 1000.0);
/// assert!((l - 72.45).abs() < 0.01);
/// ```
pub fn free_space_loss_db(freq_hz: f64, distance_m: f64) -> f64 {
    20.0 * (4.0 * std::f64::consts::PI * distance_m * freq_hz / SPEED_OF_LIGHT_M_S).log10()
}

/// Wavelength in metres.
pub fn wavelength_m(freq_hz: f64) -> f64 {
    SPEED_OF_LIGHT_M_S / freq_hz
}

/// Far-field strength in dB(µV/m) of `eirp_dbm` at `distance_m` (ITU-R P.525:
/// e = √(30·p)/d).
///
/// ```
/// // 1 kW EIRP at 1 km: 104.77 dB(µV/m), 0.173 V/m.
/// let e = pim_core::level::field_strength_dbuv_m(60.0, 1000.0);
/// assert!((e - 104.77).abs() < 0.01);
/// ```
pub fn field_strength_dbuv_m(eirp_dbm: f64, distance_m: f64) -> f64 {
    // 20·log10(√(30·p)/d) + 120 with p in W: 10·log10 p + 10·log10 30 − 20·log10 d + 120.
    (eirp_dbm - 30.0) + 10.0 * 30f64.log10() - 20.0 * distance_m.log10() + 120.0
}

/// The power an aperture of `aperture_m2` takes from a plane wave of `field_dbuv_m`, dBm:
/// S = E²/120π.
pub fn coupled_power_dbm(field_dbuv_m: f64, aperture_m2: f64) -> f64 {
    field_dbuv_m - 120.0 - FREE_SPACE_IMPEDANCE_DB + 30.0 + 10.0 * aperture_m2.log10()
}

/// Where the junction lies in an emitter's field.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum FieldRegion {
    /// Beyond 2D²/λ: e = √(30·p)/d.
    Far,
    /// Between λ/2π and 2D²/λ: cylindrical, power density falling as 1/d.
    Cylindrical,
    /// Inside λ/2π: the distance was raised to λ/2π.
    Reactive,
}

/// The field one emitter sets up at the junction, with the terms that make it up.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct Incidence {
    /// The emitter's ERP, dBm (dipole-referenced).
    pub erp_dbm: f64,
    /// EIRP = ERP + 2.15 dB, dBm.
    pub eirp_dbm: f64,
    /// Ground distance from the emitter to the junction, m.
    pub ground_distance_m: f64,
    /// Slant distance (heights included), m.
    pub distance_m: f64,
    /// Which field region the junction lies in (far field, cylindrical near field, reactive).
    pub region: FieldRegion,
    /// Field strength at the junction, dB(µV/m).
    pub field_dbuv_m: f64,
    /// The distance the field was worked out at, m: the slant distance, or λ/2π when
    /// the junction lies inside the reactive near field (nothing closer is predicted).
    pub distance_used_m: f64,
    /// Free-space loss at the distance used, dB (for reference).
    pub path_loss_db: f64,
    /// The drive: the power the coupling aperture takes from the field, dBm.
    pub incident_dbm: f64,
}

/// The path from where a product is made to the receiver.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct PathToReceiver {
    /// Free-space loss less the receiving antenna's gain, dB.
    pub loss_db: f64,
    /// The slant distance from the source to the receiver, m.
    pub distance_m: f64,
    /// When the distance is under λ/2π, the loss is taken at λ/2π (m): nothing closer is
    /// predicted.
    pub floor_m: Option<f64>,
}

/// Slant distance between two points at heights above flat ground.
pub fn slant_distance_m(ground_m: f64, height_a_m: f64, height_b_m: f64) -> f64 {
    ground_m.hypot(height_a_m - height_b_m)
}

/// The field strength at `distance_m` from an antenna of length `antenna_length_m`
/// radiating `eirp_dbm` at `freq_hz`, with the near-field rule of the module docs.
pub fn field_with_near_field_rule(
    eirp_dbm: f64,
    freq_hz: f64,
    distance_m: f64,
    antenna_length_m: f64,
) -> (f64, FieldRegion, f64) {
    let lambda = wavelength_m(freq_hz);
    let reactive = lambda / (2.0 * std::f64::consts::PI);
    let far = 2.0 * antenna_length_m * antenna_length_m / lambda;
    let (d, mut region) = if distance_m < reactive {
        (reactive, FieldRegion::Reactive)
    } else {
        (distance_m, FieldRegion::Far)
    };
    if d >= far {
        return (field_strength_dbuv_m(eirp_dbm, d), region, d);
    }
    if region == FieldRegion::Far {
        region = FieldRegion::Cylindrical;
    }
    // Power density ∝ 1/d inside r_ff, equal to the far field at r_ff.
    let e = field_strength_dbuv_m(eirp_dbm, far) + 10.0 * (far / d).log10();
    (e, region, d)
}

/// The product's form weight F = 20·log10(M/M₂(n)) in dB (module docs).
pub fn form_weight_db(coefficients: &[u32]) -> f64 {
    let n: u32 = coefficients.iter().sum();
    if n == 0 {
        return 0.0;
    }
    let ln_fact = |m: u32| -> f64 { (1..=m).map(|i| (i as f64).ln()).sum() };
    let ln_m = ln_fact(n) - coefficients.iter().map(|&k| ln_fact(k)).sum::<f64>();
    let ln_m2 = ln_fact(n) - ln_fact(n.div_ceil(2)) - ln_fact(n / 2);
    20.0 * (ln_m - ln_m2) / std::f64::consts::LN_10
}

/// The fraction of a product's power inside the receive channel (module docs).
pub fn channel_fraction(offset: Hz, product_bandwidth: Hz, rx_bandwidth: Hz) -> f64 {
    let off = offset.0 as f64;
    let half_rx = rx_bandwidth.0 as f64 / 2.0;
    let f = if product_bandwidth.0 <= 0 {
        if off.abs() <= half_rx {
            1.0
        } else {
            0.0
        }
    } else {
        let sigma = product_bandwidth.0 as f64 / (2.0 * 2.575_829_3);
        let cdf = |x: f64| 0.5 * (1.0 + erf(x / (sigma * std::f64::consts::SQRT_2)));
        if rx_bandwidth.0 <= 0 {
            // A channel without width: count the product whole where it covers the channel.
            if off.abs() <= product_bandwidth.0 as f64 / 2.0 {
                1.0
            } else {
                0.0
            }
        } else {
            cdf(half_rx - off) - cdf(-half_rx - off)
        }
    };
    f.max(MIN_CHANNEL_FRACTION)
}

/// How a product is made.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Mechanism {
    /// Passive intermodulation in a corroded or loose joint.
    Junction,
    /// One emitter's own harmonic (spurious output).
    Transmitter,
    /// Made in one transmitter's output stage from another's signal.
    TransmitterIm,
    /// Made in the receiver from the carriers at its antenna.
    Receiver,
}

/// The level model: every parameter with its default and source (module docs).
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct LevelModel {
    /// L₃: third-order two-tone product (2f₁ − f₂) from two tones of
    /// `reference_tone_dbm` each, dBm. Default −47 dBm: −90 dBc at two +43 dBm tones, a
    /// corroded joint (module docs); [`LevelModel::with_im3_dbc`] sets it.
    pub im3_dbm: f64,
    /// P_ref: the drive of each reference tone (coupled power), dBm: +43 dBm, the
    /// IEC 62037-1 test condition.
    pub reference_tone_dbm: f64,
    /// s: further loss per order above the third at the reference drive, dB. Default 5
    /// (common practice, from memory).
    pub order_step_db: f64,
    /// e: penalty of even orders, dB. Default 20 (from memory; Bond, Guenzer & Carosella
    /// 1979 for the odd-order dominance of metal–oxide–metal contacts).
    pub even_order_penalty_db: f64,
    /// α: the drive exponent, 1 for the ideal law (n dB per dB at order n).
    pub drive_exponent: f64,
    /// The junction structure's coupling aperture, m², the same at every frequency.
    /// Default 1 m² (about a resonant VHF dipole's; assumed).
    pub coupling_aperture_m2: f64,
    /// Height of the junction (and of any point without a height) above flat ground, m.
    pub junction_height_m: f64,
    /// D: the length of a transmitting antenna, for the far-field distance 2D²/λ, m.
    /// Default 5 m (a VHF collinear; common practice).
    pub antenna_length_m: f64,
    /// Conversion loss of transmitter intermodulation below the coupled level, dB.
    /// Default 10 (common practice, from memory: a few to about 20 dB).
    pub tx_conversion_loss_db: f64,
    /// Least isolation between two transmitters' antennas, dB. Default 30 (common
    /// practice for antennas on one structure, from memory).
    pub min_antenna_isolation_db: f64,
    /// The receiver's input third-order intercept, dBm; the receiver mechanism is levelled
    /// only when it is given.
    pub rx_iip3_dbm: Option<f64>,
    /// Gain of the receiving antenna, dBi. Default 0.
    pub rx_antenna_gain_dbi: f64,
    /// A junction needing a third-order product above this at two +43 dBm tones (dBc) is
    /// implausible. Default −60 dBc: a junction needing much stronger is not a corroded
    /// joint (IEC 62037-1 test practice; common practice, from memory).
    pub max_im3_dbc: f64,
    /// A junction needing more than this (dBc at two +43 dBm tones), but not more than
    /// `max_im3_dbc`, is unlikely. Default −80 dBc, the strong end of corroded, loose or
    /// ferrous hardware (common practice, from memory).
    pub unlikely_im3_dbc: f64,
    /// Rejection of a transmitter's output network outside its band, dB
    /// ([`TX_BAND_FRACTION`]). Default 40 (common practice, from memory).
    pub tx_out_of_band_rejection_db: f64,
    /// The receiver's front-end selectivity (a duplexer's or cavity's rejection by a
    /// carrier's offset from the channel); none assumed when `None`.
    pub rx_filter: Option<RxFilter>,
    /// The width of what was heard, when said: a narrow steady carrier (a few kHz or
    /// less) or a wide noise-like hump. Candidates are then weighed by how well their
    /// spread matches it ([`width_mismatch_db`]).
    pub heard_width: Option<Hz>,
}

/// The most points an [`RxFilter`] holds.
pub const RX_FILTER_POINTS: usize = 32;

/// A receiver's front-end selectivity: the rejection (dB) of a carrier by its offset from
/// the receive channel (MHz), linear between the points given, the nearest point's
/// beyond them. It lowers the carriers at the receiver's input before its own products
/// are levelled and its compression judged.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct RxFilter {
    points: [(f64, f64); RX_FILTER_POINTS],
    len: usize,
}

impl RxFilter {
    /// A filter of `(offset MHz, rejection dB)` points: 1 to [`RX_FILTER_POINTS`] of
    /// them, offsets at least 0 and increasing, rejections at least 0 and finite.
    pub fn new(points: &[(f64, f64)]) -> std::result::Result<RxFilter, String> {
        if points.is_empty() || points.len() > RX_FILTER_POINTS {
            return Err(format!(
                "a filter needs 1 to {RX_FILTER_POINTS} points, not {}",
                points.len()
            ));
        }
        let mut out = [(0.0, 0.0); RX_FILTER_POINTS];
        for (i, &(off, rej)) in points.iter().enumerate() {
            if !(off.is_finite() && off >= 0.0 && rej.is_finite() && rej >= 0.0) {
                return Err(format!(
                    "point {}: offset and rejection must be finite and at least 0",
                    i + 1
                ));
            }
            if i > 0 && off <= points[i - 1].0 {
                return Err(format!("point {}: offsets must increase", i + 1));
            }
            out[i] = (off, rej);
        }
        Ok(RxFilter {
            points: out,
            len: points.len(),
        })
    }

    /// The rejection of a carrier `offset_mhz` from the channel (either side), dB.
    pub fn rejection_db(&self, offset_mhz: f64) -> f64 {
        let x = offset_mhz.abs();
        let p = &self.points[..self.len];
        if x <= p[0].0 {
            return p[0].1;
        }
        for w in p.windows(2) {
            let ((x0, y0), (x1, y1)) = (w[0], w[1]);
            if x <= x1 {
                return y0 + (y1 - y0) * (x - x0) / (x1 - x0);
            }
        }
        p[self.len - 1].1
    }
}

/// How far a product's spread is from the width heard, as a ranking penalty in dB: 10 dB
/// per decade of ratio between the two, each taken as at least 1 kHz (a steady carrier's
/// width on an analyser). Our rule: a product ten times wider or narrower than what was
/// heard ranks as if 10 dB weaker.
pub fn width_mismatch_db(spread: Hz, heard: Hz) -> f64 {
    let a = spread.0.max(1_000) as f64;
    let b = heard.0.max(1_000) as f64;
    10.0 * (a / b).log10().abs()
}

impl Default for LevelModel {
    fn default() -> Self {
        LevelModel {
            im3_dbm: IEC_62037_TONE_DBM - 90.0,
            reference_tone_dbm: IEC_62037_TONE_DBM,
            order_step_db: 5.0,
            even_order_penalty_db: 20.0,
            drive_exponent: 1.0,
            coupling_aperture_m2: 1.0,
            junction_height_m: 0.0,
            antenna_length_m: 5.0,
            tx_conversion_loss_db: 10.0,
            min_antenna_isolation_db: 30.0,
            rx_iip3_dbm: None,
            rx_antenna_gain_dbi: 0.0,
            max_im3_dbc: -60.0,
            unlikely_im3_dbc: -80.0,
            tx_out_of_band_rejection_db: 40.0,
            heard_width: None,
            rx_filter: None,
        }
    }
}

/// The former name of [`LevelModel`].
pub type JunctionModel = LevelModel;

/// The terms of a junction product's level, for a practitioner to check.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct JunctionTerms {
    /// L₃, dBm.
    pub im3_dbm: f64,
    /// F, dB.
    pub form_db: f64,
    /// Σ α·|kᵢ|·(Pᵢ − P_ref), dB.
    pub drive_db: f64,
    /// −s·(n − 3), dB.
    pub order_db: f64,
    /// −e for even orders, else 0, dB.
    pub even_order_db: f64,
    /// The power law's level, the sum of the terms above, dBm.
    pub law_dbm: f64,
    /// The passive ceiling: the weakest drive less 20·log10(n), dBm.
    pub ceiling_dbm: f64,
    /// The product's level at the junction, the law bent to the ceiling, dBm.
    pub level_dbm: f64,
}

/// −10·log10(10^(−a/10) + 10^(−b/10)): a smooth minimum, 3 dB under both where they
/// meet.
fn soft_min_db(a: f64, b: f64) -> f64 {
    let m = a.min(b);
    if m == f64::NEG_INFINITY {
        return m;
    }
    m - 10.0 * (1.0 + 10f64.powf(-(a.max(b) - m) / 10.0)).log10()
}

impl LevelModel {
    /// C(n) = L₃ − s·(n − 3) − n·P_ref, in dB (the ideal-law conversion term: the level
    /// is Σ|kᵢ|·Pᵢ + C(n) for a two-tone form with α = 1, even-order penalty aside).
    pub fn conversion_db(&self, order: u32) -> f64 {
        let n = order as f64;
        self.im3_dbm - self.order_step_db * (n - 3.0) - n * self.reference_tone_dbm
    }

    /// The model with the drive exponent a measured slope implies: an n-th-order product
    /// rising `slope_db_per_db` per dB of all its tones gives α = slope/n.
    pub fn with_measured_slope(self, slope_db_per_db: f64, order: u32) -> LevelModel {
        LevelModel {
            drive_exponent: (slope_db_per_db / order.max(1) as f64).max(0.0),
            ..self
        }
    }

    /// The junction product's level from `(|k|, drive dBm)` of each emitter.
    pub fn junction_level(&self, terms: &[(u32, f64)]) -> JunctionTerms {
        let ks: Vec<u32> = terms.iter().map(|t| t.0).collect();
        let n: u32 = ks.iter().sum();
        let form_db = form_weight_db(&ks);
        let drive_db: f64 = terms
            .iter()
            .map(|&(k, p)| self.drive_exponent * k as f64 * (p - self.reference_tone_dbm))
            .sum();
        let order_db = -self.order_step_db * (n as f64 - 3.0);
        let even_order_db = if n.is_multiple_of(2) {
            -self.even_order_penalty_db
        } else {
            0.0
        };
        let law_dbm = self.im3_dbm + form_db + drive_db + order_db + even_order_db;
        let ceiling_dbm = passive_ceiling_dbm(terms);
        JunctionTerms {
            im3_dbm: self.im3_dbm,
            form_db,
            drive_db,
            order_db,
            even_order_db,
            law_dbm,
            ceiling_dbm,
            level_dbm: soft_min_db(law_dbm, ceiling_dbm),
        }
    }

    /// The junction's third-order product at two +43 dBm tones, dBc (module docs).
    pub fn im3_dbc(&self) -> f64 {
        self.im3_dbm - self.reference_tone_dbm
    }

    /// The model with a junction of `dbc` at two tones of the reference drive.
    pub fn with_im3_dbc(self, dbc: f64) -> LevelModel {
        LevelModel {
            im3_dbm: self.reference_tone_dbm + dbc,
            ..self
        }
    }

    /// The junction strength (dBc at two reference tones) that would put the product of
    /// `terms` at `level_dbm` at the junction, or `None` when that level is at or above
    /// the passive ceiling, or would need a product above its own tones (over 0 dBc): no
    /// junction can make it.
    pub fn required_im3_dbc(&self, terms: &[(u32, f64)], level_dbm: f64) -> Option<f64> {
        let t = self.junction_level(terms);
        if !level_dbm.is_finite() || level_dbm >= t.ceiling_dbm {
            return None;
        }
        // P_law = −10·log10(10^(−L/10) − 10^(−C/10))
        let law =
            -10.0 * (10f64.powf(-level_dbm / 10.0) - 10f64.powf(-t.ceiling_dbm / 10.0)).log10();
        Some(self.im3_dbc() + (law - t.law_dbm)).filter(|&dbc| dbc <= 0.0)
    }

    /// How a required junction strength (dBc at two +43 dBm tones) compares with real
    /// joints; `None` (above the passive ceiling) is implausible.
    pub fn plausibility(&self, required_dbc: Option<f64>) -> Plausibility {
        match required_dbc {
            Some(d) if d <= self.unlikely_im3_dbc => Plausibility::Plausible,
            Some(d) if d <= self.max_im3_dbc => Plausibility::Unlikely,
            _ => Plausibility::Implausible,
        }
    }

    /// The input 1 dB compression point of the receiver, dBm, when an IIP3 is given.
    pub fn rx_p1db_dbm(&self) -> Option<f64> {
        self.rx_iip3_dbm.map(|iip3| iip3 - P1DB_BELOW_IIP3_DB)
    }

    /// The rejection of transmitter `a_hz`'s output network for a signal at `f_hz`, dB:
    /// none within its band ([`TX_BAND_FRACTION`]), else
    /// [`LevelModel::tx_out_of_band_rejection_db`].
    pub fn tx_band_rejection_db(&self, a_hz: f64, f_hz: f64) -> f64 {
        if (f_hz - a_hz).abs() <= TX_BAND_FRACTION * a_hz {
            0.0
        } else {
            self.tx_out_of_band_rejection_db
        }
    }

    /// The field one emitter sets up at `junction`, or `None` without ERP or location.
    pub fn incidence(&self, emitter: &Emitter, junction: GeoPoint) -> Option<Incidence> {
        emitter.erp_dbm?;
        self.incidence_over_ground(emitter, distance_m(emitter.position?, junction))
    }

    /// [`LevelModel::incidence`] with the emitter `ground` metres from the junction along
    /// the ground. The drive never rises with `ground`, so a lower bound on the distance
    /// gives an upper bound on the drive.
    pub fn incidence_over_ground(&self, emitter: &Emitter, ground: f64) -> Option<Incidence> {
        let erp_dbm = emitter.erp_dbm?;
        emitter.position?;
        let slant = slant_distance_m(
            ground,
            emitter.height_m.unwrap_or(self.junction_height_m),
            self.junction_height_m,
        );
        let eirp_dbm = erp_dbm + DIPOLE_GAIN_DBI;
        let f = emitter.freq.0 as f64;
        let (field, region, used) =
            field_with_near_field_rule(eirp_dbm, f, slant, self.antenna_length_m);
        Some(Incidence {
            erp_dbm,
            eirp_dbm,
            ground_distance_m: ground,
            distance_m: slant,
            region,
            field_dbuv_m: field,
            distance_used_m: used,
            path_loss_db: free_space_loss_db(f, used),
            incident_dbm: coupled_power_dbm(field, self.coupling_aperture_m2),
        })
    }

    /// The path loss from a source at `from` (height `from_height_m`) to `to` for a
    /// signal at `freq_hz`, with the distance raised to λ/2π, less the receiving
    /// antenna's gain.
    pub fn path_to_receiver_db(
        &self,
        freq_hz: f64,
        from: GeoPoint,
        from_height_m: Option<f64>,
        to: GeoPoint,
    ) -> f64 {
        self.path_to_receiver(freq_hz, from, from_height_m, to)
            .loss_db
    }

    /// [`LevelModel::path_to_receiver_db`] with the distance it was taken over and the
    /// floor, when one was applied.
    pub fn path_to_receiver(
        &self,
        freq_hz: f64,
        from: GeoPoint,
        from_height_m: Option<f64>,
        to: GeoPoint,
    ) -> PathToReceiver {
        self.path_over_ground(freq_hz, distance_m(from, to), from_height_m)
    }

    /// [`LevelModel::path_to_receiver`] from a source `ground` metres from the receiver
    /// along the ground.
    pub fn path_over_ground(
        &self,
        freq_hz: f64,
        ground: f64,
        from_height_m: Option<f64>,
    ) -> PathToReceiver {
        let slant = slant_distance_m(
            ground,
            from_height_m.unwrap_or(self.junction_height_m),
            self.junction_height_m,
        );
        let floor = wavelength_m(freq_hz) / (2.0 * std::f64::consts::PI);
        PathToReceiver {
            loss_db: free_space_loss_db(freq_hz, slant.max(floor)) - self.rx_antenna_gain_dbi,
            distance_m: slant,
            floor_m: (slant < floor).then_some(floor),
        }
    }

    /// EIRP of a harmonic at the ITU-R SM.329 category A limit of `service`, dBm
    /// (module docs).
    pub fn spurious_limit_eirp_dbm(&self, erp_dbm: f64, service: Service) -> f64 {
        service.spurious_limit_erp_dbm(erp_dbm) + DIPOLE_GAIN_DBI
    }

    /// The highest [`LevelModel::spurious_limit_eirp_dbm`] of any service, dBm: a bound
    /// for a search that does not look at the service.
    pub fn spurious_limit_eirp_bound_dbm(&self, erp_dbm: f64) -> f64 {
        [
            Service::LandMobile,
            Service::FmBroadcast,
            Service::TvBroadcast,
            Service::AmBroadcast,
        ]
        .into_iter()
        .map(|s| self.spurious_limit_eirp_dbm(erp_dbm, s))
        .fold(f64::NEG_INFINITY, f64::max)
    }

    /// EIRP of 2f_A − f_B made in A's output stage, from B's ERP and the distance
    /// between the antennas (module docs), dBm.
    pub fn transmitter_im_eirp_dbm(
        &self,
        coupled_erp_dbm: f64,
        coupled_freq_hz: f64,
        distance_m: f64,
    ) -> f64 {
        let floor = wavelength_m(coupled_freq_hz) / (2.0 * std::f64::consts::PI);
        let isolation = (free_space_loss_db(coupled_freq_hz, distance_m.max(floor))
            - 2.0 * DIPOLE_GAIN_DBI)
            .max(self.min_antenna_isolation_db);
        coupled_erp_dbm - isolation - self.tx_conversion_loss_db + DIPOLE_GAIN_DBI
    }
}

/// The passive ceiling of a product of `terms` (`(|k|, drive dBm)`): the weakest drive
/// less 20·log10(n) (module docs).
pub fn passive_ceiling_dbm(terms: &[(u32, f64)]) -> f64 {
    let n: u32 = terms.iter().map(|t| t.0).sum();
    let weakest = terms
        .iter()
        .filter(|t| t.0 > 0)
        .map(|t| t.1)
        .fold(f64::INFINITY, f64::min);
    weakest - 20.0 * (n.max(1) as f64).log10()
}

/// The width that spreads a product's power, Hz: the root-sum-square of |kᵢ|·Bᵢ over
/// its emitters' spreads ([`Shape::spread`]).
pub fn product_spread(terms: impl Iterator<Item = (u32, Hz)>) -> Hz {
    let sum: f64 = terms
        .map(|(k, b)| {
            let w = k as f64 * b.0 as f64;
            w * w
        })
        .sum();
    Hz(sum.sqrt().round() as i64)
}

/// Frequency-only helper for callers holding a bare carrier: the coupled drive (dBm,
/// 1 m², far field, no heights) of `erp_dbm` at `distance_m`.
pub fn incident_dbm(erp_dbm: f64, _freq: Hz, distance_m: f64) -> f64 {
    coupled_power_dbm(
        field_strength_dbuv_m(erp_dbm + DIPOLE_GAIN_DBI, distance_m),
        1.0,
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn reference_tones_give_the_reference_level() {
        let m = LevelModel::default();
        let p = m.junction_level(&[(2, m.reference_tone_dbm), (1, m.reference_tone_dbm)]);
        // −90 dBc lies 80 dB under the ceiling there: the law holds to 1e-6 dB.
        assert!((p.level_dbm - m.im3_dbm).abs() < 1e-6);
        assert!((m.im3_dbc() + 90.0).abs() < 1e-12);
        let p5 = m.junction_level(&[(3, m.reference_tone_dbm), (2, m.reference_tone_dbm)]);
        assert!((p5.level_dbm - (m.im3_dbm - 10.0)).abs() < 1e-6);
        // The ideal law and the conversion term agree.
        let q = m.junction_level(&[(2, -7.0), (1, -3.0)]);
        assert!((q.level_dbm - (2.0 * -7.0 - 3.0 + m.conversion_db(3))).abs() < 1e-9);
    }

    #[test]
    fn the_law_bends_to_the_passive_ceiling() {
        // A junction of −10 dBc at +43 dBm: the law would put 2A − B at +33 dBm from two
        // +43 dBm drives; the ceiling (43 − 9.54 dB) holds it 3 dB under where they meet.
        let m = LevelModel::default().with_im3_dbc(-10.0);
        let t = m.junction_level(&[(2, 43.0), (1, 43.0)]);
        assert!((t.ceiling_dbm - (43.0 - 20.0 * 3f64.log10())).abs() < 1e-9);
        assert!(t.level_dbm < t.ceiling_dbm && t.level_dbm < t.law_dbm);
        // Far above the ceiling the level is the ceiling.
        let hot = LevelModel::default().with_im3_dbc(60.0);
        let t = hot.junction_level(&[(2, 20.0), (1, 10.0)]);
        assert!((t.level_dbm - t.ceiling_dbm).abs() < 0.05, "{t:?}");
    }

    #[test]
    fn the_required_junction_inverts_the_level() {
        let m = LevelModel::default();
        let terms = [(2, 5.0), (1, -2.0)];
        let l = m.junction_level(&terms).level_dbm;
        let need = m.required_im3_dbc(&terms, l + 20.0).unwrap();
        let back = m.with_im3_dbc(need).junction_level(&terms).level_dbm;
        assert!((back - (l + 20.0)).abs() < 1e-6, "{back} {l}");
        // At or above the ceiling no junction makes it.
        let c = m.junction_level(&terms).ceiling_dbm;
        assert_eq!(m.required_im3_dbc(&terms, c), None);
        assert_eq!(m.plausibility(None), Plausibility::Implausible);
        assert_eq!(m.plausibility(Some(-95.0)), Plausibility::Plausible);
        assert_eq!(m.plausibility(Some(-70.0)), Plausibility::Unlikely);
        assert_eq!(m.plausibility(Some(-40.0)), Plausibility::Implausible);
    }

    #[test]
    fn a_measured_slope_sets_the_exponent() {
        let m = LevelModel::default().with_measured_slope(2.1, 3);
        assert!((m.drive_exponent - 0.7).abs() < 1e-12);
        let a = m.junction_level(&[(2, -10.0), (1, -10.0)]).level_dbm;
        let b = m.junction_level(&[(2, -9.0), (1, -9.0)]).level_dbm;
        assert!((b - a - 2.1).abs() < 1e-9);
    }

    #[test]
    fn form_weights_are_multinomial_ratios() {
        assert!(form_weight_db(&[2, 1]).abs() < 1e-12);
        assert!((form_weight_db(&[1, 1, 1]) - 20.0 * 2f64.log10()).abs() < 1e-9);
        assert!((form_weight_db(&[2, 1, 2]) - 20.0 * 3f64.log10()).abs() < 1e-9);
    }

    #[test]
    fn channel_fraction_favours_the_centred_product() {
        let on = channel_fraction(Hz(0), Hz(48_000), Hz(12_500));
        let off = channel_fraction(Hz(175_000), Hz(411_000), Hz(12_500));
        assert!(on > 0.4 && on < 0.6, "{on}");
        assert!(off < 0.01, "{off}");
        assert_eq!(channel_fraction(Hz(0), Hz(0), Hz(12_500)), 1.0);
        assert_eq!(
            channel_fraction(Hz(7_000), Hz(0), Hz(12_500)),
            MIN_CHANNEL_FRACTION
        );
    }

    #[test]
    fn near_field_rule_is_continuous_and_monotone() {
        let r_ff = 2.0 * 25.0 / wavelength_m(150e6);
        let (e_far, r, _) = field_with_near_field_rule(60.0, 150e6, r_ff, 5.0);
        assert_eq!(r, FieldRegion::Far);
        let (e_in, r2, _) = field_with_near_field_rule(60.0, 150e6, r_ff - 1e-3, 5.0);
        assert_eq!(r2, FieldRegion::Cylindrical);
        assert!((e_far - e_in).abs() < 1e-3);
        let (e10, _, _) = field_with_near_field_rule(60.0, 150e6, 10.0, 5.0);
        // Power density ∝ 1/d inside r_ff, not the far field's 1/d².
        assert!((e10 - e_far - 10.0 * (r_ff / 10.0).log10()).abs() < 1e-6);
        let (_, r3, used) = field_with_near_field_rule(60.0, 830e3, 10.0, 5.0);
        assert_eq!(r3, FieldRegion::Reactive);
        assert!((used - wavelength_m(830e3) / (2.0 * std::f64::consts::PI)).abs() < 1e-9);
    }

    #[test]
    fn spurious_limit_follows_sm329() {
        let m = LevelModel::default();
        // 100 W: 43 + 20 = 63 dB below 50 dBm is −13 dBm ERP.
        let lm = Service::LandMobile;
        assert!((m.spurious_limit_eirp_dbm(50.0, lm) - (-13.0 + DIPOLE_GAIN_DBI)).abs() < 1e-9);
        // 50 kW: capped at 70 dBc.
        let erp = 10.0 * 50_000f64.log10() + 30.0;
        assert!((m.spurious_limit_eirp_dbm(erp, lm) - (erp - 70.0 + DIPOLE_GAIN_DBI)).abs() < 1e-9);
        // FM broadcast of 20 kW: 70 dBc would leave +3 dBm; the 1 mW cap holds.
        let fm = 10.0 * 20_000f64.log10() + 30.0;
        assert!((Service::FmBroadcast.spurious_limit_erp_dbm(fm) - 0.0).abs() < 1e-9);
        // AM broadcast of 5 kW: 50 dBc is +17 dBm, at the 50 mW cap.
        let am = 10.0 * 5_000f64.log10() + 30.0;
        assert!((Service::AmBroadcast.spurious_limit_erp_dbm(am) - (am - 50.0)).abs() < 1e-9);
        for s in [
            Service::LandMobile,
            Service::FmBroadcast,
            Service::AmBroadcast,
        ] {
            assert!(m.spurious_limit_eirp_dbm(am, s) <= m.spurious_limit_eirp_bound_dbm(am));
        }
        assert_eq!(Service::of_kind(Some("am")), Service::AmBroadcast);
        assert_eq!(Service::of_kind(Some("FM broadcast")), Service::FmBroadcast);
        assert_eq!(Service::of_kind(Some("paging")), Service::LandMobile);
        assert_eq!(Shape::of_kind(Some("paging")), Shape::FskData);
        assert_eq!(Shape::of_kind(Some("repeater")), Shape::FmVoice);
        assert_eq!(Shape::of_kind(Some("am")).spread(Hz(10_000)), Hz(0));
    }

    #[test]
    fn widths_add_in_quadrature() {
        // 2A − B of two 16 kHz emissions: √(32² + 16²) = 35.78 kHz, not 48 kHz.
        let w = product_spread([(2, Hz(16_000)), (1, Hz(16_000))].into_iter());
        assert_eq!(w, Hz(35_777));
        // 16K0F3E: D = 5 kHz, M = 3 kHz; the deviation spreads 10 kHz
        assert_eq!(Shape::FmVoice.spread(Hz(16_000)), Hz(10_000));
        assert_eq!(Shape::FskData.spread(Hz(16_000)), Hz(16_000));
        assert_eq!(Shape::FmBroadcast.spread(Hz(180_000)), Hz(150_000));
    }

    proptest::proptest! {
        // A fixed seed and no regression files: the same cases on every run and machine.
        #![proptest_config(proptest::test_runner::Config {
            rng_seed: proptest::test_runner::RngSeed::Fixed(20_261_201),
            failure_persistence: None,
            ..proptest::test_runner::Config::default()
        })]
        /// The bound the search may prune by: the level never falls as a drive rises, and
        /// the field never rises with distance.
        #[test]
        fn level_is_monotone_in_each_drive(
            k in proptest::collection::vec(1u32..6, 1..4),
            drives in proptest::collection::vec(-60.0f64..30.0, 3),
            bump in 0.0f64..20.0,
            which in 0usize..3,
            alpha in 0.0f64..1.5,
            d in 0.01f64..5_000.0,
            f in 100e3f64..3e9,
        ) {
            let m = LevelModel { drive_exponent: alpha, ..LevelModel::default() };
            let terms: Vec<(u32, f64)> = k.iter().zip(&drives).map(|(&k, &p)| (k, p)).collect();
            let mut raised = terms.clone();
            let i = which % raised.len();
            raised[i].1 += bump;
            let (lo, hi) = (m.junction_level(&terms), m.junction_level(&raised));
            proptest::prop_assert!(hi.level_dbm >= lo.level_dbm - 1e-9);
            // never above the weakest drive less 20·log10(n) (the passive ceiling)
            let n: u32 = terms.iter().map(|t| t.0).sum();
            let weakest = terms.iter().map(|t| t.1).fold(f64::INFINITY, f64::min);
            proptest::prop_assert!(lo.level_dbm <= weakest - 20.0 * (n as f64).log10() + 1e-9);
            let near = field_with_near_field_rule(50.0, f, d, 5.0).0;
            let far = field_with_near_field_rule(50.0, f, d * 1.5, 5.0).0;
            proptest::prop_assert!(far <= near + 1e-9);
        }
    }
}
