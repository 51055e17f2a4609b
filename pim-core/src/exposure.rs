//! RF exposure at a point from every placed emitter, for the ticket's decision whether
//! a tap test can be done with the transmitters on the air.
//!
//! Each emitter's field is the far-field estimate E = √(30·EIRP)/d (ITU-R P.525), with
//! EIRP = 1.64 × ERP (a half-wave dipole's gain, 2.15 dBi) and d the slant distance from
//! the antenna (at its `height_m`) to the point; it is compared with the ICNIRP 2020
//! general-public reference level at the emitter's frequency (ICNIRP, "Guidelines for
//! limiting exposure to electromagnetic fields (100 kHz to 300 GHz)", Health Physics
//! 118(5), 2020, Table 5: whole-body exposure averaged over 30 minutes; the local
//! levels of Table 6 are higher). The reference levels below are recalled from memory,
//! not read from the table: check them against it before relying on a margin.
//!
//! Fields at several frequencies add as the sum of each one's power density over its
//! own reference level, Σ (Eᵢ / E_ref,i)² ≤ 1 (ICNIRP 2020, simultaneous exposure to
//! several frequencies; from memory). The far-field estimate takes every antenna's main
//! beam towards the point and no ground reflection: it is an estimate, not a survey. It
//! does not hold within about a wavelength of an antenna (the reactive near field),
//! where FCC OET Bulletin 65's near-field methods or a measurement apply; the distance
//! is floored there, as in [`crate::level`].
//!
//! ```
//! use pim_core::exposure::general_public_reference_v_per_m;
//! use pim_core::freq::Hz;
//! // 30–400 MHz: 27.7 V/m (ICNIRP 2020 Table 5, general public; from memory)
//! let e = general_public_reference_v_per_m(Hz(146_340_000)).unwrap();
//! assert!((e - 27.7).abs() < 1e-9);
//! ```

use serde::Serialize;

use crate::emitter::Emitter;
use crate::freq::Hz;
use crate::geo::{distance_m, GeoPoint};
use crate::level::{slant_distance_m, wavelength_m, DIPOLE_GAIN_DBI};

/// The impedance of free space, Ω (S = E²/Z₀).
const FREE_SPACE_OHMS: f64 = 376.730_313;

/// The ICNIRP 2020 general-public reference level for whole-body exposure (Table 5,
/// averaged over 30 minutes), as an incident electric field strength in V/m; above
/// 2 GHz, where the table gives only a power density (10 W/m²), its equivalent plane-wave
/// field. `None` outside the guidelines' 100 kHz to 300 GHz. Values from memory:
///
/// | frequency | E, V/m | S, W/m² |
/// |---|---|---|
/// | 0.1–30 MHz | 300 / f^0.7 (f in MHz) | — |
/// | 30–400 MHz | 27.7 | 2 |
/// | 400–2000 MHz | 1.375 · f^0.5 | f / 200 |
/// | 2–300 GHz | — | 10 |
pub fn general_public_reference_v_per_m(freq: Hz) -> Option<f64> {
    let f = freq.0 as f64 / 1e6;
    match f {
        f if !(0.1..=300_000.0).contains(&f) => None,
        f if f <= 30.0 => Some(300.0 / f.powf(0.7)),
        f if f <= 400.0 => Some(27.7),
        f if f <= 2000.0 => Some(1.375 * f.sqrt()),
        _ => Some((10.0 * FREE_SPACE_OHMS).sqrt()),
    }
}

/// Far-field strength of `erp_w` watts ERP at `distance_m`, V/m: √(30·1.64·ERP)/d.
///
/// ```
/// // 100 W ERP at 10 m: √(30 × 164)/10 = 7.01 V/m
/// let e = pim_core::exposure::far_field_v_per_m(100.0, 10.0);
/// assert!((e - 7.016).abs() < 0.001);
/// ```
pub fn far_field_v_per_m(erp_w: f64, distance_m: f64) -> f64 {
    (30.0 * erp_w * eirp_factor()).sqrt() / distance_m
}

/// EIRP over ERP as a ratio: 2.15 dB, 1.64.
fn eirp_factor() -> f64 {
    10f64.powf(DIPOLE_GAIN_DBI / 10.0)
}

/// One emitter's field at the point.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct ExposureTerm {
    /// The emitter, as an index of the list the exposure was worked out from.
    pub emitter: usize,
    /// Slant distance from the antenna to the point, m.
    pub distance_m: f64,
    /// Whether the point lies within a wavelength of the antenna, where the far-field
    /// estimate does not hold (the distance used is floored at λ/2π).
    pub near_field: bool,
    /// The far-field estimate at the point, V/m.
    pub field_v_per_m: f64,
    /// The general-public reference level at the emitter's frequency, V/m.
    pub reference_v_per_m: f64,
    /// (E / E_ref)²: the share of the reference level's power density.
    pub fraction: f64,
    /// The distance within which this emitter alone reaches its reference level (the
    /// far-field estimate solved for d), m.
    pub reference_distance_m: f64,
}

/// The exposure at a point from every emitter with an ERP, a position and a frequency
/// the guidelines cover.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Exposure {
    /// Each emitter's term, the largest share first.
    pub terms: Vec<ExposureTerm>,
    /// Σ (Eᵢ / E_ref,i)²: at most 1 keeps within the general-public reference levels.
    pub total_fraction: f64,
    /// Emitters left out for want of an ERP or a position (their field is unknown).
    pub unplaced: Vec<usize>,
}

impl Exposure {
    /// Whether the sum keeps within the general-public reference levels and every
    /// emitter was placed and lies in its far field.
    pub fn within_reference_levels(&self) -> bool {
        self.total_fraction <= 1.0
            && self.unplaced.is_empty()
            && !self.terms.iter().any(|t| t.near_field)
    }
}

/// The exposure at `point`, `height_m` above the ground, from `emitters` (module docs).
pub fn exposure_at(emitters: &[Emitter], point: GeoPoint, height_m: f64) -> Exposure {
    let mut terms = Vec::new();
    let mut unplaced = Vec::new();
    for (i, e) in emitters.iter().enumerate() {
        let (Some(erp_dbm), Some(position)) = (e.erp_dbm, e.position) else {
            unplaced.push(i);
            continue;
        };
        let Some(reference) = general_public_reference_v_per_m(e.freq) else {
            continue;
        };
        let erp_w = 10f64.powf((erp_dbm - 30.0) / 10.0);
        let slant = slant_distance_m(
            distance_m(position, point),
            e.height_m.unwrap_or(height_m),
            height_m,
        );
        let lambda = wavelength_m(e.freq.0 as f64);
        let used = slant.max(lambda / (2.0 * std::f64::consts::PI));
        let field = far_field_v_per_m(erp_w, used);
        terms.push(ExposureTerm {
            emitter: i,
            distance_m: slant,
            near_field: slant < lambda,
            field_v_per_m: field,
            reference_v_per_m: reference,
            fraction: (field / reference).powi(2),
            reference_distance_m: far_field_v_per_m(erp_w, 1.0) / reference,
        });
    }
    terms.sort_by(|a, b| b.fraction.total_cmp(&a.fraction));
    Exposure {
        total_fraction: terms.iter().map(|t| t.fraction).sum(),
        terms,
        unplaced,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn at(lat: f64, lon: f64) -> GeoPoint {
        GeoPoint {
            lat_deg: lat,
            lon_deg: lon,
        }
    }

    /// 100 W ERP at 146.94 MHz on a 10 m mast at 45° N, 122° W.
    fn mast(id: &str) -> Emitter {
        let mut e = Emitter::new(id, Hz(146_940_000), Hz(16_000));
        e.erp_dbm = Some(50.0);
        e.position = Some(at(45.0, -122.0));
        e.height_m = Some(10.0);
        e
    }

    /// The reference levels at the bands' edges meet (ICNIRP 2020 Table 5, from memory:
    /// 300/30^0.7 = 27.7 and 1.375·√400 = 27.5 V/m; 1.375·√2000 = 61.5 against
    /// √(10·377) = 61.4 V/m).
    #[test]
    fn the_reference_levels_meet_at_the_band_edges() {
        let e = |mhz: f64| general_public_reference_v_per_m(Hz((mhz * 1e6) as i64)).unwrap();
        assert!((e(30.0) - 27.7).abs() < 0.1);
        assert!((e(400.000001) - 27.5).abs() < 0.01);
        assert!((e(2000.0) - 61.49).abs() < 0.01);
        assert!((e(2000.1) - 61.38).abs() < 0.01);
        assert_eq!(general_public_reference_v_per_m(Hz(50_000)), None);
    }

    /// A 100 W ERP repeater 10 m away at 146 MHz: 7.01 V/m against 27.7, a share of
    /// 6.4 %; it reaches the reference level within 2.53 m (hand computation of
    /// √(30·164)/d).
    #[test]
    fn one_emitter_s_share_and_distance() {
        let x = exposure_at(&[mast("RPT")], at(45.0, -122.0), 0.0);
        let t = x.terms[0];
        assert!((t.distance_m - 10.0).abs() < 1e-9);
        assert!((t.field_v_per_m - 7.016).abs() < 0.001);
        assert!((t.fraction - 0.0641).abs() < 0.0001);
        assert!((t.reference_distance_m - 2.533).abs() < 0.001);
        assert!(x.within_reference_levels());
    }

    /// Shares add; an emitter without ERP is named as left out and the verdict withheld.
    #[test]
    fn shares_add_and_unknown_emitters_withhold_the_verdict() {
        let a = mast("A");
        let b = a.clone();
        let x = exposure_at(&[a.clone(), b], at(45.0, -122.0), 0.0);
        assert!((x.total_fraction - 2.0 * x.terms[0].fraction).abs() < 1e-12);
        let c = Emitter::new("C", Hz(155_000_000), Hz(16_000));
        let y = exposure_at(&[a, c], at(45.0, -122.0), 0.0);
        assert_eq!(y.unplaced, vec![1]);
        assert!(!y.within_reference_levels());
    }
}
