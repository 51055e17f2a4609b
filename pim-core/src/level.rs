//! Predicted product levels: how much power reaches the junction from each emitter, and
//! how strongly a junction converts it into a product.
//!
//! **Incident power.** Pᵢ = ERPᵢ − L_bf, with L_bf the free-space basic transmission loss
//! of ITU-R P.525, L_bf = 20·log10(4πd/λ) dB, over the emitter-to-junction distance d.
//! With ERP (dipole-referenced) in place of EIRP this is the power a dipole would take
//! from the field at the junction; the junction's own coupling is unknown and goes into
//! the conversion term. Distances below [`NEAR_FIELD_FLOOR_M`] are raised to it.
//!
//! **Junction model.** A power law: each emitter raises the product |kᵢ| dB per dB of its
//! incident power (Pozar, *Microwave Engineering*; Razavi, *RF Microelectronics*:
//! P_IM3 = 3·P_in − 2·IIP3). The product level is
//!
//! `P_p = Σ |kᵢ|·Pᵢ + C(n)`, with `C(n) = L₃ − s·(n − 3) − n·P_ref`,
//!
//! so that a junction driven by tones of P_ref each makes a third-order product of L₃ and
//! each further order costs s dB more. Defaults: P_ref = +43 dBm, the IEC 62037-1 test
//! carrier; L₃ = −80 dBm, a degraded joint some 30 dB worse than the common −110 dBm
//! (−153 dBc) acceptance level (common practice, value from memory); s = 5 dB per order
//! (common practice, value from memory). Real joints differ by tens of dB: the level is
//! for ranking candidates against each other, not a promise of what the receiver hears.

use serde::Serialize;

use crate::emitter::Emitter;
use crate::freq::Hz;
use crate::geo::{distance_m, GeoPoint};

/// Speed of light in vacuum, m/s.
pub const SPEED_OF_LIGHT_M_S: f64 = 299_792_458.0;

/// Distances shorter than this are raised to it: closer in, the far-field loss formula
/// does not hold and the junction would be inside the antenna's own structure.
pub const NEAR_FIELD_FLOOR_M: f64 = 10.0;

/// Free-space basic transmission loss in dB (ITU-R P.525): 20·log10(4πd/λ).
///
/// ```
/// let l = pim_core::level::free_space_loss_db(100e6, 1000.0);
/// assert!((l - 72.45).abs() < 0.01);
/// ```
pub fn free_space_loss_db(freq_hz: f64, distance_m: f64) -> f64 {
    20.0 * (4.0 * std::f64::consts::PI * distance_m * freq_hz / SPEED_OF_LIGHT_M_S).log10()
}

/// The power-law junction model (see the module docs).
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct JunctionModel {
    /// L₃: third-order product level with two tones of `reference_tone_dbm`, in dBm.
    pub im3_dbm: f64,
    /// P_ref: level of each reference tone, in dBm.
    pub reference_tone_dbm: f64,
    /// s: further loss per order above the third, in dB.
    pub order_step_db: f64,
}

impl Default for JunctionModel {
    fn default() -> Self {
        JunctionModel {
            im3_dbm: -80.0,
            reference_tone_dbm: 43.0,
            order_step_db: 5.0,
        }
    }
}

impl JunctionModel {
    /// C(n) = L₃ − s·(n − 3) − n·P_ref, in dB.
    pub fn conversion_db(&self, order: u32) -> f64 {
        let n = order as f64;
        self.im3_dbm - self.order_step_db * (n - 3.0) - n * self.reference_tone_dbm
    }
}

/// The power one emitter brings to the junction, with the terms that make it up.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct Incidence {
    pub erp_dbm: f64,
    pub distance_m: f64,
    pub path_loss_db: f64,
    pub incident_dbm: f64,
}

/// The incident power of `emitter` at `junction`, or `None` without ERP or location.
pub fn incidence(emitter: &Emitter, junction: GeoPoint) -> Option<Incidence> {
    let erp_dbm = emitter.erp_dbm?;
    let position = emitter.position?;
    let distance = distance_m(position, junction);
    let path_loss_db = free_space_loss_db(emitter.freq.0 as f64, distance.max(NEAR_FIELD_FLOOR_M));
    Some(Incidence {
        erp_dbm,
        distance_m: distance,
        path_loss_db,
        incident_dbm: erp_dbm - path_loss_db,
    })
}

/// Frequency-only helper for callers holding a bare carrier.
pub fn incident_dbm(erp_dbm: f64, freq: Hz, distance_m: f64) -> f64 {
    erp_dbm - free_space_loss_db(freq.0 as f64, distance_m.max(NEAR_FIELD_FLOOR_M))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn reference_tones_give_the_reference_level() {
        let m = JunctionModel::default();
        let p = 3.0 * m.reference_tone_dbm + m.conversion_db(3);
        assert!((p - m.im3_dbm).abs() < 1e-12);
        let p5 = 5.0 * m.reference_tone_dbm + m.conversion_db(5);
        assert!((p5 - (m.im3_dbm - 10.0)).abs() < 1e-12);
    }
}
