//! Positions and light-travel delays: the site in the celestial frame, the Roemer
//! delay and the solar Shapiro delay.

use crate::error::{Error, Result};
use crate::obs::Site;
use crate::obs::geodesy::geodetic_to_itrf_m;

/// Speed of light in km s⁻¹ (SI definition of the metre).
pub const C_KM_S: f64 = 299_792.458;

/// GM☉/c³ in seconds: 1.3271244e20 m³ s⁻² (IAU 2015 Resolution B3 nominal solar
/// parameter) / c³ = 4.925490947 µs.
pub const SUN_GM_OVER_C3_S: f64 = 1.327_124_4e20 / (299_792_458.0 * 299_792_458.0 * 299_792_458.0);

/// Geocentric terrestrial (ITRS) position of `site` in km from its WGS84 geodetic
/// coordinates ([`geodetic_to_itrf_m`], ERFA `gd2gc`).
///
/// # Errors
/// [`Error::Config`] for a latitude outside ±90° or non-finite coordinates.
pub fn site_itrs_km(site: &Site) -> Result<[f64; 3]> {
    let finite = [site.lon_deg, site.lat_deg, site.height_m]
        .iter()
        .all(|v| v.is_finite());
    if !finite || site.lat_deg.abs() > 90.0 || site.height_m.abs() > 1.0e5 {
        return Err(Error::Config(format!(
            "site ({}, {}, {} m) is not a place on Earth",
            site.lon_deg, site.lat_deg, site.height_m
        )));
    }
    Ok(geodetic_to_itrf_m(site.lon_deg, site.lat_deg, site.height_m).map(|m| m / 1000.0))
}

/// Bias–precession–nutation matrix (GCRS → true equator and equinox of date) at TT
/// given as MJD day and fraction, IAU 2006/2000A (ERFA `pnm06a`).
pub fn npb_matrix(tt: (i64, f64)) -> [[f64; 3]; 3] {
    erfa::prenut::pn_matrix_06a(2_400_000.5 + tt.0 as f64, tt.1)
}

/// Rotates a terrestrial vector into the GCRS at the given UT1 and TT (each an MJD
/// split into day and fraction): r_GCRS = NPBᵀ · R₃(−GAST) · r_ITRS, with `npb` from
/// [`npb_matrix`] and GAST from ERFA `gst06`. Polar motion (≤ 15 m) is ignored.
pub fn itrs_to_gcrs(r: [f64; 3], ut1: (i64, f64), tt: (i64, f64), npb: [[f64; 3]; 3]) -> [f64; 3] {
    let mjd0 = 2_400_000.5;
    let gast = erfa::time::gst06(mjd0 + ut1.0 as f64, ut1.1, mjd0 + tt.0 as f64, tt.1, npb);
    let (s, c) = gast.sin_cos();
    let true_of_date = [c * r[0] - s * r[1], s * r[0] + c * r[1], r[2]];
    [0, 1, 2].map(|j| (0..3).map(|i| npb[i][j] * true_of_date[i]).sum())
}

/// Unit vector towards ICRS (`ra_deg`, `dec_deg`).
pub fn source_direction(ra_deg: f64, dec_deg: f64) -> [f64; 3] {
    let (sa, ca) = ra_deg.to_radians().sin_cos();
    let (sd, cd) = dec_deg.to_radians().sin_cos();
    [cd * ca, cd * sa, sd]
}

pub(crate) fn dot(a: [f64; 3], b: [f64; 3]) -> f64 {
    a[0] * b[0] + a[1] * b[1] + a[2] * b[2]
}

/// Roemer delay in seconds: how much earlier a plane wave from `n` reaches the
/// observer at barycentric position `obs_km` than the barycentre, r·n̂ / c.
pub fn roemer_delay_s(obs_km: [f64; 3], n: [f64; 3]) -> f64 {
    dot(obs_km, n) / C_KM_S
}

/// Solar Shapiro delay in seconds, −2 GM☉/c³ · ln(1 + cos θ), θ the angle between the
/// Sun→observer vector and the direction to the source (Backer & Hellings 1986,
/// ARA&A 24, 537; the constant term is dropped). From −6.83 µs (source opposite the
/// Sun) to about +113 µs at the solar limb.
pub fn shapiro_delay_s(sun_to_obs_km: [f64; 3], n: [f64; 3]) -> f64 {
    let r = dot(sun_to_obs_km, sun_to_obs_km).sqrt();
    -2.0 * SUN_GM_OVER_C3_S * (1.0 + dot(sun_to_obs_km, n) / r).ln()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sun_light_time_constant() {
        // T☉ = GM☉/c³ = 4.925490947 µs (IAU 2015 B3 nominal GM☉, SI c).
        assert!((SUN_GM_OVER_C3_S - 4.925_490_947e-6).abs() < 1e-14);
        // 2 T☉ = 9.85 µs, the Shapiro scale.
        assert!((2.0 * SUN_GM_OVER_C3_S - 9.85e-6).abs() < 0.01e-6);
    }

    #[test]
    fn shapiro_limits() {
        let au = [149_597_870.7, 0.0, 0.0];
        // Source opposite the Sun: −2T☉ ln 2 = −6.828 µs.
        let anti = shapiro_delay_s(au, [1.0, 0.0, 0.0]);
        assert!((anti + 2.0 * SUN_GM_OVER_C3_S * 2f64.ln()).abs() < 1e-15);
        assert!((anti * 1e6 + 6.828).abs() < 0.001);
        // At 90° from the Sun: ln 1 = 0.
        assert!(shapiro_delay_s(au, [0.0, 1.0, 0.0]).abs() < 1e-15);
        // Grazing the limb (R☉ = 695 700 km, IAU 2015 B3): 1 + cos θ ≈ (R☉/au)²/2,
        // giving about 112.6 µs.
        let b: f64 = 695_700.0 / 149_597_870.7;
        let limb = shapiro_delay_s(au, [-(1.0 - b * b).sqrt(), b, 0.0]);
        assert!((limb * 1e6 - 112.6).abs() < 0.1, "{}", limb * 1e6);
    }

    #[test]
    fn site_radius_and_rotation() {
        let site = Site {
            name: "equator".into(),
            lon_deg: 0.0,
            lat_deg: 0.0,
            height_m: 0.0,
        };
        // WGS84 equatorial radius 6378.137 km.
        let r = site_itrs_km(&site).unwrap();
        assert!((r[0] - 6378.137).abs() < 1e-9 && r[1].abs() < 1e-9);
        // Rotation preserves length and a pole stays near the celestial pole.
        let npb = npb_matrix((60_000, 0.3008));
        let g = itrs_to_gcrs(r, (60_000, 0.3), (60_000, 0.3008), npb);
        assert!((dot(g, g).sqrt() - 6378.137).abs() < 1e-9);
        let pole = itrs_to_gcrs([0.0, 0.0, 1.0], (60_000, 0.3), (60_000, 0.3008), npb);
        assert!(pole[2] > 0.9999 && pole[2] < 1.0); // precession since J2000 ≈ 0.2°
        let bad = Site {
            lat_deg: 91.0,
            ..site
        };
        assert!(site_itrs_km(&bad).is_err());
    }
}
