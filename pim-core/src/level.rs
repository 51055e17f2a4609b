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
//! **Junction (passive IM).** A power law referred to two tones of P_ref each:
//!
//! `P_p = L₃ + F + Σ α·|kᵢ|·(Pᵢ − P_ref) − s·(n − 3) − e·[n even]`
//!
//! - L₃: the third-order two-tone product 2f₁ − f₂ of two tones of P_ref each;
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
//! transmitter or receiver): the drive enters only through the terms α·|kᵢ|·Pᵢ, |kᵢ|·Pᵢ
//! or the coupled power, all with non-negative weights. An upper bound on the drives (the
//! strongest field any emitter can set up, at its near-field floor) therefore bounds a
//! product's level exactly: L₃ + F_max(n) + α·n·(P_max − P_ref) − s·(n − 3) − e·[n even],
//! with F_max(n) the largest form weight of order n.
//!
//! **Other mechanisms.** [`Mechanism::Transmitter`]: one emitter's harmonic, levelled at
//! the ITU-R SM.329 category A spurious limit (attenuation 43 + 10·log10(P/W) dB or
//! 70 dB, whichever is less stringent; from memory), P taken as the ERP (the transmitter
//! power and the antenna's gain at the harmonic are unknown): an upper figure for a
//! compliant transmitter. [`Mechanism::TransmitterIm`]: 2f_A − f_B made in A's output
//! stage from B's signal coupled through the isolation between the antennas (free-space
//! loss between dipoles, never below [`LevelModel::min_antenna_isolation_db`]), a
//! conversion loss below the coupled level ([`LevelModel::tx_conversion_loss_db`]; common
//! practice, from memory: a few to about 20 dB). [`Mechanism::Receiver`]: third-order
//! products made in the receiver from the carriers at its antenna, P = Σ|kᵢ|·Pᵢ −
//! 2·IIP3 + F (Pozar; Razavi, *RF Microelectronics*), only when an IIP3 is given.
//!
//! **Channel.** A product's spectrum is taken as Gaussian with its span Σ|kᵢ|·Bᵢ (common
//! practice) as the 99 % occupied bandwidth (σ = span/5.152); the fraction inside the
//! receive channel counts. A product without width counts fully inside the channel and
//! not at all outside it (a floor of −120 dB keeps the order total).
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
    /// `reference_tone_dbm` each, dBm. Default −35 dBm: a badly corroded joint at site
    /// drive (assumed, no published figure; calibrate with a heard level).
    pub im3_dbm: f64,
    /// P_ref: the drive of each reference tone (coupled power), dBm. Default 0 dBm, a
    /// typical drive near a site (about 116 dB(µV/m) with 1 m²), so that the order step
    /// below is what separates orders; +43 dBm gives the IEC 62037-1 test condition.
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
    /// A junction needing a third-order product above this, relative to one reference
    /// tone (dBc at `reference_tone_dbm`), is implausible. Default −10 dBc: no passive
    /// contact, even a rectifying one, mixes more strongly than a diode mixer (from
    /// memory).
    pub max_im3_dbc: f64,
}

impl Default for LevelModel {
    fn default() -> Self {
        LevelModel {
            im3_dbm: -35.0,
            reference_tone_dbm: 0.0,
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
            max_im3_dbc: -10.0,
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
    /// The sum: the product's level at the junction, dBm.
    pub level_dbm: f64,
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
        JunctionTerms {
            im3_dbm: self.im3_dbm,
            form_db,
            drive_db,
            order_db,
            even_order_db,
            level_dbm: self.im3_dbm + form_db + drive_db + order_db + even_order_db,
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

    /// EIRP of a harmonic at the ITU-R SM.329 category A limit, dBm (module docs).
    pub fn spurious_limit_eirp_dbm(&self, erp_dbm: f64) -> f64 {
        let watts = 10f64.powf((erp_dbm - 30.0) / 10.0);
        let attenuation = (43.0 + 10.0 * watts.log10()).min(70.0);
        erp_dbm - attenuation + DIPOLE_GAIN_DBI
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
        assert!((p.level_dbm - m.im3_dbm).abs() < 1e-12);
        let p5 = m.junction_level(&[(3, m.reference_tone_dbm), (2, m.reference_tone_dbm)]);
        assert!((p5.level_dbm - (m.im3_dbm - 10.0)).abs() < 1e-12);
        // The ideal law and the conversion term agree.
        let q = m.junction_level(&[(2, -7.0), (1, -3.0)]);
        assert!((q.level_dbm - (2.0 * -7.0 - 3.0 + m.conversion_db(3))).abs() < 1e-9);
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
        assert!((m.spurious_limit_eirp_dbm(50.0) - (-13.0 + DIPOLE_GAIN_DBI)).abs() < 1e-9);
        // 50 kW: capped at 70 dBc.
        let erp = 10.0 * 50_000f64.log10() + 30.0;
        assert!((m.spurious_limit_eirp_dbm(erp) - (erp - 70.0 + DIPOLE_GAIN_DBI)).abs() < 1e-9);
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
            proptest::prop_assert!(m.junction_level(&raised).level_dbm >= m.junction_level(&terms).level_dbm - 1e-9);
            let near = field_with_near_field_rule(50.0, f, d, 5.0).0;
            let far = field_with_near_field_rule(50.0, f, d * 1.5, 5.0).0;
            proptest::prop_assert!(far <= near + 1e-9);
        }
    }
}
