-- 0001: the store's schema: patients, their visits, the recordings of each
-- visit, and what analysis made of them (conditions, markers, flags, display
-- products). Every table is STRICT so that a value of the wrong type is an
-- error, not a silent conversion. Times are UTC RFC 3339 text written by the
-- store from its clock; dates are civil dates YYYY-MM-DD.

-- schema_version records each migration applied; the store reads MAX(version)
-- to know what a database has had, and refuses a database newer than itself.
CREATE TABLE schema_version (
    version    INTEGER PRIMARY KEY CHECK (version > 0),
    name       TEXT NOT NULL,
    applied_at TEXT NOT NULL
) STRICT;

-- A patient is a pseudonymous code chosen by the clinic; no name, birth date
-- or identifier from a recording header is ever written here (the EDF patient
-- field is dropped at decode time). Birth year or, where the clinic wants it,
-- the birth date give the age at each visit; both may be unknown (a BIDS
-- dataset gives the age at the session instead, kept on the visit).
CREATE TABLE patients (
    id               INTEGER PRIMARY KEY,
    code             TEXT NOT NULL UNIQUE
                     CHECK (length(code) BETWEEN 1 AND 64 AND code = trim(code)),
    sex              TEXT NOT NULL DEFAULT '' CHECK (sex IN ('', 'F', 'M', 'O')),
    -- 0: unknown. The bounds catch a typed age or a two-digit year.
    birth_year       INTEGER NOT NULL DEFAULT 0
                     CHECK (birth_year = 0 OR birth_year BETWEEN 1880 AND 2200),
    birth_date       TEXT NOT NULL DEFAULT ''
                     CHECK (birth_date = '' OR (birth_date GLOB '[0-9][0-9][0-9][0-9]-[0-9][0-9]-[0-9][0-9]'
                                                AND date(birth_date) = birth_date)),
    group_name       TEXT NOT NULL DEFAULT '',
    cohort           TEXT NOT NULL DEFAULT '',
    -- 0: the default interval (12 months).
    follow_up_months INTEGER NOT NULL DEFAULT 0 CHECK (follow_up_months BETWEEN 0 AND 240),
    created_at       TEXT NOT NULL,
    updated_at       TEXT NOT NULL
) STRICT;

CREATE INDEX patients_cohort ON patients (cohort, group_name);

-- A visit is one appointment with its resting EEG. One visit per patient per
-- day: a clinic records one resting EEG per appointment, and the date is how
-- clinicians name a visit ("the March 2024 EEG"); a second file the same day
-- belongs to the same visit (as its eyes-open run) or replaces it.
-- The age at the visit is stored, not derived on read, because a BIDS
-- dataset gives only the age (no birth date) and because it must not move
-- when a birth year is corrected later without reprocessing.
CREATE TABLE visits (
    id             INTEGER PRIMARY KEY,
    patient_id     INTEGER NOT NULL REFERENCES patients (id) ON DELETE CASCADE,
    visit_date     TEXT NOT NULL
                   CHECK (visit_date GLOB '[0-9][0-9][0-9][0-9]-[0-9][0-9]-[0-9][0-9]'
                          AND date(visit_date) = visit_date),
    age_years      REAL NOT NULL DEFAULT 0 CHECK (age_years >= 0 AND age_years < 150),
    age_known      INTEGER NOT NULL DEFAULT 0 CHECK (age_known IN (0, 1)),
    context        TEXT NOT NULL DEFAULT '',
    -- The eye state the user declared for a single file ('' none), kept so
    -- that reprocessing decodes the file the same way.
    declared_state TEXT NOT NULL DEFAULT '' CHECK (declared_state IN ('', 'closed', 'open', 'unknown')),
    created_at     TEXT NOT NULL,
    UNIQUE (patient_id, visit_date)
) STRICT;

-- A recording file of a visit, kept content-addressed by its SHA-256 in the
-- data folder beside the database. The file name is not stored: it may carry
-- a patient's name. role says which part of the visit the file is: one file
-- with its own eye-state periods, or the eyes-closed or eyes-open run of two.
CREATE TABLE recordings (
    id         INTEGER PRIMARY KEY,
    visit_id   INTEGER NOT NULL REFERENCES visits (id) ON DELETE CASCADE,
    sha256     TEXT NOT NULL
               CHECK (length(sha256) = 64 AND NOT sha256 GLOB '*[^0-9a-f]*'),
    format     TEXT NOT NULL CHECK (format IN ('EDF', 'EDF+C', 'EDF+D', 'BDF', 'BDF+C', 'BDF+D')),
    size       INTEGER NOT NULL CHECK (size > 0),
    role       TEXT NOT NULL CHECK (role IN ('single', 'closed', 'open')),
    created_at TEXT NOT NULL,
    UNIQUE (visit_id, sha256),
    UNIQUE (visit_id, role)
) STRICT;

-- "Is this file known?" is asked for every file ingested.
CREATE INDEX recordings_sha256 ON recordings (sha256);

-- The conditions of a visit's (combined) recording and the quality analysis
-- found, one row per visit. The columns clinicians filter and compare on are
-- columns; the whole ingest.Conditions and metrics.Quality are kept as JSON
-- so that nothing the decoder or the analysis said is lost. Filter edges
-- carry a known flag because an absent edge is not 0 Hz.
CREATE TABLE conditions (
    visit_id              INTEGER PRIMARY KEY REFERENCES visits (id) ON DELETE CASCADE,
    format                TEXT NOT NULL,
    sample_rate           REAL NOT NULL CHECK (sample_rate > 0),
    uv_per_step           REAL NOT NULL CHECK (uv_per_step >= 0),
    bits                  INTEGER NOT NULL CHECK (bits >= 0),
    high_pass_hz          REAL NOT NULL DEFAULT 0,
    high_pass_known       INTEGER NOT NULL CHECK (high_pass_known IN (0, 1)),
    low_pass_hz           REAL NOT NULL DEFAULT 0,
    low_pass_known        INTEGER NOT NULL CHECK (low_pass_known IN (0, 1)),
    notch_hz              REAL NOT NULL DEFAULT 0,
    notch_known           INTEGER NOT NULL CHECK (notch_known IN (0, 1)),
    -- The line frequency analysis used (declared or found in the spectrum)
    -- and where it came from.
    line_frequency        REAL NOT NULL DEFAULT 0 CHECK (line_frequency >= 0),
    line_frequency_source TEXT NOT NULL DEFAULT '',
    reference             TEXT NOT NULL DEFAULT '',
    equipment             TEXT NOT NULL DEFAULT '',
    duration_s            REAL NOT NULL CHECK (duration_s >= 0),
    start_time_of_day     TEXT NOT NULL DEFAULT '',
    period_source         TEXT NOT NULL,
    clean_closed_s        REAL NOT NULL DEFAULT 0,
    clean_open_s          REAL NOT NULL DEFAULT 0,
    rejected_share        REAL NOT NULL DEFAULT 0 CHECK (rejected_share BETWEEN 0 AND 1),
    -- The processing settings of this analysis; markers repeat them so that
    -- a marker row is never read without its version.
    settings_version      TEXT NOT NULL,
    settings_hash         TEXT NOT NULL,
    conditions_json       TEXT NOT NULL CHECK (json_valid(conditions_json)),
    quality_json          TEXT NOT NULL CHECK (json_valid(quality_json)),
    -- The eye-state periods analysed (JSON list of {state,start,end}), kept
    -- because BIDS events and declared states are not in the stored file.
    periods_json          TEXT NOT NULL DEFAULT '[]' CHECK (json_valid(periods_json)),
    analysed_at           TEXT NOT NULL
) STRICT;

CREATE INDEX conditions_settings ON conditions (settings_version, settings_hash);

-- One marker of a visit. A marker that could not be computed keeps value 0
-- and a reason, never NaN or a sentinel, and the CHECK holds it to that.
CREATE TABLE markers (
    id               INTEGER PRIMARY KEY,
    visit_id         INTEGER NOT NULL REFERENCES visits (id) ON DELETE CASCADE,
    name             TEXT NOT NULL CHECK (name <> ''),
    region           TEXT NOT NULL,
    state            TEXT NOT NULL CHECK (state IN ('', 'closed', 'open', 'unknown')),
    value            REAL NOT NULL,
    unit             TEXT NOT NULL,
    computable       INTEGER NOT NULL CHECK (computable IN (0, 1)),
    reason           TEXT NOT NULL DEFAULT '',
    settings_version TEXT NOT NULL,
    settings_hash    TEXT NOT NULL,
    CHECK (computable = 1 OR reason <> ''),
    UNIQUE (visit_id, name, region, state)
) STRICT;

-- The cohort page and the export read markers by name across patients.
CREATE INDEX markers_name ON markers (name, region, state);

-- A finding about a visit (quality gate or comparability rule). markers_json
-- lists the marker names it affects ([] means all).
CREATE TABLE flags (
    id           INTEGER PRIMARY KEY,
    visit_id     INTEGER NOT NULL REFERENCES visits (id) ON DELETE CASCADE,
    rule         TEXT NOT NULL CHECK (rule <> ''),
    severity     TEXT NOT NULL CHECK (severity IN ('caution', 'not_comparable')),
    markers_json TEXT NOT NULL DEFAULT '[]' CHECK (json_valid(markers_json) AND json_type(markers_json) = 'array'),
    reason       TEXT NOT NULL,
    source       TEXT NOT NULL
) STRICT;

CREATE INDEX flags_visit ON flags (visit_id);

-- The spectra and trace excerpts the visit screen draws (metrics.Display as
-- JSON), one row per visit, read only when that screen is opened.
CREATE TABLE display_products (
    visit_id     INTEGER PRIMARY KEY REFERENCES visits (id) ON DELETE CASCADE,
    display_json TEXT NOT NULL CHECK (json_valid(display_json))
) STRICT;
