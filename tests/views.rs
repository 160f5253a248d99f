//! The views of sql/views.sql on a tiny hand-made scenario (invented
//! records) whose ages and flags were worked out by hand.
//!
//! Bus T01 (depot "Test depot") has two door-actuator positions, front
//! door and rear door; the snapshot is 2025-01-01 (midnight).
//!
//! | fitment | unit  | position | fitted              | odo    | removed             | odo    | reason         |
//! |---------|-------|----------|---------------------|--------|---------------------|--------|----------------|
//! | 1       | S-001 | front    | 2024-01-01 08:00:00 | 10 000 | 2024-03-01 20:00:00 | 25 000 | FAIL           |
//! | 2       | S-002 | rear     | 2024-01-01          | 10 000 | 2024-07-01          | 52 000 | PREV (planned) |
//! | 3       | S-003 | front    | 2024-03-02 06:00:00 | 25 150 | 2025-01-12 09:30:00 | 90 500 | FAIL (after snapshot) |
//! | 4       | S-004 | rear     | 2024-07-01          | 52 000 | 2024-09-10 10:00:00 | 63 000 | ACCD (other)   |
//! | 5       | S-002 | rear     | 2024-09-11          | 63 200 | -                   | -      | (refit of S-002) |
//! | 6       | S-005 | front    | 2025-01-12 13:00:00 | 90 500 | -                   | -      | (after snapshot) |
//!
//! Odometer readings of T01: 2024-04-01 20:00 30 000; 2024-10-01 12:00
//! 75 000; 2024-10-05 12:00 75 600; 2024-12-30 12:00 88 500; 2025-01-15
//! 18:00 91 000.
//!
//! Bus T02 entered service 2024-12-20 with one fitment (S-006, front door,
//! 2024-12-20 09:00:00 at 12 km) and no readings.
//!
//! Hand computation at snapshot 2025-01-01:
//! - T01 last odometer on or before the snapshot: 88 500 (2024-12-30 12:00).
//!   Rate window starts 90 days before the snapshot, 2024-10-03 00:00; the
//!   last observation at or before it is the reading of 2024-10-01 12:00
//!   (75 000; the one of 2024-10-05 is inside the window), so km_per_day =
//!   13 500 km / 90 days = 150.
//! - fitment 1: 25 000 - 10 000 = 15 000 km; Jan 1 08:00 to Mar 1 20:00 2024
//!   (leap year) = 31 + 29 days + 12 h = 60.5 days; failure.
//! - fitment 2: 42 000 km; Jan 1 to Jul 1 2024 = 31+29+31+30+31+30 = 182
//!   days; planned.
//! - fitment 3: removal after the snapshot is ignored, so in service:
//!   88 500 - 25 150 = 63 350 km; 2024-03-02 06:00 to 2025-01-01 00:00 =
//!   305 days - 6 h = 304.75 days.
//! - fitment 4: 11 000 km; Jul 1 to Sep 10 = 31 + 31 + 9 days + 10 h =
//!   71 + 10/24 days; other removal.
//! - fitment 5: 88 500 - 63 200 = 25 300 km; Sep 11 to Jan 1 = 20 + 31 + 30
//!   + 31 = 112 days; in service.
//! - fitment 6: fitted after the snapshot, so not a row.
//! - T02: its only odometer value is the fitment's (12 km), so age 0 km,
//!   2024-12-20 09:00 to 2025-01-01 = 12 days - 9 h = 11.625 days, and no
//!   rate (km_per_day NULL: fewer than one day between observations).

use rusqlite::Connection;

const SCHEMA: &str = include_str!("../sql/schema.sql");
const VIEWS: &str = include_str!("../sql/views.sql");

const SCENARIO: &str = "
INSERT INTO depot VALUES (1, 'TST', 'Test depot');
INSERT INTO bus VALUES (1, 'T01', 1, '2024-01-01'), (2, 'T02', 1, '2024-12-20');
INSERT INTO component_class VALUES (1, 'DRA', 'door actuator'), (2, 'ALT', 'alternator');
INSERT INTO supplier VALUES (1, 'Supplier One'), (2, 'Supplier Two');
INSERT INTO position VALUES (1, 1, 'D1', 'front door'), (2, 1, 'D3', 'rear door'),
                            (3, 2, 'A1', 'first alternator');
INSERT INTO unit VALUES (1, 1, 1, 'S-001'), (2, 1, 2, 'S-002'), (3, 1, 1, 'S-003'),
                        (4, 1, 2, 'S-004'), (5, 1, 1, 'S-005'), (6, 1, 1, 'S-006'),
                        (7, 2, 1, 'A-001');
INSERT INTO removal_reason VALUES
    ('FAIL', 'failed in service', 1, 0),
    ('PREV', 'preventive replacement', 0, 1),
    ('ACCD', 'accident damage', 0, 0);
INSERT INTO fitment VALUES
    (1, 1, 1, 1, '2024-01-01 08:00:00', 10000),
    (2, 2, 1, 2, '2024-01-01', 10000),
    (3, 3, 1, 1, '2024-03-02 06:00:00', 25150),
    (4, 4, 1, 2, '2024-07-01', 52000),
    (5, 2, 1, 2, '2024-09-11', 63200),
    (6, 5, 1, 1, '2025-01-12 13:00:00', 90500),
    (7, 6, 2, 1, '2024-12-20 09:00:00', 12);
INSERT INTO removal VALUES
    (1, '2024-03-01 20:00:00', 25000, 'FAIL'),
    (2, '2024-07-01', 52000, 'PREV'),
    (3, '2025-01-12 09:30:00', 90500, 'FAIL'),
    (4, '2024-09-10 10:00:00', 63000, 'ACCD');
INSERT INTO odometer_reading VALUES
    (1, '2024-04-01 20:00:00', 30000),
    (1, '2024-10-01 12:00:00', 75000),
    (1, '2024-10-05 12:00:00', 75600),
    (1, '2024-12-30 12:00:00', 88500),
    (1, '2025-01-15 18:00:00', 91000);
INSERT INTO snapshot VALUES (1, '2025-01-01');
";

fn open() -> Connection {
    let conn = Connection::open_in_memory().expect("in-memory database");
    lifedata::register(&conn).expect("register lifedata functions");
    conn.execute_batch(SCHEMA).expect("schema.sql");
    conn.execute_batch(VIEWS).expect("views.sql");
    conn.execute_batch(SCENARIO).expect("scenario");
    conn
}

#[derive(Debug, Clone, PartialEq)]
struct Life {
    fitment_id: i64,
    class: String,
    class_name: String,
    supplier: String,
    depot: String,
    fleet_no: String,
    position: String,
    unit_serial: String,
    fitted_at: String,
    ended_at: String,
    ended_how: String,
    reason: Option<String>,
    age_km: f64,
    age_days: f64,
    failed: i64,
}

fn lives(conn: &Connection) -> Vec<Life> {
    let mut stmt = conn
        .prepare(
            "SELECT fitment_id, class, class_name, supplier, depot, fleet_no, position,
                    unit_serial, fitted_at, ended_at, ended_how, reason, age_km,
                    age_days, failed
               FROM unit_life ORDER BY fitment_id",
        )
        .unwrap();
    stmt.query_map([], |r| {
        Ok(Life {
            fitment_id: r.get(0)?,
            class: r.get(1)?,
            class_name: r.get(2)?,
            supplier: r.get(3)?,
            depot: r.get(4)?,
            fleet_no: r.get(5)?,
            position: r.get(6)?,
            unit_serial: r.get(7)?,
            fitted_at: r.get(8)?,
            ended_at: r.get(9)?,
            ended_how: r.get(10)?,
            reason: r.get(11)?,
            age_km: r.get(12)?,
            age_days: r.get(13)?,
            failed: r.get(14)?,
        })
    })
    .unwrap()
    .collect::<rusqlite::Result<Vec<_>>>()
    .unwrap()
}

#[allow(clippy::too_many_arguments)]
fn life(
    fitment_id: i64,
    fleet_no: &str,
    position: &str,
    supplier: &str,
    unit_serial: &str,
    fitted_at: &str,
    ended_at: &str,
    ended_how: &str,
    reason: Option<&str>,
    age_km: f64,
    age_days: f64,
    failed: i64,
) -> Life {
    Life {
        fitment_id,
        class: "DRA".into(),
        class_name: "door actuator".into(),
        supplier: supplier.into(),
        depot: "Test depot".into(),
        fleet_no: fleet_no.into(),
        position: position.into(),
        unit_serial: unit_serial.into(),
        fitted_at: fitted_at.into(),
        ended_at: ended_at.into(),
        ended_how: ended_how.into(),
        reason: reason.map(Into::into),
        age_km,
        age_days,
        failed,
    }
}

/// Compares rows field by field, the floating ages to 1e-9 days / km.
fn assert_lives(got: &[Life], want: &[Life]) {
    assert_eq!(got.len(), want.len(), "row count: got {got:#?}");
    for (g, w) in got.iter().zip(want) {
        assert!(
            (g.age_days - w.age_days).abs() < 1e-9 && (g.age_km - w.age_km).abs() < 1e-9,
            "fitment {}: ages {} km / {} days, expected {} km / {} days",
            w.fitment_id,
            g.age_km,
            g.age_days,
            w.age_km,
            w.age_days
        );
        let g_rest = Life {
            age_km: 0.0,
            age_days: 0.0,
            ..g.clone()
        };
        let w_rest = Life {
            age_km: 0.0,
            age_days: 0.0,
            ..w.clone()
        };
        assert_eq!(g_rest, w_rest);
    }
}

/// Fitments 1 and 2, ended before any snapshot used here: a failure and a
/// planned removal.
fn settled_lives() -> Vec<Life> {
    vec![
        life(
            1,
            "T01",
            "front door",
            "Supplier One",
            "S-001",
            "2024-01-01 08:00:00",
            "2024-03-01 20:00:00",
            "failure",
            Some("FAIL"),
            15000.0,
            60.5,
            1,
        ),
        life(
            2,
            "T01",
            "rear door",
            "Supplier Two",
            "S-002",
            "2024-01-01",
            "2024-07-01",
            "planned",
            Some("PREV"),
            42000.0,
            182.0,
            0,
        ),
    ]
}

#[test]
fn unit_life_rows_at_the_snapshot() {
    let conn = open();
    let want = settled_lives()
        .into_iter()
        .chain([
            life(
                3,
                "T01",
                "front door",
                "Supplier One",
                "S-003",
                "2024-03-02 06:00:00",
                "2025-01-01",
                "in service",
                None,
                63350.0,
                304.75,
                0,
            ),
            life(
                4,
                "T01",
                "rear door",
                "Supplier Two",
                "S-004",
                "2024-07-01",
                "2024-09-10 10:00:00",
                "other removal",
                Some("ACCD"),
                11000.0,
                71.0 + 10.0 / 24.0,
                0,
            ),
            life(
                5,
                "T01",
                "rear door",
                "Supplier Two",
                "S-002",
                "2024-09-11",
                "2025-01-01",
                "in service",
                None,
                25300.0,
                112.0,
                0,
            ),
            life(
                7,
                "T02",
                "front door",
                "Supplier One",
                "S-006",
                "2024-12-20 09:00:00",
                "2025-01-01",
                "in service",
                None,
                0.0,
                11.625,
                0,
            ),
        ])
        .collect::<Vec<_>>();
    assert_lives(&lives(&conn), &want);
}

/// fitment_id, fleet_no, position, unit_serial, age_km, age_days,
/// km_per_day, odometer_at
type InService = (i64, String, String, String, f64, f64, Option<f64>, String);

#[test]
fn unit_in_service_rows_and_km_per_day() {
    let conn = open();
    let mut stmt = conn
        .prepare(
            "SELECT fitment_id, fleet_no, position, unit_serial, age_km, age_days,
                    km_per_day, odometer_at
               FROM unit_in_service ORDER BY fitment_id",
        )
        .unwrap();
    let rows: Vec<InService> = stmt
        .query_map([], |r| {
            Ok((
                r.get(0)?,
                r.get(1)?,
                r.get(2)?,
                r.get(3)?,
                r.get(4)?,
                r.get(5)?,
                r.get(6)?,
                r.get(7)?,
            ))
        })
        .unwrap()
        .collect::<rusqlite::Result<_>>()
        .unwrap();
    assert_eq!(rows.len(), 3, "{rows:#?}");

    let (id, fleet, pos, serial, km, days, rate, at) = &rows[0];
    assert_eq!(
        (*id, fleet.as_str(), pos.as_str(), serial.as_str()),
        (3, "T01", "front door", "S-003")
    );
    assert_eq!(*km, 63350.0);
    assert!((days - 304.75).abs() < 1e-9, "{days}");
    assert!((rate.unwrap() - 150.0).abs() < 1e-9, "{rate:?}");
    assert_eq!(at, "2024-12-30 12:00:00");

    let (id, fleet, pos, serial, km, days, rate, at) = &rows[1];
    assert_eq!(
        (*id, fleet.as_str(), pos.as_str(), serial.as_str()),
        (5, "T01", "rear door", "S-002")
    );
    assert_eq!(*km, 25300.0);
    assert!((days - 112.0).abs() < 1e-9, "{days}");
    assert!((rate.unwrap() - 150.0).abs() < 1e-9, "{rate:?}");
    assert_eq!(at, "2024-12-30 12:00:00");

    let (id, fleet, pos, serial, km, days, rate, at) = &rows[2];
    assert_eq!(
        (*id, fleet.as_str(), pos.as_str(), serial.as_str()),
        (7, "T02", "front door", "S-006")
    );
    assert_eq!(*km, 0.0);
    assert!((days - 11.625).abs() < 1e-9, "{days}");
    assert_eq!(*rate, None);
    assert_eq!(at, "2024-12-20 09:00:00");
}

#[test]
fn bus_usage_rate_window() {
    let conn = open();
    let (from, to, km, rate): (String, String, f64, f64) = conn
        .query_row(
            "SELECT rate_from, rate_to, odometer_km, km_per_day FROM bus_usage
              WHERE fleet_no = 'T01'",
            [],
            |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?, r.get(3)?)),
        )
        .unwrap();
    assert_eq!(from, "2024-10-01 12:00:00");
    assert_eq!(to, "2024-12-30 12:00:00");
    assert_eq!(km, 88500.0);
    assert!((rate - 150.0).abs() < 1e-9, "{rate}");
}

/// Moving the snapshot to 2025-01-20 replays the fleet at that date:
/// fitment 3's failure (2025-01-12 09:30, 90 500 km) now counts, fitment 6
/// appears, and in-service ages use the reading of 2025-01-15 18:00
/// (91 000 km).
///
/// - fitment 3: 90 500 - 25 150 = 65 350 km; 2024-03-02 06:00 to
///   2025-01-12 09:30 = 316 days + 3.5 h.
/// - fitment 5: 91 000 - 63 200 = 27 800 km; Sep 11 to Jan 20 = 131 days.
/// - fitment 6: 91 000 - 90 500 = 500 km; 2025-01-12 13:00 to 2025-01-20 =
///   7 days + 11 h.
/// - fitment 7 (T02): still 0 km (no later odometer); 2024-12-20 09:00 to
///   2025-01-20 = 31 days - 9 h = 30.625 days.
/// - T01 rate: window starts 2024-10-22; the last observation at or before
///   it is now the reading of 2024-10-05 12:00 (75 600), the last one
///   before the snapshot that of 2025-01-15 18:00 (91 000): 15 400 km over
///   Oct 5 12:00 to Jan 15 18:00 = 31 + 30 + 31 + 10 days + 6 h = 102.25
///   days.
#[test]
fn a_later_snapshot_replays_the_records() {
    let conn = open();
    conn.execute("UPDATE snapshot SET taken_at = '2025-01-20'", [])
        .unwrap();
    let want = settled_lives()
        .into_iter()
        .chain([
            life(
                3,
                "T01",
                "front door",
                "Supplier One",
                "S-003",
                "2024-03-02 06:00:00",
                "2025-01-12 09:30:00",
                "failure",
                Some("FAIL"),
                65350.0,
                316.0 + 3.5 / 24.0,
                1,
            ),
            life(
                4,
                "T01",
                "rear door",
                "Supplier Two",
                "S-004",
                "2024-07-01",
                "2024-09-10 10:00:00",
                "other removal",
                Some("ACCD"),
                11000.0,
                71.0 + 10.0 / 24.0,
                0,
            ),
            life(
                5,
                "T01",
                "rear door",
                "Supplier Two",
                "S-002",
                "2024-09-11",
                "2025-01-20",
                "in service",
                None,
                27800.0,
                131.0,
                0,
            ),
            life(
                6,
                "T01",
                "front door",
                "Supplier One",
                "S-005",
                "2025-01-12 13:00:00",
                "2025-01-20",
                "in service",
                None,
                500.0,
                7.0 + 11.0 / 24.0,
                0,
            ),
            life(
                7,
                "T02",
                "front door",
                "Supplier One",
                "S-006",
                "2024-12-20 09:00:00",
                "2025-01-20",
                "in service",
                None,
                0.0,
                30.625,
                0,
            ),
        ])
        .collect::<Vec<_>>();
    assert_lives(&lives(&conn), &want);

    let rate: f64 = conn
        .query_row(
            "SELECT km_per_day FROM bus_usage WHERE fleet_no = 'T01'",
            [],
            |r| r.get(0),
        )
        .unwrap();
    assert!((rate - 15400.0 / 102.25).abs() < 1e-9, "{rate}");
}

#[test]
fn the_views_feed_life_fit() {
    // Two failures (fitments 1 and 3) once the snapshot is 2025-01-20; the
    // fit must see exactly the rows of unit_life.
    let conn = open();
    conn.execute("UPDATE snapshot SET taken_at = '2025-01-20'", [])
        .unwrap();
    let (n, failures, suspensions): (i64, i64, i64) = conn
        .query_row(
            "SELECT json_extract(m, '$.n'), json_extract(m, '$.failures'),
                    json_extract(m, '$.suspensions')
               FROM (SELECT life_fit(age_km, failed) AS m FROM unit_life)",
            [],
            |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?)),
        )
        .unwrap();
    assert_eq!((n, failures, suspensions), (7, 2, 5));
}

#[test]
fn consistent_records_show_no_problem() {
    let conn = open();
    let n: i64 = conn
        .query_row("SELECT count(*) FROM record_problem", [], |r| r.get(0))
        .unwrap();
    assert_eq!(n, 0);
}

#[test]
fn record_problem_finds_inconsistent_records() {
    let conn = open();
    conn.execute_batch(
        "INSERT INTO unit VALUES (8, 1, 1, 'S-008');
         -- rear door of T01 is still held by fitment 5 (open)
         INSERT INTO fitment VALUES (8, 8, 1, 2, '2024-10-05 08:00:00', 75500);
         -- S-003 is in T01's front door until 2025-01-12 (fitment 3)
         INSERT INTO fitment VALUES (9, 3, 2, 2, '2024-12-21', 100);
         -- T01 odometer lower than the 75 000 of 2024-10-01
         INSERT INTO odometer_reading VALUES (1, '2024-10-02 20:00:00', 74000);",
    )
    .unwrap();
    let mut stmt = conn
        .prepare("SELECT problem, fleet_no, fitment_id, detail FROM record_problem ORDER BY 1, 3")
        .unwrap();
    let rows: Vec<(String, String, Option<i64>, String)> = stmt
        .query_map([], |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?, r.get(3)?)))
        .unwrap()
        .collect::<rusqlite::Result<_>>()
        .unwrap();
    assert_eq!(
        rows,
        vec![
            (
                "odometer goes back".to_string(),
                "T01".to_string(),
                None,
                "reading 2024-10-02 20:00:00: 74000.0 km after 75000.0 km at 2024-10-01 12:00:00"
                    .to_string()
            ),
            (
                "position holds two units".into(),
                "T01".into(),
                Some(5),
                "overlaps fitment 8".into()
            ),
            (
                "unit fitted twice at once".into(),
                "T01".into(),
                Some(3),
                "overlaps fitment 9".into()
            ),
        ]
    );
}

#[test]
fn constraints_reject_bad_records() {
    let conn = open();
    let rejects = |sql: &str, why: &str| {
        let err = conn.execute(sql, []).expect_err(sql);
        assert!(err.to_string().contains(why), "{sql}: {err}");
    };
    // Unit of class ALT into a door-actuator position.
    rejects(
        "INSERT INTO fitment VALUES (20, 7, 2, 2, '2024-12-21', 100)",
        "unit class differs from position class",
    );
    // Removal before its fitment, in time and on the odometer.
    rejects(
        "INSERT INTO removal VALUES (5, '2024-09-10', 63300, 'FAIL')",
        "before its fitment",
    );
    rejects(
        "INSERT INTO removal VALUES (5, '2024-09-20', 63100, 'FAIL')",
        "before its fitment",
    );
    // Time stamps: not a calendar date, 'T' separator, missing seconds.
    rejects(
        "INSERT INTO odometer_reading VALUES (1, '2024-02-30', 1)",
        "CHECK",
    );
    rejects(
        "INSERT INTO odometer_reading VALUES (1, '2024-02-03T10:00:00', 1)",
        "CHECK",
    );
    rejects(
        "INSERT INTO odometer_reading VALUES (1, '2024-02-03 10:00', 1)",
        "CHECK",
    );
    // Odometer must be a number >= 0 (an empty CSV field arrives as '').
    rejects(
        "INSERT INTO odometer_reading VALUES (1, '2024-02-03', '')",
        "CHECK",
    );
    rejects(
        "INSERT INTO odometer_reading VALUES (1, '2024-02-03', -5)",
        "CHECK",
    );
    // A reason cannot be both a failure and planned; one snapshot row only.
    rejects(
        "INSERT INTO removal_reason VALUES ('X', 'x', 1, 1)",
        "CHECK",
    );
    rejects("INSERT INTO snapshot VALUES (2, '2025-01-01')", "CHECK");
    // Foreign keys are on.
    rejects(
        "INSERT INTO removal VALUES (6, '2025-02-01', 95000, 'NOPE')",
        "FOREIGN KEY",
    );
    // And a good record still goes in.
    conn.execute(
        "INSERT INTO odometer_reading VALUES (1, '2024-02-03 10:00:00', 27000)",
        [],
    )
    .unwrap();
}
