/**
 * The registry's schema, one migration per version (SQLite's user_version holds the version
 * reached). A migration is only ever appended, never edited: a database made by an older
 * cellvigil is brought forward step by step.
 */
export const MIGRATIONS: readonly string[] = [
  // 1: cells, runs, and a per-cell summary kept beside them for fast lists.
  `
  CREATE TABLE cells (
    cell_id       TEXT PRIMARY KEY,
    chemistry     TEXT NOT NULL,
    rated_Ah      REAL NOT NULL CHECK (rated_Ah > 0),
    source        TEXT NOT NULL DEFAULT '',
    notes         TEXT NOT NULL DEFAULT '',
    registered_at TEXT NOT NULL
  ) WITHOUT ROWID;

  -- Clustered by cell and time, so that a cell's runs sit together on disk: a history or a
  -- graded list reads a page or two per cell.
  CREATE TABLE runs (
    run_key           TEXT NOT NULL UNIQUE,
    cell_id           TEXT NOT NULL,
    folder            TEXT NOT NULL,
    started_ms        INTEGER NOT NULL,
    started_wall      TEXT NOT NULL,
    ended_wall        TEXT,
    end_reason        TEXT NOT NULL,
    chemistry         TEXT,
    cells             INTEGER,
    capacity_Ah       REAL NOT NULL,
    capacity_u_Ah     REAL,
    energy_Wh         REAL NOT NULL,
    energy_u_Wh       REAL,
    dc_resistance_ohm REAL,
    mean_voltage_V    REAL,
    end_voltage_V     REAL,
    mean_current_A    REAL,
    temperature_C     REAL,
    duration_s        REAL NOT NULL,
    calibration_id    TEXT NOT NULL,
    filed_at          TEXT NOT NULL,
    PRIMARY KEY (cell_id, started_ms, run_key)
  ) WITHOUT ROWID;

  -- The latest run that reached the cutoff, per cell id (registered or not): what lists show.
  CREATE TABLE cell_summary (
    cell_id           TEXT PRIMARY KEY,
    runs              INTEGER NOT NULL,
    last_tested_ms    INTEGER,
    capacity_Ah       REAL,
    capacity_u_Ah     REAL,
    dc_resistance_ohm REAL,
    capacity_ms       INTEGER
  ) WITHOUT ROWID;
  `,
  // 2: a program run's cycles (one row per full discharge, linked to its run), and how many
  // full cycles the run had (null for a run that was one discharge).
  `
  ALTER TABLE runs ADD COLUMN full_cycles INTEGER;

  CREATE TABLE cycles (
    run_key        TEXT NOT NULL,
    segment        INTEGER NOT NULL,
    cycle          INTEGER NOT NULL,
    capacity_Ah    REAL NOT NULL,
    capacity_u_Ah  REAL,
    energy_Wh      REAL,
    energy_u_Wh    REAL,
    mean_current_A REAL,
    of_first       REAL,
    PRIMARY KEY (run_key, segment)
  ) WITHOUT ROWID;
  `,
  // 3: grading's summary of many cells reads eight narrow columns of every run of each cell: an
  // index holding just those, in cell and time order, spares it the wide run rows.
  `
  CREATE INDEX runs_for_grading ON runs (cell_id, started_ms, end_reason, calibration_id,
    capacity_Ah, capacity_u_Ah, dc_resistance_ohm, full_cycles);
  `,
];
