//! Licence lists as they come: an export with its own column names, units in the headers,
//! designators and split positions explains a carrier as the tool's own file does;
//! `pim emitters` shows how each column was read; `--columns` settles what the names do
//! not, on every command that reads emitters, receivers or structures.

use crate::support::{pim, pim_in, scratch, stderr_of, stdout_of};

/// The demo site's emitters (`field-logs/emitters.csv`) as an invented licensing
/// database might export them: semicolons, frequencies in kHz, designators or widths in
/// Hz, ERP in kW, latitude split over degrees, decimal minutes and hemisphere, heights in
/// feet.
const EXPORT: &str = "\
Call sign;Licensee;Frequency (kHz);Emission designator;BW [Hz];ERP_kW;LAT_DEG;LAT_MIN;LAT_HEM;Longitude;Antenna height (ft AGL);Service;Keying;Remarks
QK7MHR-R;Marrow Hill Radio Club;146940;16K0F3E;;0.06;45;6.2772;N;-122.414033;150.918635;repeater;intermittent;2 m repeater output, input 146.340 MHz
SKP-152;Skerry Paging Co.;152840;16K0F1D;;3.5;45;6.2772;N;-122.414033;131.233596;paging;intermittent;POCSAG paging, busy in daytime
SKP-157;Skerry Paging Co.;157740;16K0F1D;;3.5;45;6.2772;N;-122.414033;131.233596;paging;intermittent;second paging channel
FIRE-DSP;Tillery County Fire;159340;;11250;0.5;45;6.2772;N;-122.414033;104.986877;land mobile;intermittent;dispatch base
HWY-BASE;Tillery County Roads;155610;;11250;0.25;45;6.2772;N;-122.414033;104.986877;land mobile;intermittent;road crew base
UTIL-UHF;Verrow Water District;453250;;11250;0.04;45;6.2043;N;-122.410791;98.425197;land mobile;intermittent;telemetry and voice
QFMR;Cedar Valley Broadcasting;98700;;200000;20;45;6.61194;N;-122.400546;393.700787;fm;continuous;FM broadcaster on the north spur
QAMV;Cedar Valley Broadcasting;830;10K0A3E;;5;45;4.5603;N;-122.443817;196.850394;am;continuous;AM broadcaster in the valley
QK7MHR-L;Marrow Hill Radio Club;444100;16K0F3E;;0.025;45;6.2772;N;-122.414033;144.356955;repeater;intermittent;70 cm link
";

fn candidates(file: &str, dir: Option<&std::path::Path>) -> Vec<serde_json::Value> {
    let o = pim_in(
        dir,
        &[
            "explain",
            "146.34",
            "--emitters",
            file,
            "--rx-lat",
            "45.103",
            "--rx-lon",
            "-122.412",
            "--format",
            "json",
            "--limit",
            "all",
        ],
    );
    assert_eq!(o.status.code(), Some(0), "{}", stderr_of(&o));
    let v: serde_json::Value = serde_json::from_str(&stdout_of(&o)).unwrap();
    v["candidates"].as_array().unwrap().clone()
}

#[test]
fn an_export_explains_as_the_own_file_does() {
    let tmp = scratch();
    std::fs::write(tmp.path().join("export.csv"), EXPORT).unwrap();
    let own = candidates(
        &crate::support::workspace_root()
            .join("field-logs/emitters.csv")
            .display()
            .to_string(),
        None,
    );
    let got = candidates("export.csv", Some(tmp.path()));
    assert!(own.len() >= 2, "{}", own.len());
    assert_eq!(got.len(), own.len());
    for (g, o) in got.iter().zip(&own) {
        for key in [
            "formula",
            "mechanism",
            "product_mhz",
            "bandwidth_khz",
            "offset_khz",
        ] {
            assert_eq!(g[key], o[key], "{key} of {}", o["formula"]);
        }
        for key in ["predicted_level_dbm", "in_channel_dbm"] {
            let (a, b) = (g[key].as_f64().unwrap(), o[key].as_f64().unwrap());
            assert!(
                (a - b).abs() <= 0.011,
                "{key} of {}: {a} against {b}",
                o["formula"]
            );
        }
    }
}

#[test]
fn pim_emitters_shows_how_each_column_was_read() {
    let tmp = scratch();
    let text = "Call sign,Frequency,ERP (dBW),EIRP (dBm),Latitude,Longitude,Service,Site name\n\
        QX1ALP,152.8125,23.98,56.13,45 06 16.5 N,122 24 50.5 W,land mobile,Marrow Hill\n\
        QX2BRV,98.7 MHz,43.01,,45.110199,-122.400546,FM,North spur\n\
        QX3CHD,abc,16,,,,repeater,Hut\n";
    std::fs::write(tmp.path().join("tx.csv"), text).unwrap();
    let o = pim_in(Some(tmp.path()), &["emitters", "--emitters", "tx.csv"]);
    let out = stdout_of(&o);
    assert_eq!(o.status.code(), Some(3), "{out}");
    assert_eq!(
        stderr_of(&o).trim(),
        "pim: tx.csv: 1 of 3 rows refused (listed above)"
    );
    let want = [
        "tx.csv: 3 rows, 2 emitters read, 1 refused",
        "Call sign   id     -                                QX1ALP, QX2BRV",
        "Frequency   freq   MHz (assumed)                    152.8125 MHz, 98.7 MHz",
        "ERP (dBW)   erp    dBW                              53.98 dBm, 73.01 dBm (ERP)",
        "EIRP (dBm)  erp    dBm EIRP, read as ERP − 2.15 dB  (must agree with the first power column)",
        "Latitude    lat    degrees                          45.104583, 45.110199",
        "Service     kind   -                                land mobile, FM",
        "  Site name: not a field the tool reads",
        "  column `Frequency` names no unit: numbers without one are read as MHz",
        "  column `EIRP (dBm)` holds EIRP: read as ERP = EIRP − 2.15 dB",
        "  no bandwidth given on line 2: land mobile 16 kHz assumed from the kind",
        "  tx.csv, line 4, field `Frequency`: `abc` is not a number",
    ];
    for w in want {
        assert!(out.contains(w), "missing `{w}` in\n{out}");
    }
}

#[test]
fn columns_settle_what_the_names_do_not_on_every_command() {
    let tmp = scratch();
    let dir = tmp.path();
    std::fs::write(
        dir.join("tx.csv"),
        "Licence,Ch A,Ch B,Width,Output,Mast lat,Mast lon\n\
         QX1ALP,152.84,152.84,16,300 W,45.103405,-122.410791\n\
         QX2BRV,159.34,159.34,11.25,100 W,45.105340,-122.412764\n",
    )
    .unwrap();
    std::fs::write(
        dir.join("rx.csv"),
        "Licence,Ch A,Mast lat,Mast lon\nRX1,146.34,45.103,-122.412\n",
    )
    .unwrap();
    std::fs::write(
        dir.join("st.csv"),
        "Licence,LATD,LATM,LATS,LATH,LOND,LONM,LONS,LONH\nOLD-TWR,45,6,16.128,N,122,24,51.2316,W\n",
    )
    .unwrap();
    std::fs::write(
        dir.join("map.txt"),
        "# the export's columns\nid=Licence\nfreq=Ch A\nbw_khz=Width\nerp=Output\nlat=Mast lat\nlon=Mast lon\n",
    )
    .unwrap();
    // without a mapping: the id is found, the frequency is not
    let o = pim_in(Some(dir), &["explain", "146.34", "--emitters", "tx.csv"]);
    assert_eq!(o.status.code(), Some(3));
    assert!(
        stderr_of(&o).contains("missing column"),
        "{}",
        stderr_of(&o)
    );
    let o = pim_in(
        Some(dir),
        &[
            "explain",
            "146.34",
            "--emitters",
            "tx.csv",
            "--columns",
            "map.txt",
        ],
    );
    assert_eq!(o.status.code(), Some(0), "{}", stderr_of(&o));
    assert!(
        stdout_of(&o).contains("2·QX1ALP − QX2BRV"),
        "{}",
        stdout_of(&o)
    );
    let o = pim_in(
        Some(dir),
        &[
            "study",
            "--emitters",
            "tx.csv",
            "--receivers",
            "rx.csv",
            "--columns",
            "map.txt",
            "--format",
            "json",
        ],
    );
    assert_eq!(o.status.code(), Some(0), "{}", stderr_of(&o));
    assert!(stdout_of(&o).contains("RX1"));
    let log = crate::support::workspace_root().join("field-logs/walk.csv");
    let o = pim_in(
        Some(dir),
        &[
            "fix",
            "--log",
            &log.display().to_string(),
            "--format",
            "geojson",
            "--structures",
            "st.csv",
            "--emitters",
            "tx.csv",
            "--columns",
            "map.txt",
            "--columns",
            "id=Licence,lat=LATD+LATM+LATS+LATH,lon=LOND+LONM+LONS+LONH",
        ],
    );
    assert_eq!(o.status.code(), Some(0), "{}", stderr_of(&o));
    assert!(stdout_of(&o).contains("OLD-TWR"));
    // a pair naming no column of any file read is refused
    let o = pim_in(
        Some(dir),
        &[
            "explain",
            "146.34",
            "--emitters",
            "tx.csv",
            "--columns",
            "map.txt",
            "--columns",
            "note=Remarks",
        ],
    );
    assert_eq!(o.status.code(), Some(2));
    assert_eq!(
        stderr_of(&o).trim().lines().last().unwrap(),
        "pim: --columns: `note=Remarks` names a column no file read has (tx.csv has Licence, Ch A, Ch B, Width, Output, Mast lat, Mast lon)"
    );
    let o = pim_in(
        Some(dir),
        &[
            "explain",
            "146.34",
            "--emitters",
            "tx.csv",
            "--columns",
            "frequ=Ch A",
        ],
    );
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr_of(&o).starts_with("pim: --columns: `frequ` is not a field; fields: id, freq"));
    // the help names the option on each command that reads these files
    for command in [
        "explain", "study", "sweep", "ticket", "fix", "walk", "emitters",
    ] {
        let o = pim(&[command, "--help"]);
        assert!(stdout_of(&o).contains("--columns"), "{command}");
    }
}
