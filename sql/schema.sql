-- lifedata: tables for maintenance records of a vehicle fleet.
--
-- A *position* is a mounting place for one component class on a bus (for a
-- door actuator: 'front door', 'centre door', 'rear door').  Over time a bus
-- position holds a sequence of *units*; each *fitment* puts one unit into
-- one bus position at a time stamp and odometer reading, and starts a life
-- of that unit.  A fitment ends with at most one *removal* (time stamp,
-- odometer, reason) or is still in service.  The *removal_reason* table says
-- whether a reason counts as a failure, as a planned replacement, or as
-- neither (accident damage, campaign, no fault found, ...).  Odometer
-- readings per bus give the kilometres of units still running.  The
-- one-row *snapshot* table holds the date of the analysis; records after it
-- are ignored by the views in views.sql, so an older date replays the fleet
-- as it stood then.
--
-- Time stamps are ISO-8601 text, either 'YYYY-MM-DD' or
-- 'YYYY-MM-DD HH:MM:SS' (local time, no zone), so that text order is time
-- order.  Odometer values are kilometres.

PRAGMA foreign_keys = ON;

CREATE TABLE depot (
    depot_id   INTEGER PRIMARY KEY,
    code       TEXT NOT NULL UNIQUE CHECK (length(code) BETWEEN 1 AND 12),
    name       TEXT NOT NULL CHECK (length(name) > 0)
);

CREATE TABLE bus (
    bus_id           INTEGER PRIMARY KEY,
    fleet_no         TEXT NOT NULL UNIQUE CHECK (length(fleet_no) > 0),
    depot_id         INTEGER NOT NULL REFERENCES depot (depot_id),
    entered_service  TEXT NOT NULL CHECK (
        entered_service GLOB '[0-9][0-9][0-9][0-9]-[0-9][0-9]-[0-9][0-9]'
        AND date(entered_service) = entered_service)
);

CREATE TABLE component_class (
    class_id   INTEGER PRIMARY KEY,
    code       TEXT NOT NULL UNIQUE CHECK (length(code) BETWEEN 1 AND 12),
    name       TEXT NOT NULL UNIQUE CHECK (length(name) > 0)
);

CREATE TABLE supplier (
    supplier_id INTEGER PRIMARY KEY,
    name        TEXT NOT NULL UNIQUE CHECK (length(name) > 0)
);

-- Mounting positions of a class on a bus.
CREATE TABLE position (
    position_id INTEGER PRIMARY KEY,
    class_id    INTEGER NOT NULL REFERENCES component_class (class_id),
    code        TEXT NOT NULL CHECK (length(code) > 0),
    label       TEXT NOT NULL CHECK (length(label) > 0),
    UNIQUE (class_id, code)
);

-- One physical unit (serial-numbered part).  A unit may be fitted more than
-- once (after repair); each fitment is a new life.
CREATE TABLE unit (
    unit_id     INTEGER PRIMARY KEY,
    class_id    INTEGER NOT NULL REFERENCES component_class (class_id),
    supplier_id INTEGER NOT NULL REFERENCES supplier (supplier_id),
    serial      TEXT NOT NULL CHECK (length(serial) > 0),
    UNIQUE (supplier_id, serial)
);

CREATE TABLE fitment (
    fitment_id  INTEGER PRIMARY KEY,
    unit_id     INTEGER NOT NULL REFERENCES unit (unit_id),
    bus_id      INTEGER NOT NULL REFERENCES bus (bus_id),
    position_id INTEGER NOT NULL REFERENCES position (position_id),
    fitted_at   TEXT NOT NULL CHECK (
        (fitted_at GLOB '[0-9][0-9][0-9][0-9]-[0-9][0-9]-[0-9][0-9]'
         OR fitted_at GLOB
            '[0-9][0-9][0-9][0-9]-[0-9][0-9]-[0-9][0-9] [0-9][0-9]:[0-9][0-9]:[0-9][0-9]')
        AND date(fitted_at) = substr(fitted_at, 1, 10)
        AND (length(fitted_at) = 10 OR time(fitted_at) = substr(fitted_at, 12))),
    odometer_km REAL NOT NULL CHECK (typeof(odometer_km) IN ('integer', 'real')
                                     AND odometer_km >= 0)
);
CREATE INDEX fitment_by_bus_position ON fitment (bus_id, position_id, fitted_at);
CREATE INDEX fitment_by_unit ON fitment (unit_id, fitted_at);

CREATE TABLE removal_reason (
    code        TEXT PRIMARY KEY CHECK (length(code) > 0),
    description TEXT NOT NULL CHECK (length(description) > 0),
    is_failure  INTEGER NOT NULL CHECK (is_failure IN (0, 1)),
    is_planned  INTEGER NOT NULL CHECK (is_planned IN (0, 1)),
    CHECK (NOT (is_failure = 1 AND is_planned = 1))
);

-- At most one removal per fitment.
CREATE TABLE removal (
    fitment_id  INTEGER PRIMARY KEY REFERENCES fitment (fitment_id),
    removed_at  TEXT NOT NULL CHECK (
        (removed_at GLOB '[0-9][0-9][0-9][0-9]-[0-9][0-9]-[0-9][0-9]'
         OR removed_at GLOB
            '[0-9][0-9][0-9][0-9]-[0-9][0-9]-[0-9][0-9] [0-9][0-9]:[0-9][0-9]:[0-9][0-9]')
        AND date(removed_at) = substr(removed_at, 1, 10)
        AND (length(removed_at) = 10
             OR time(removed_at) = substr(removed_at, 12))),
    odometer_km REAL NOT NULL CHECK (typeof(odometer_km) IN ('integer', 'real')
                                     AND odometer_km >= 0),
    reason_code TEXT NOT NULL REFERENCES removal_reason (code)
);

CREATE TABLE odometer_reading (
    bus_id      INTEGER NOT NULL REFERENCES bus (bus_id),
    read_at     TEXT NOT NULL CHECK (
        (read_at GLOB '[0-9][0-9][0-9][0-9]-[0-9][0-9]-[0-9][0-9]'
         OR read_at GLOB
            '[0-9][0-9][0-9][0-9]-[0-9][0-9]-[0-9][0-9] [0-9][0-9]:[0-9][0-9]:[0-9][0-9]')
        AND date(read_at) = substr(read_at, 1, 10)
        AND (length(read_at) = 10 OR time(read_at) = substr(read_at, 12))),
    odometer_km REAL NOT NULL CHECK (typeof(odometer_km) IN ('integer', 'real')
                                     AND odometer_km >= 0),
    PRIMARY KEY (bus_id, read_at)
);

-- The analysis date: exactly one row.
CREATE TABLE snapshot (
    snapshot_id INTEGER PRIMARY KEY CHECK (snapshot_id = 1),
    taken_at    TEXT NOT NULL CHECK (
        (taken_at GLOB '[0-9][0-9][0-9][0-9]-[0-9][0-9]-[0-9][0-9]'
         OR taken_at GLOB
            '[0-9][0-9][0-9][0-9]-[0-9][0-9]-[0-9][0-9] [0-9][0-9]:[0-9][0-9]:[0-9][0-9]')
        AND date(taken_at) = substr(taken_at, 1, 10)
        AND (length(taken_at) = 10 OR time(taken_at) = substr(taken_at, 12)))
);

-- Rules that span tables.

-- The unit must be of the class the position is for.
CREATE TRIGGER fitment_class_matches_position
BEFORE INSERT ON fitment
WHEN (SELECT class_id FROM unit WHERE unit_id = NEW.unit_id)
     IS NOT (SELECT class_id FROM position WHERE position_id = NEW.position_id)
BEGIN
    SELECT RAISE(ABORT, 'fitment: unit class differs from position class');
END;

CREATE TRIGGER fitment_class_matches_position_on_update
BEFORE UPDATE OF unit_id, position_id ON fitment
WHEN (SELECT class_id FROM unit WHERE unit_id = NEW.unit_id)
     IS NOT (SELECT class_id FROM position WHERE position_id = NEW.position_id)
BEGIN
    SELECT RAISE(ABORT, 'fitment: unit class differs from position class');
END;

-- A removal cannot precede its fitment, in time or on the odometer.
CREATE TRIGGER removal_after_fitment
BEFORE INSERT ON removal
WHEN EXISTS (SELECT 1 FROM fitment f
             WHERE f.fitment_id = NEW.fitment_id
               AND (NEW.removed_at < f.fitted_at
                    OR NEW.odometer_km < f.odometer_km))
BEGIN
    SELECT RAISE(ABORT, 'removal: before its fitment (time or odometer)');
END;

CREATE TRIGGER removal_after_fitment_on_update
BEFORE UPDATE OF fitment_id, removed_at, odometer_km ON removal
WHEN EXISTS (SELECT 1 FROM fitment f
             WHERE f.fitment_id = NEW.fitment_id
               AND (NEW.removed_at < f.fitted_at
                    OR NEW.odometer_km < f.odometer_km))
BEGIN
    SELECT RAISE(ABORT, 'removal: before its fitment (time or odometer)');
END;
