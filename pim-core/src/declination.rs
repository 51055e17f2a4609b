//! Magnetic declination from the World Magnetic Model (WMM2025, NOAA/BGS), as implemented
//! by the world_magnetic_model crate. A magnetic bearing plus the east-positive
//! declination is the true bearing.

use time::Date;
use uom::si::angle::degree;
use uom::si::f32::{Angle, Length};
use uom::si::length::meter;
use world_magnetic_model::GeomagneticField;

use crate::geo::GeoPoint;

/// Declination in degrees (east positive) at `at` on `date`, at the ellipsoid surface.
/// The error text says why the model cannot answer (a date outside its validity).
pub fn declination_deg(at: GeoPoint, date: Date) -> Result<f64, String> {
    let field = GeomagneticField::new(
        Length::new::<meter>(0.0),
        Angle::new::<degree>(at.lat_deg as f32),
        Angle::new::<degree>(at.lon_deg as f32),
        date,
    )
    .map_err(|e| e.to_string())?;
    Ok(field.declination().get::<degree>() as f64)
}

/// The model's name for a date, for the record of corrections applied.
pub fn model_name(date: Date) -> &'static str {
    if date.year() >= 2025 {
        "WMM2025"
    } else {
        "WMM2020"
    }
}
