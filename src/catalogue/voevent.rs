//! One burst as an IVOA VOEvent 2.0 packet (Seaman et al. 2011, IVOA
//! Recommendation "Sky Event Reporting Metadata Version 2.0").
//!
//! Elements follow the v2.0 schema: Who, What (Params with IVOA UCDs), WhereWhen
//! (UTC-ICRS-TOPO arrival time and position), How, Why.

use std::io::Cursor;

use quick_xml::Writer;
use quick_xml::events::{BytesDecl, BytesText, Event};
use serde::Serialize;

use super::{BurstFilter, Catalogue, catalogue_error};
use crate::error::{Error, Result};
use crate::obs::geodesy::format_ra_deg;
use crate::obs::{Header, UtcEpoch};

/// Who publishes, and how precise the position is.
#[derive(Debug, Clone, PartialEq)]
pub struct VoEventOptions {
    /// IVORN of the publishing stream, e.g. `ivo://example.invalid/burstbook`;
    /// the packet IVORN is this plus `#burst-<id>`.
    pub ivorn_root: String,
    /// Contact name placed under Who/Author.
    pub contact: String,
    /// Radius of the position uncertainty in degrees (e.g. the beam half-width).
    pub position_error_deg: f64,
    /// Packet role: `observation` or `test`.
    pub role: String,
}

/// Everything one packet says, gathered from the catalogue.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct BurstPacket {
    /// Burst id.
    pub burst_id: i64,
    /// Source name.
    pub source: String,
    /// Source ICRS right ascension, degrees.
    pub ra_deg: f64,
    /// Source ICRS declination, degrees.
    pub dec_deg: f64,
    /// Topocentric UTC MJD of arrival at infinite frequency.
    pub mjd_utc: f64,
    /// DM in pc cm⁻³ and its range among the cluster members.
    pub dm: f64,
    /// Half the DM range of the cluster, pc cm⁻³.
    pub dm_half_range: f64,
    /// Boxcar width, ms.
    pub width_ms: f64,
    /// S/N.
    pub snr: f64,
    /// Fluence, Jy ms, when the SEFD was known.
    pub fluence_jy_ms: Option<f64>,
    /// Observing site.
    pub site: String,
    /// Centre frequency, MHz.
    pub centre_freq_mhz: f64,
    /// Bandwidth, MHz.
    pub bandwidth_mhz: f64,
    /// Sample time, ms.
    pub tsamp_ms: f64,
}

/// ISO 8601 UTC with microseconds (no time-zone suffix, as VOEvent ISOTime uses)
/// for a UTC (quasi-)MJD, leap seconds included ([`UtcEpoch::to_iso`]).
pub fn mjd_to_iso(mjd: f64) -> String {
    UtcEpoch::from_mjd_f64(mjd).to_iso()
}

/// Writes the packet. Pure: same inputs, same bytes (except `date_utc`).
pub fn voevent_xml(p: &BurstPacket, opt: &VoEventOptions, date_utc: &str) -> String {
    let mut w = Writer::new_with_indent(Cursor::new(Vec::new()), b' ', 2);
    write_packet(&mut w, p, opt, date_utc).expect("writing to memory cannot fail");
    String::from_utf8(w.into_inner().into_inner()).expect("quick-xml writes UTF-8")
}

type W = Writer<Cursor<Vec<u8>>>;

fn text(w: &mut W, name: &str, value: &str) -> std::io::Result<()> {
    w.create_element(name)
        .write_text_content(BytesText::new(value))?;
    Ok(())
}

fn param(
    w: &mut W,
    name: &str,
    ucd: &str,
    unit: &str,
    value: String,
    data_type: &str,
) -> std::io::Result<()> {
    let mut e = w
        .create_element("Param")
        .with_attribute(("name", name))
        .with_attribute(("ucd", ucd))
        .with_attribute(("value", value.as_str()))
        .with_attribute(("dataType", data_type));
    if !unit.is_empty() {
        e = e.with_attribute(("unit", unit));
    }
    e.write_empty()?;
    Ok(())
}

fn write_packet(
    w: &mut W,
    p: &BurstPacket,
    opt: &VoEventOptions,
    date_utc: &str,
) -> std::io::Result<()> {
    w.write_event(Event::Decl(BytesDecl::new("1.0", Some("UTF-8"), None)))?;
    let ivorn = format!("{}#burst-{}", opt.ivorn_root, p.burst_id);
    w.create_element("voe:VOEvent")
        .with_attribute(("xmlns:voe", "http://www.ivoa.net/xml/VOEvent/v2.0"))
        .with_attribute(("xmlns:xsi", "http://www.w3.org/2001/XMLSchema-instance"))
        .with_attribute((
            "xsi:schemaLocation",
            "http://www.ivoa.net/xml/VOEvent/v2.0 http://www.ivoa.net/xml/VOEvent/VOEvent-v2.0.xsd",
        ))
        .with_attribute(("version", "2.0"))
        .with_attribute(("role", opt.role.as_str()))
        .with_attribute(("ivorn", ivorn.as_str()))
        .write_inner_content(|w| {
            w.create_element("Who").write_inner_content(|w| {
                text(w, "AuthorIVORN", &opt.ivorn_root)?;
                text(w, "Date", date_utc)?;
                w.create_element("Author")
                    .write_inner_content(|w| text(w, "contactName", &opt.contact))?;
                Ok(())
            })?;
            w.create_element("What").write_inner_content(|w| what(w, p))?;
            w.create_element("WhereWhen")
                .write_inner_content(|w| where_when(w, p, opt))?;
            w.create_element("How").write_inner_content(|w| {
                text(
                    w,
                    "Description",
                    &format!(
                        "burstbook {} incoherent dedispersion and boxcar matched filter; candidate confirmed by review",
                        env!("CARGO_PKG_VERSION")
                    ),
                )
            })?;
            w.create_element("Why").write_inner_content(|w| {
                w.create_element("Inference")
                    .with_attribute(("probability", "1.0"))
                    .write_inner_content(|w| {
                        text(w, "Name", &p.source)?;
                        text(w, "Concept", "Dispersed radio burst")
                    })?;
                Ok(())
            })?;
            Ok(())
        })?;
    Ok(())
}

fn what(w: &mut W, p: &BurstPacket) -> std::io::Result<()> {
    param(
        w,
        "dm",
        "phys.dispMeasure",
        "pc/cm3",
        format!("{:.3}", p.dm),
        "float",
    )?;
    param(
        w,
        "dm_error",
        "stat.error;phys.dispMeasure",
        "pc/cm3",
        format!("{:.3}", p.dm_half_range),
        "float",
    )?;
    param(
        w,
        "width",
        "time.duration;instr.filter",
        "ms",
        format!("{:.4}", p.width_ms),
        "float",
    )?;
    param(w, "snr", "stat.snr", "", format!("{:.2}", p.snr), "float")?;
    if let Some(f) = p.fluence_jy_ms {
        param(
            w,
            "fluence",
            "phys.flux;stat.integrated",
            "Jy ms",
            format!("{f:.4}"),
            "float",
        )?;
    }
    param(
        w,
        "centre_frequency",
        "em.freq;instr",
        "MHz",
        format!("{:.3}", p.centre_freq_mhz),
        "float",
    )?;
    param(
        w,
        "bandwidth",
        "instr.bandwidth",
        "MHz",
        format!("{:.3}", p.bandwidth_mhz),
        "float",
    )?;
    param(
        w,
        "sampling_time",
        "time.resolution",
        "ms",
        format!("{:.6}", p.tsamp_ms),
        "float",
    )?;
    param(w, "burst_id", "meta.id", "", p.burst_id.to_string(), "int")?;
    text(
        w,
        "Description",
        "Arrival time is topocentric UTC at infinite frequency.",
    )
}

fn where_when(w: &mut W, p: &BurstPacket, opt: &VoEventOptions) -> std::io::Result<()> {
    w.create_element("ObsDataLocation")
        .write_inner_content(|w| {
            w.create_element("ObservatoryLocation")
                .with_attribute(("id", p.site.as_str()))
                .write_empty()?;
            w.create_element("ObservationLocation")
                .write_inner_content(|w| {
                    w.create_element("AstroCoordSystem")
                        .with_attribute(("id", "UTC-ICRS-TOPO"))
                        .write_empty()?;
                    w.create_element("AstroCoords")
                        .with_attribute(("coord_system_id", "UTC-ICRS-TOPO"))
                        .write_inner_content(|w| {
                            w.create_element("Time")
                                .with_attribute(("unit", "s"))
                                .write_inner_content(|w| {
                                    w.create_element("TimeInstant").write_inner_content(|w| {
                                        text(w, "ISOTime", &mjd_to_iso(p.mjd_utc))
                                    })?;
                                    Ok(())
                                })?;
                            w.create_element("Position2D")
                                .with_attribute(("unit", "deg"))
                                .write_inner_content(|w| {
                                    text(w, "Name1", "RA")?;
                                    text(w, "Name2", "Dec")?;
                                    w.create_element("Value2").write_inner_content(|w| {
                                        text(w, "C1", &format_ra_deg(p.ra_deg, 6))?;
                                        text(w, "C2", &format!("{:.6}", p.dec_deg))
                                    })?;
                                    text(
                                        w,
                                        "Error2Radius",
                                        &format!("{:.6}", opt.position_error_deg),
                                    )
                                })?;
                            Ok(())
                        })?;
                    Ok(())
                })?;
            Ok(())
        })?;
    Ok(())
}

impl Catalogue {
    /// Gathers what a VOEvent packet for burst `burst_id` needs.
    ///
    /// # Errors
    /// No such burst, an unreadable stored header, or an SQLite failure.
    pub fn burst_packet(&self, burst_id: i64) -> Result<BurstPacket> {
        let b = self
            .bursts(&BurstFilter::default())?
            .into_iter()
            .find(|b| b.id == burst_id)
            .ok_or_else(|| catalogue_error(self.path(), format!("has no burst {burst_id}")))?;
        let src = self.source(&b.source)?;
        let (header_json, dm_lo, dm_hi): (String, f64, f64) = self
            .conn()
            .query_row(
                "SELECT o.header_json, c.dm_lo, c.dm_hi FROM candidate c
                 JOIN search_run r ON r.id = c.run_id JOIN observation o ON o.id = r.observation_id
                 WHERE c.id = ?1",
                [b.candidate_id],
                |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?)),
            )
            .map_err(|e| self.err(e))?;
        let h: Header = serde_json::from_str(&header_json)
            .map_err(|e| Error::bad_input(self.path(), format!("stored header unreadable: {e}")))?;
        Ok(BurstPacket {
            burst_id,
            source: src.name,
            ra_deg: src.ra_deg,
            dec_deg: src.dec_deg,
            mjd_utc: b.mjd_utc,
            dm: b.dm,
            dm_half_range: (dm_hi - dm_lo) / 2.0,
            width_ms: b.width_ms,
            snr: b.snr,
            fluence_jy_ms: b.fluence_jy_ms,
            site: h.site.name.clone(),
            centre_freq_mhz: (h.freq_lo_mhz() + h.freq_hi_mhz()) / 2.0,
            bandwidth_mhz: h.bandwidth_mhz(),
            tsamp_ms: h.tsamp_s * 1e3,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    pub(crate) fn packet() -> BurstPacket {
        BurstPacket {
            burst_id: 42,
            source: "SRC <A&B>".into(),
            ra_deg: 123.25,
            dec_deg: -12.5,
            mjd_utc: 60000.5,
            dm: 350.25,
            dm_half_range: 1.5,
            width_ms: 2.0,
            snr: 15.5,
            fluence_jy_ms: Some(1.25),
            site: "Heronsgate".into(),
            centre_freq_mhz: 1400.0,
            bandwidth_mhz: 400.0,
            tsamp_ms: 0.064,
        }
    }

    #[test]
    fn mjd_to_iso_known_epochs() {
        // MJD 51544.5 is 2000-01-01T12:00:00 UTC (J2000 date; Explanatory Supplement).
        assert_eq!(mjd_to_iso(51544.5), "2000-01-01T12:00:00.000000");
        assert_eq!(mjd_to_iso(40587.0), "1970-01-01T00:00:00.000000");
    }

    #[test]
    fn packet_escapes_text_and_carries_the_numbers() {
        let opt = VoEventOptions {
            ivorn_root: "ivo://example.invalid/burstbook".into(),
            contact: "Night & Day Observer".into(),
            position_error_deg: 0.25,
            role: "test".into(),
        };
        let xml = voevent_xml(&packet(), &opt, "2026-12-02T00:00:00");
        assert!(xml.contains("ivorn=\"ivo://example.invalid/burstbook#burst-42\""));
        assert!(xml.contains("<Name>SRC &lt;A&amp;B&gt;</Name>"));
        assert!(xml.contains("<ISOTime>2023-02-25T12:00:00.000000</ISOTime>"));
        assert!(xml.contains(r#"name="dm" ucd="phys.dispMeasure" value="350.250""#));
        assert!(xml.contains("<C2>-12.500000</C2>"));
        // Round-trips through an XML parser.
        let mut r = quick_xml::Reader::from_str(&xml);
        let mut n_params = 0;
        loop {
            match r.read_event().unwrap() {
                Event::Eof => break,
                Event::Empty(e) if e.name().as_ref() == "Param" => n_params += 1,
                _ => {}
            }
        }
        assert_eq!(n_params, 9);
    }
}
