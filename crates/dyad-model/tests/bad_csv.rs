//! Loading measurement files: a table of malformed inputs, each of which must
//! give an error naming the file, the line and the column, and good inputs
//! whose values must arrive converted to internal units (JD, radians, mas, km/s).

use std::f64::consts::PI;
use std::io::Write;
use std::path::Path;

use dyad_model::data::{RelativePosition, Star};
use dyad_model::load::{
    load_astrometry, load_astrometry_from_reader, load_dataset, load_velocities,
    load_velocities_from_reader,
};
use dyad_model::ModelError;

#[derive(Clone, Copy)]
enum Kind {
    Astrometry,
    Velocities,
}

struct Case {
    what: &'static str,
    kind: Kind,
    content: &'static [u8],
    /// Expected 1-based line, or None when the error has no line (empty file).
    line: Option<usize>,
    /// Expected column name, or None when the error is about a whole line.
    column: Option<&'static str>,
    /// Substrings the message must contain.
    needles: &'static [&'static str],
}

/// The header of a polar astrometry file.
macro_rules! polar {
    () => {
        "jd, sep_mas, sep_err_mas, pa_deg, pa_err_deg"
    };
}

/// The header of a velocity file.
macro_rules! rv {
    () => {
        "jd, rv_kms, rv_err_kms, star, instrument"
    };
}

macro_rules! bytes {
    ($($part:expr),* $(,)?) => { concat!($($part),*).as_bytes() };
}

fn cases() -> Vec<Case> {
    use Kind::{Astrometry as A, Velocities as V};
    vec![
        Case {
            what: "missing column",
            kind: A,
            content: b"jd, sep_mas, sep_err_mas, pa_deg\n2451545.0, 100, 1, 10\n",
            line: Some(1),
            column: Some("pa_err_deg"),
            needles: &["missing column 'pa_err_deg'"],
        },
        Case {
            what: "unknown column",
            kind: A,
            content: bytes!("jd, sep_mas, sep_err_mas, pa_deg, pa_err_deg, seeing\n", "2451545.0, 100, 1, 10, 1, 0.8\n"),
            line: Some(1),
            column: Some("seeing"),
            needles: &["unknown column 'seeing'", "accepted columns", "sep_arcsec", "corr, source"],
        },
        Case {
            what: "misspelt column",
            kind: A,
            content: bytes!("jd, sep_mas, sep_eror_mas, pa_deg, pa_err_deg\n", "2451545.0, 100, 1, 10, 1\n"),
            line: Some(1),
            column: Some("sep_eror_mas"),
            needles: &["unknown column", "accepted columns"],
        },
        Case {
            what: "unknown unit of separation",
            kind: A,
            content: bytes!("jd, sep_deg, sep_err_mas, pa_deg, pa_err_deg\n", "2451545.0, 100, 1, 10, 1\n"),
            line: Some(1),
            column: Some("sep_deg"),
            needles: &["unknown unit 'deg'", "sep_mas or sep_arcsec"],
        },
        Case {
            what: "unknown unit of position angle",
            kind: A,
            content: bytes!("jd, sep_mas, sep_err_mas, pa_rad, pa_err_deg\n", "2451545.0, 100, 1, 1, 1\n"),
            line: Some(1),
            column: Some("pa_rad"),
            needles: &["unknown unit 'rad'", "pa_deg"],
        },
        Case {
            what: "unknown unit of velocity",
            kind: V,
            content: bytes!("jd, rv_mps, rv_err_kms, star, instrument\n", "2451545.0, 10, 0.1, primary, coude\n"),
            line: Some(1),
            column: Some("rv_mps"),
            needles: &["unknown unit 'mps'", "rv_kms or rv_ms"],
        },
        Case {
            what: "quantity without a unit",
            kind: A,
            content: bytes!("jd, sep, sep_err_mas, pa_deg, pa_err_deg\n", "2451545.0, 100, 1, 10, 1\n"),
            line: Some(1),
            column: Some("sep"),
            needles: &["needs a unit suffix", "sep_mas or sep_arcsec"],
        },
        Case {
            what: "two time columns",
            kind: A,
            content: bytes!("jd, mjd, sep_mas, sep_err_mas, pa_deg, pa_err_deg\n", "2451545.0, 51544.5, 100, 1, 10, 1\n"),
            line: Some(1),
            column: Some("mjd"),
            needles: &["two time columns", "'jd' and 'mjd'"],
        },
        Case {
            what: "no time column",
            kind: A,
            content: bytes!("sep_mas, sep_err_mas, pa_deg, pa_err_deg\n", "100, 1, 10, 1\n"),
            line: Some(1),
            column: Some("jd"),
            needles: &["missing time column", "jd, mjd, jyear, byear"],
        },
        Case {
            what: "polar and Cartesian mixed",
            kind: A,
            content: bytes!("jd, sep_mas, sep_err_mas, pa_deg, pa_err_deg, dra_mas\n", "2451545.0, 100, 1, 10, 1, 5\n"),
            line: Some(1),
            column: Some("dra_mas"),
            needles: &["mixes polar", "Cartesian"],
        },
        Case {
            what: "duplicate column name",
            kind: A,
            content: bytes!("jd, sep_mas, sep_err_mas, pa_deg, pa_err_deg, SEP_MAS\n", "2451545.0, 100, 1, 10, 1, 100\n"),
            line: Some(1),
            column: Some("sep_mas"),
            needles: &["duplicate column 'sep_mas'", "fields 2 and 6"],
        },
        Case {
            what: "same quantity in two units",
            kind: A,
            content: bytes!("jd, sep_mas, sep_arcsec, sep_err_mas, pa_deg, pa_err_deg\n", "2451545.0, 100, 0.1, 1, 10, 1\n"),
            line: Some(1),
            column: Some("sep_arcsec"),
            needles: &["separation is given twice"],
        },
        Case {
            what: "data where the header should be",
            kind: A,
            content: b"2451545.0, 100, 1, 10, 1\n",
            line: Some(1),
            column: Some("2451545.0"),
            needles: &["looks like data", "header"],
        },
        Case {
            what: "non-numeric value",
            kind: A,
            content: bytes!("jd, sep_mas, sep_err_mas, pa_deg, pa_err_deg\n", "2451545.0, 100, 1, 10, 1\n", "2451546.0, abc, 1, 10, 1\n"),
            line: Some(3),
            column: Some("sep_mas"),
            needles: &["'abc' is not a number"],
        },
        Case {
            what: "empty numeric value",
            kind: A,
            content: bytes!("jd, sep_mas, sep_err_mas, pa_deg, pa_err_deg\n", "2451545.0, 100, , 10, 1\n"),
            line: Some(2),
            column: Some("sep_err_mas"),
            needles: &["empty value"],
        },
        Case {
            what: "NaN",
            kind: A,
            content: bytes!("jd, sep_mas, sep_err_mas, pa_deg, pa_err_deg\n", "2451545.0, NaN, 1, 10, 1\n"),
            line: Some(2),
            column: Some("sep_mas"),
            needles: &["not a finite number"],
        },
        Case {
            what: "infinite error",
            kind: V,
            content: bytes!(rv!(), "\n", "2451545.0, 10, inf, primary, coude\n"),
            line: Some(2),
            column: Some("rv_err_kms"),
            needles: &["not a finite number"],
        },
        Case {
            what: "negative error",
            kind: A,
            content: bytes!(polar!(), "\n", "2451545.0, 100, -1, 10, 1\n"),
            line: Some(2),
            column: Some("sep_err_mas"),
            needles: &["must be positive", "-1"],
        },
        Case {
            what: "zero error",
            kind: A,
            content: bytes!(polar!(), "\n", "2451545.0, 100, 1, 10, 0\n"),
            line: Some(2),
            column: Some("pa_err_deg"),
            needles: &["must be positive"],
        },
        Case {
            what: "zero velocity error in m/s",
            kind: V,
            content: bytes!("mjd, rv_ms, rv_err_ms, star, instrument\n", "51544.5, 10, 0, primary, coude\n"),
            line: Some(2),
            column: Some("rv_err_ms"),
            needles: &["must be positive"],
        },
        Case {
            what: "position-angle error of 180 degrees or more",
            kind: A,
            content: bytes!(polar!(), "\n", "2451545.0, 100, 1, 10, 180\n"),
            line: Some(2),
            column: Some("pa_err_deg"),
            needles: &["below 180"],
        },
        Case {
            what: "correlation of 1",
            kind: A,
            content: bytes!("jd, dra_mas, ddec_mas, dra_err_mas, ddec_err_mas, corr\n", "2451545.0, 10, 20, 1, 1, 0.2\n", "2451546.0, 10, 20, 1, 1, 1.0\n"),
            line: Some(3),
            column: Some("corr"),
            needles: &["strictly between -1 and 1"],
        },
        Case {
            what: "correlation below -1",
            kind: A,
            content: bytes!("jd, dra_mas, ddec_mas, dra_err_mas, ddec_err_mas, corr\n", "2451545.0, 10, 20, 1, 1, -1.5\n"),
            line: Some(2),
            column: Some("corr"),
            needles: &["strictly between -1 and 1"],
        },
        Case {
            what: "position angle of 360",
            kind: A,
            content: bytes!(polar!(), "\n", "2451545.0, 100, 1, 360, 1\n"),
            line: Some(2),
            column: Some("pa_deg"),
            needles: &["[0, 360)", "got 360"],
        },
        Case {
            what: "negative position angle",
            kind: A,
            content: bytes!(polar!(), "\n", "2451545.0, 100, 1, -5, 1\n"),
            line: Some(2),
            column: Some("pa_deg"),
            needles: &["[0, 360)", "got -5"],
        },
        Case {
            what: "negative separation",
            kind: A,
            content: bytes!(polar!(), "\n", "2451545.0, -100, 1, 10, 1\n"),
            line: Some(2),
            column: Some("sep_mas"),
            needles: &["cannot be negative"],
        },
        Case {
            what: "unknown star",
            kind: V,
            content: bytes!(rv!(), "\n", "2451545.0, 10, 0.1, tertiary, coude\n"),
            line: Some(2),
            column: Some("star"),
            needles: &["unknown star 'tertiary'", "primary, secondary"],
        },
        Case {
            what: "empty instrument",
            kind: V,
            content: bytes!(rv!(), "\n", "2451545.0, 10, 0.1, primary, coude\n", "2451546.0, 10, 0.1, secondary,  \n"),
            line: Some(3),
            column: Some("instrument"),
            needles: &["empty instrument"],
        },
        Case {
            what: "missing instrument column",
            kind: V,
            content: bytes!("jd, rv_kms, rv_err_kms, star\n", "2451545.0, 10, 0.1, primary\n"),
            line: Some(1),
            column: Some("instrument"),
            needles: &["missing column 'instrument'"],
        },
        Case {
            what: "missing velocity column",
            kind: V,
            content: bytes!("jd, rv_err_kms, star, instrument\n", "2451545.0, 0.1, primary, coude\n"),
            line: Some(1),
            column: Some("rv_kms"),
            needles: &["missing column 'rv_kms'", "rv_ms"],
        },
        Case {
            what: "velocity faster than light (m/s given as km/s)",
            kind: V,
            content: bytes!(rv!(), "\n", "2451545.0, 312000, 0.1, primary, coude\n"),
            line: Some(2),
            column: Some("rv_kms"),
            needles: &["speed of light", "check the unit"],
        },
        Case {
            what: "too few fields",
            kind: A,
            content: bytes!(polar!(), "\n", "2451545.0, 100, 1, 10, 1\n", "2451546.0, 100, 1\n"),
            line: Some(3),
            column: Some("pa_deg"),
            needles: &["expected 5 fields", "found 3", "ends before column 'pa_deg'"],
        },
        Case {
            what: "too many fields",
            kind: V,
            content: bytes!(rv!(), "\n", "2451545.0, 10, 0.1, primary, coude, extra\n"),
            line: Some(2),
            column: None,
            needles: &["expected 5 fields", "found 6", "extra fields"],
        },
        Case {
            what: "empty file",
            kind: A,
            content: b"",
            line: None,
            column: None,
            needles: &["no header and no data"],
        },
        Case {
            what: "only comments and blank lines",
            kind: V,
            content: b"# nothing yet\n\n   \n  # still nothing\n",
            line: None,
            column: None,
            needles: &["no header and no data", "rv_kms"],
        },
        Case {
            what: "header only",
            kind: A,
            content: bytes!("# epochs to come\n", polar!(), "\n\n"),
            line: Some(2),
            column: None,
            needles: &["header but no data rows"],
        },
        Case {
            what: "non-UTF-8 bytes",
            kind: A,
            content: b"jd, sep_mas, sep_err_mas, pa_deg, pa_err_deg, source\n2451545.0, 100, 1, 10, 1, ok\n2451546.0, 100, 1, 10, 1, Sch\xf6nfeld\n",
            line: Some(3),
            column: None,
            needles: &["not valid UTF-8", "position 30"],
        },
        Case {
            what: "MJD under a jd column",
            kind: A,
            content: bytes!(polar!(), "\n", "58000.0, 100, 1, 10, 1\n"),
            line: Some(2),
            column: Some("jd"),
            needles: &["time 58000 (jd)", "years 1000 to 3000", "right time column"],
        },
        Case {
            what: "JD under an mjd column",
            kind: V,
            content: bytes!("mjd, rv_kms, rv_err_kms, star, instrument\n", "2458000.5, 10, 0.1, primary, coude\n"),
            line: Some(2),
            column: Some("mjd"),
            needles: &["time 2458000.5 (mjd)", "years 1000 to 3000"],
        },
        Case {
            what: "JD under a jyear column",
            kind: A,
            content: bytes!("jyear, sep_mas, sep_err_mas, pa_deg, pa_err_deg\n", "2451545.0, 100, 1, 10, 1\n"),
            line: Some(2),
            column: Some("jyear"),
            needles: &["time 2451545 (jyear)"],
        },
        Case {
            what: "line numbers count comments and blank lines",
            kind: A,
            content: bytes!("# system: an invented pair\n", "\n", polar!(), "\n", "  # first season\n", "2451545.0, 100, 1, 10, 1\n", "\n", "2451546.0, 100, 1, 10, x\n"),
            line: Some(7),
            column: Some("pa_err_deg"),
            needles: &["'x' is not a number"],
        },
        Case {
            what: "unterminated quote",
            kind: A,
            content: bytes!("jd, sep_mas, sep_err_mas, pa_deg, pa_err_deg, source\n", "2451545.0, 100, 1, 10, 1, \"speckle, 4 m\n"),
            line: Some(2),
            column: None,
            needles: &["never closed"],
        },
        Case {
            what: "Cartesian file missing an error column",
            kind: A,
            content: bytes!("jd, dra_mas, ddec_mas, dra_err_mas\n", "2451545.0, 1, 2, 3\n"),
            line: Some(1),
            column: Some("ddec_err_mas"),
            needles: &["missing column 'ddec_err_mas'"],
        },
        Case {
            what: "separation overflowing on conversion",
            kind: A,
            content: bytes!("jd, sep_arcsec, sep_err_mas, pa_deg, pa_err_deg\n", "2451545.0, 1e306, 1, 10, 1\n"),
            line: Some(2),
            column: Some("sep_arcsec"),
            needles: &["too large"],
        },
        Case {
            what: "implausibly small error",
            kind: V,
            content: bytes!(rv!(), "\n", "2451545.0, 10, 1e-12, primary, coude\n"),
            line: Some(2),
            column: Some("rv_err_kms"),
            needles: &["implausibly small"],
        },
        Case {
            what: "error in a file with a byte-order mark and CRLF line ends",
            kind: A,
            content: bytes!("\u{feff}# invented\r\n", polar!(), "\r\n", "2451545.0, 100, 1, 10, 1\r\n", "2451546.0, 100, -1, 10, 1\r\n"),
            line: Some(4),
            column: Some("sep_err_mas"),
            needles: &["an error must be positive, got -1"],
        },
        Case {
            what: "quoted field with a comma before a bad field",
            kind: A,
            content: bytes!("jd, sep_mas, sep_err_mas, pa_deg, source, pa_err_deg\n", "2451545.0, 100, 1, 10, \"speckle, 4 m\", NaN\n"),
            line: Some(2),
            column: Some("pa_err_deg"),
            needles: &["'NaN' is not a finite number"],
        },
        Case {
            what: "comment lines with quotes and commas are skipped whole",
            kind: V,
            content: bytes!("# the \"best, night\n", "  # indented, \"too\n", rv!(), "\n", "2451545.0, 10, 0.1, primary, coude\n", "2451546.0, 10, 0.1, tertiary, coude\n"),
            line: Some(5),
            column: Some("star"),
            needles: &["unknown star 'tertiary'"],
        },
        Case {
            what: "quote closed on a later line",
            kind: V,
            content: bytes!(rv!(), "\n", "2451545.0, 10, 0.1, primary, \"coude\n", "north\"\n"),
            line: Some(2),
            column: None,
            needles: &["never closed"],
        },
        Case {
            what: "unknown unit of a velocity error",
            kind: V,
            content: bytes!("jd, rv_kms, rv_err_kmh, star, instrument\n", "2451545.0, 10, 0.1, primary, coude\n"),
            line: Some(1),
            column: Some("rv_err_kmh"),
            needles: &["unknown unit 'kmh'", "rv_err_kms or rv_err_ms"],
        },
        Case {
            what: "no position columns at all",
            kind: A,
            content: bytes!("jd, corr\n", "2451545.0, 0.1\n"),
            line: Some(1),
            column: Some("sep_mas"),
            needles: &["no position columns"],
        },
    ]
}

#[test]
fn malformed_inputs_name_file_line_and_column() {
    let cases = cases();
    assert!(cases.len() >= 20);
    for case in &cases {
        let file = match case.kind {
            Kind::Astrometry => Path::new("data/astrometry.csv"),
            Kind::Velocities => Path::new("data/velocities.csv"),
        };
        let error = match case.kind {
            Kind::Astrometry => load_astrometry_from_reader(case.content, file).map(|_| ()),
            Kind::Velocities => {
                let mut instruments = vec!["earlier".to_owned()];
                let result =
                    load_velocities_from_reader(case.content, file, &mut instruments).map(|_| ());
                assert_eq!(
                    instruments,
                    ["earlier"],
                    "{}: a failed load must not add instruments",
                    case.what
                );
                result
            }
        }
        .expect_err(case.what);
        let ModelError::Input { location, .. } = &error else {
            panic!("{}: expected an input error, got {error:?}", case.what);
        };
        assert_eq!(location.file, file, "{}", case.what);
        assert_eq!(location.line, case.line, "{}: {error}", case.what);
        assert_eq!(
            location.column.as_deref(),
            case.column,
            "{}: {error}",
            case.what
        );
        let message = error.to_string();
        assert!(
            message.starts_with(&file.display().to_string()),
            "{}: {message}",
            case.what
        );
        if let Some(line) = case.line {
            assert!(
                message.contains(&format!(", line {line}")),
                "{}: {message}",
                case.what
            );
        }
        if let Some(column) = case.column {
            assert!(
                message.contains(&format!("column '{column}'")),
                "{}: {message}",
                case.what
            );
        }
        for needle in case.needles {
            assert!(
                message.contains(needle),
                "{}: '{message}' lacks '{needle}'",
                case.what
            );
        }
    }
}

fn close(a: f64, b: f64, tolerance: f64) -> bool {
    (a - b).abs() <= tolerance
}

#[test]
fn polar_values_are_converted() {
    // 1 arcsec = 1000 mas, 90 deg = pi/2 rad (definitions); jyear 2000.0 =
    // JD 2451545.0 and MJD = JD - 2400000.5 (common practice).
    let text = "\u{feff}# an invented pair\r\n\
                JYEAR , Sep_Arcsec, sep_err_arcsec , pa_deg, pa_err_deg, corr, source\r\n\
                2000.0, 1.5, 0.002, 90, 0.5, -0.25, \"speckle, 4 m \"\"A\"\"\"\r\n\
                2001.5, 0.0, 0.004, -0, 1, 0, \r\n";
    let epochs = load_astrometry_from_reader(text.as_bytes(), Path::new("p.csv")).unwrap();
    assert_eq!(epochs.len(), 2);
    assert_eq!(epochs[0].t_jd, 2_451_545.0);
    assert!(close(epochs[1].t_jd, 2_451_545.0 + 1.5 * 365.25, 1e-6));
    let RelativePosition::Polar {
        sep_mas,
        sep_err_mas,
        pa_rad,
        pa_err_rad,
        corr,
    } = epochs[0].position
    else {
        panic!("expected polar");
    };
    assert!(close(sep_mas, 1500.0, 1e-9));
    assert!(close(sep_err_mas, 2.0, 1e-12));
    assert!(close(pa_rad, PI / 2.0, 1e-15));
    assert!(close(pa_err_rad, 0.5 * PI / 180.0, 1e-17));
    assert_eq!(corr, -0.25);
    assert_eq!(epochs[0].source.as_deref(), Some("speckle, 4 m \"A\""));
    // -0 is read as +0; an empty source is None; zero separation is allowed.
    let RelativePosition::Polar {
        sep_mas, pa_rad, ..
    } = epochs[1].position
    else {
        panic!("expected polar");
    };
    assert_eq!(sep_mas, 0.0);
    assert!(pa_rad == 0.0 && pa_rad.is_sign_positive());
    assert_eq!(epochs[1].source, None);
}

#[test]
fn quoting_follows_csv_with_blanks_allowed_before_a_quote() {
    // RFC 4180 quoting (a doubled quote inside quotes is one quote), read by
    // the csv crate; blanks around fields and before an opening quote are
    // ours to allow; a quote inside an unquoted field is text.
    let text = "jd,sep_mas,sep_err_mas,pa_deg,pa_err_deg,source\n\
                2451545.0,100,1,10,1,\"a, \"\"b\"\"\"\n\
                2451546.0,100,1,10,1,\t  \"c,d\"  \n\
                2451547.0,100,1,10,1,  4\" refractor\n\
                2451548.0,100,1,10,1,\n";
    let epochs = load_astrometry_from_reader(text.as_bytes(), Path::new("q.csv")).unwrap();
    let sources: Vec<Option<&str>> = epochs.iter().map(|e| e.source.as_deref()).collect();
    assert_eq!(
        sources,
        [Some("a, \"b\""), Some("c,d"), Some("4\" refractor"), None]
    );
}

#[test]
fn cartesian_values_and_time_scales_are_converted() {
    // MJD 0 = JD 2400000.5 (definition); B1900.0 = JD 2415020.31352
    // (J. H. Lieske 1979, A&A 73, 282).
    for (column, value, jd) in [
        ("mjd", "0", 2_400_000.5),
        ("jd", "2451545.0", 2_451_545.0),
        ("byear", "1900.0", 2_415_020.313_52),
        ("jyear", "2000.0", 2_451_545.0),
    ] {
        let text = format!(
            "{column},dra_mas,ddec_mas,dra_err_mas,ddec_err_mas\n{value},-12.5,30,0.5,0.75\n"
        );
        let epochs = load_astrometry_from_reader(text.as_bytes(), Path::new("c.csv")).unwrap();
        assert!(
            close(epochs[0].t_jd, jd, 1e-6),
            "{column} {value}: {}",
            epochs[0].t_jd
        );
        assert_eq!(
            epochs[0].position,
            RelativePosition::Cartesian {
                dra_mas: -12.5,
                ddec_mas: 30.0,
                dra_err_mas: 0.5,
                ddec_err_mas: 0.75,
                corr: 0.0
            }
        );
    }
}

#[test]
fn columns_may_come_in_any_order() {
    let text =
        "pa_err_deg, pa_deg, source, sep_err_mas, sep_mas, jd\n1, 45, x, 2, 300, 2451545.0\n";
    let epochs = load_astrometry_from_reader(text.as_bytes(), Path::new("o.csv")).unwrap();
    let RelativePosition::Polar {
        sep_mas,
        sep_err_mas,
        pa_rad,
        pa_err_rad,
        ..
    } = epochs[0].position
    else {
        panic!("expected polar");
    };
    assert_eq!((sep_mas, sep_err_mas), (300.0, 2.0));
    assert!(close(pa_rad, PI / 4.0, 1e-15) && close(pa_err_rad, PI / 180.0, 1e-17));
    // The leftmost bad field is the one reported.
    let bad = "pa_err_deg, pa_deg, sep_err_mas, sep_mas, jd\n-1, 400, 2, 300, 2451545.0\n";
    let error = load_astrometry_from_reader(bad.as_bytes(), Path::new("o.csv")).unwrap_err();
    assert!(error.to_string().contains("column 'pa_err_deg'"), "{error}");
}

#[test]
fn velocities_are_converted_and_instruments_interned() {
    let file = Path::new("v.csv");
    let text = "mjd, rv_ms, rv_err_ms, star, instrument\n\
                51544.5, 1000, 50, Primary, echelle\n\
                51545.5, -2500.5, 20, SECONDARY, \"fibre, red arm\"\n\
                51546.5, 0, 20, secondary, echelle\n";
    let mut instruments = vec!["coude".to_owned()];
    let points = load_velocities_from_reader(text.as_bytes(), file, &mut instruments).unwrap();
    assert_eq!(instruments, ["coude", "echelle", "fibre, red arm"]);
    assert_eq!(points.len(), 3);
    // 1000 m/s = 1 km/s (definition).
    assert!(close(points[0].rv_kms, 1.0, 1e-15) && close(points[0].rv_err_kms, 0.05, 1e-15));
    assert_eq!(points[0].t_jd, 2_451_545.0);
    assert_eq!((points[0].star, points[0].instrument), (Star::Primary, 1));
    assert!(close(points[1].rv_kms, -2.5005, 1e-15));
    assert_eq!((points[1].star, points[1].instrument), (Star::Secondary, 2));
    assert_eq!(points[2].instrument, 1);
}

#[test]
fn files_on_disk_make_a_dataset() {
    let folder = tempfile::tempdir().unwrap();
    let write = |name: &str, text: &str| {
        let path = folder.path().join(name);
        std::fs::File::create(&path)
            .unwrap()
            .write_all(text.as_bytes())
            .unwrap();
        path
    };
    let astrometry = write(
        "positions.csv",
        "jd,sep_mas,sep_err_mas,pa_deg,pa_err_deg\n2455000.5,250,3,120,0.8\n",
    );
    let first = write(
        "rv1.csv",
        "jd,rv_kms,rv_err_kms,star,instrument\n2455001.5,12.5,0.3,primary,north\n",
    );
    let second = write(
        "rv2.csv",
        "jd,rv_kms,rv_err_kms,star,instrument\n2455002.5,-3,0.3,secondary,south\n2455003.5,-4,0.3,primary,north\n",
    );
    let dataset = load_dataset(Some(&astrometry), &[&first, &second]).unwrap();
    assert_eq!(dataset.astrometry.len(), 1);
    assert_eq!(dataset.velocities.len(), 3);
    assert_eq!(dataset.instruments, ["north", "south"]);
    let used: Vec<usize> = dataset.velocities.iter().map(|v| v.instrument).collect();
    assert_eq!(used, [0, 1, 0]);

    assert_eq!(load_astrometry(&astrometry).unwrap(), dataset.astrometry);
    let mut instruments = Vec::new();
    assert_eq!(load_velocities(&first, &mut instruments).unwrap().len(), 1);

    let only_rv = load_dataset(None, &[&second]).unwrap();
    assert!(only_rv.astrometry.is_empty() && only_rv.instruments == ["south", "north"]);

    // A missing file is an I/O error naming it; no files at all is refused.
    let missing = folder.path().join("absent.csv");
    let error = load_dataset(Some(&missing), &[]).unwrap_err();
    assert!(
        matches!(error, ModelError::Io { .. }) && error.to_string().contains("absent.csv"),
        "{error}"
    );
    assert!(matches!(
        load_dataset(None, &[]),
        Err(ModelError::InvalidModel(_))
    ));
    // An error in the second velocity file names that file.
    let broken = write(
        "rv3.csv",
        "jd,rv_kms,rv_err_kms,star,instrument\n2455002.5,-3,0.3,third,south\n",
    );
    let error = load_dataset(Some(&astrometry), &[&first, &broken]).unwrap_err();
    assert!(
        error.to_string().contains("rv3.csv, line 2, column 'star'"),
        "{error}"
    );
}
