-- lifedata: views that turn the records of schema.sql into one row per
-- unit life, ready for life_fit() and the other lifedata functions.
--
-- Needs the lifedata functions loaded (life_usage() gives calendar
-- durations).  Everything is "as of" the one date in table snapshot:
-- fitments after it are left out, removals after it are ignored (the unit
-- counts as in service), and odometer observations after it are not used.
--
-- Comparisons of time stamps go through julianday(), so a date without a
-- time means midnight at the start of that day.

-- Every odometer value known for a bus: the dedicated readings plus the
-- odometer written down at each fitment and removal.
CREATE VIEW odometer_log AS
SELECT bus_id, read_at AS observed_at, odometer_km, 'reading' AS source
  FROM odometer_reading
UNION ALL
SELECT bus_id, fitted_at, odometer_km, 'fitment'
  FROM fitment
UNION ALL
SELECT f.bus_id, r.removed_at, r.odometer_km, 'removal'
  FROM removal AS r
  JOIN fitment AS f ON f.fitment_id = r.fitment_id;

-- Per bus, as of the snapshot: the last known odometer and the recent
-- distance per day.  The rate runs from the last observation at least 90
-- days before the snapshot (or from the first observation, for a bus with
-- a shorter history) to the last observation on or before the snapshot;
-- km_per_day is NULL when those two are less than one day apart.
CREATE VIEW bus_usage AS
WITH snap AS (
    SELECT julianday(taken_at) AS snap_jd FROM snapshot
),
obs AS (
    SELECT o.bus_id, o.observed_at, o.odometer_km,
           julianday(o.observed_at) AS jd, snap.snap_jd
      FROM odometer_log AS o, snap
     WHERE julianday(o.observed_at) <= snap.snap_jd
),
ranked AS (
    SELECT obs.*,
           row_number() OVER (PARTITION BY bus_id
                              ORDER BY jd DESC, odometer_km DESC) AS from_last,
           row_number() OVER (PARTITION BY bus_id
                              ORDER BY jd, odometer_km) AS from_first,
           row_number() OVER (PARTITION BY bus_id, jd <= snap_jd - 90
                              ORDER BY jd DESC, odometer_km DESC) AS old_from_last
      FROM obs
),
ends AS (
    SELECT b.bus_id, b.fleet_no, d.name AS depot,
           l.observed_at AS odometer_at, l.odometer_km,
           coalesce(o.observed_at, f.observed_at) AS rate_from,
           coalesce(o.odometer_km, f.odometer_km) AS rate_from_km
      FROM bus AS b
      JOIN depot AS d ON d.depot_id = b.depot_id
      JOIN ranked AS l ON l.bus_id = b.bus_id AND l.from_last = 1
      JOIN ranked AS f ON f.bus_id = b.bus_id AND f.from_first = 1
      LEFT JOIN ranked AS o ON o.bus_id = b.bus_id AND o.old_from_last = 1
                           AND o.jd <= o.snap_jd - 90
),
spans AS (
    SELECT ends.*, life_usage(rate_from, odometer_at, 'days') AS rate_days
      FROM ends
)
SELECT bus_id, fleet_no, depot, odometer_at, odometer_km,
       rate_from, odometer_at AS rate_to,
       CASE WHEN rate_days >= 1
            THEN (odometer_km - rate_from_km) / rate_days END AS km_per_day
  FROM spans;

-- One row per fitment (unit life) fitted on or before the snapshot.
--   ended_at   removal time, or the snapshot for a unit still in service
--   ended_how  'failure' | 'planned' | 'other removal' | 'in service'
--   reason     removal reason code (NULL in service)
--   age_km     odometer at removal (or the bus's last known odometer on or
--              before the snapshot) minus odometer at fitment
--   age_days   life_usage(fitted_at, ended_at, 'days')
--   failed     1 if the removal reason counts as a failure, else 0
CREATE VIEW unit_life AS
WITH snap AS (
    SELECT taken_at, julianday(taken_at) AS snap_jd FROM snapshot
),
lives AS (
    SELECT f.fitment_id, c.code AS class, c.name AS class_name,
           sp.name AS supplier, d.name AS depot, b.fleet_no,
           p.label AS position, u.serial AS unit_serial,
           f.fitted_at,
           coalesce(r.removed_at, snap.taken_at) AS ended_at,
           CASE WHEN r.fitment_id IS NULL THEN 'in service'
                WHEN rr.is_failure = 1 THEN 'failure'
                WHEN rr.is_planned = 1 THEN 'planned'
                ELSE 'other removal' END AS ended_how,
           r.reason_code AS reason,
           coalesce(r.odometer_km, bu.odometer_km) - f.odometer_km AS age_km,
           coalesce(rr.is_failure, 0) AS failed
      FROM fitment AS f
      JOIN snap ON julianday(f.fitted_at) <= snap.snap_jd
      JOIN unit AS u ON u.unit_id = f.unit_id
      JOIN component_class AS c ON c.class_id = u.class_id
      JOIN supplier AS sp ON sp.supplier_id = u.supplier_id
      JOIN position AS p ON p.position_id = f.position_id
      JOIN bus AS b ON b.bus_id = f.bus_id
      JOIN depot AS d ON d.depot_id = b.depot_id
      LEFT JOIN removal AS r ON r.fitment_id = f.fitment_id
                            AND julianday(r.removed_at) <= snap.snap_jd
      LEFT JOIN removal_reason AS rr ON rr.code = r.reason_code
      LEFT JOIN bus_usage AS bu ON bu.bus_id = f.bus_id
)
SELECT fitment_id, class, class_name, supplier, depot, fleet_no, position,
       unit_serial, fitted_at, ended_at, ended_how, reason, age_km,
       life_usage(fitted_at, ended_at, 'days') AS age_days, failed
  FROM lives;

-- Units running at the snapshot, with their current age and the distance
-- their bus covers per day, so that "the next 30 days" can be turned into
-- kilometres (30 * km_per_day).
CREATE VIEW unit_in_service AS
SELECT l.fitment_id, l.class, l.class_name, l.supplier, l.depot, l.fleet_no,
       l.position, l.unit_serial, l.fitted_at, l.age_km, l.age_days,
       bu.km_per_day, bu.odometer_at
  FROM unit_life AS l
  JOIN fitment AS f ON f.fitment_id = l.fitment_id
  JOIN bus_usage AS bu ON bu.bus_id = f.bus_id
 WHERE l.ended_how = 'in service';

-- Record problems that the table constraints cannot catch; an empty view
-- means the records are consistent.  Looks at all records, including
-- those after the snapshot.
CREATE VIEW record_problem AS
WITH fit AS (
    SELECT f.fitment_id, f.unit_id, f.bus_id, f.position_id,
           julianday(f.fitted_at) AS fit_jd,
           julianday(r.removed_at) AS rem_jd
      FROM fitment AS f
      LEFT JOIN removal AS r ON r.fitment_id = f.fitment_id
),
log AS (
    SELECT bus_id, observed_at, source, odometer_km,
           lag(odometer_km) OVER w AS previous_km,
           lag(observed_at) OVER w AS previous_at
      FROM odometer_log
    WINDOW w AS (PARTITION BY bus_id
                 ORDER BY julianday(observed_at), odometer_km)
)
SELECT 'position holds two units' AS problem, b.fleet_no,
       a.fitment_id, 'overlaps fitment ' || o.fitment_id AS detail
  FROM fit AS a
  JOIN fit AS o ON o.bus_id = a.bus_id AND o.position_id = a.position_id
               AND o.fitment_id <> a.fitment_id
               AND (o.fit_jd > a.fit_jd
                    OR (o.fit_jd = a.fit_jd AND o.fitment_id > a.fitment_id))
               AND (a.rem_jd IS NULL OR a.rem_jd > o.fit_jd)
  JOIN bus AS b ON b.bus_id = a.bus_id
UNION ALL
SELECT 'unit fitted twice at once', b.fleet_no,
       a.fitment_id, 'overlaps fitment ' || o.fitment_id
  FROM fit AS a
  JOIN fit AS o ON o.unit_id = a.unit_id AND o.fitment_id <> a.fitment_id
               AND (o.fit_jd > a.fit_jd
                    OR (o.fit_jd = a.fit_jd AND o.fitment_id > a.fitment_id))
               AND (a.rem_jd IS NULL OR a.rem_jd > o.fit_jd)
  JOIN bus AS b ON b.bus_id = a.bus_id
UNION ALL
SELECT 'fitted before bus entered service', b.fleet_no, f.fitment_id,
       f.fitted_at || ' < ' || b.entered_service
  FROM fitment AS f
  JOIN bus AS b ON b.bus_id = f.bus_id
 WHERE julianday(f.fitted_at) < julianday(b.entered_service)
UNION ALL
SELECT 'odometer goes back', b.fleet_no, NULL,
       log.source || ' ' || log.observed_at || ': ' || log.odometer_km
       || ' km after ' || log.previous_km || ' km at ' || log.previous_at
  FROM log
  JOIN bus AS b ON b.bus_id = log.bus_id
 WHERE log.odometer_km < log.previous_km;
