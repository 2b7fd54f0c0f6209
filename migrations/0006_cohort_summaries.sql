-- 0006: what the cohort screen keeps of each patient (owner: the store; the
-- entry itself is package trends' CohortEntry in its binary form), so that
-- the first cohort page after a start reads one row per patient instead of
-- every visit of every patient.
--
-- An entry holds what depends only on the patient and the patient's own
-- visits: counts, first and last dates, the latest visit's flags, the
-- comparable points of the main markers. The verdicts against the clinic's
-- controls are not kept: a change to any control may move every verdict, so
-- they are worked out again from the kept points at every cohort build.
-- format is trends.EntryFormat and settings_* the processing settings the
-- entry judged comparability by; a row of another format or other settings
-- is rebuilt from the visits.
CREATE TABLE cohort_summaries (
    patient_id       INTEGER PRIMARY KEY REFERENCES patients (id) ON DELETE CASCADE,
    format           INTEGER NOT NULL CHECK (format > 0),
    settings_version TEXT NOT NULL,
    settings_hash    TEXT NOT NULL,
    entry            BLOB NOT NULL CHECK (length(entry) > 0)
) STRICT;

-- The patients whose entry no longer matches their rows. The triggers below
-- put a patient here in the same statement that changes anything an entry
-- is made from, whoever writes (an ingest, a reprocess, a merge's row
-- copies, a deletion), and the store rebuilds the entries of the patients
-- listed here before that transaction commits. (The triggers test for a
-- listed patient instead of INSERT OR IGNORE: inside a trigger SQLite
-- applies the outer statement's conflict rule, and the patients' upsert
-- has its own.) No foreign key: a deleted
-- patient's number may be listed until then, and is dropped with it.
CREATE TABLE cohort_dirty (
    patient_id INTEGER PRIMARY KEY
) STRICT;

-- A patient added, or changed in a fact the entry holds (birth year and
-- date do not count: each visit keeps its own age).
CREATE TRIGGER cohort_patient_added AFTER INSERT ON patients BEGIN
    INSERT INTO cohort_dirty (patient_id) SELECT NEW.id WHERE NEW.id NOT IN (SELECT patient_id FROM cohort_dirty);
END;
CREATE TRIGGER cohort_patient_changed AFTER UPDATE ON patients
WHEN OLD.code IS NOT NEW.code OR OLD.group_name IS NOT NEW.group_name OR OLD.cohort IS NOT NEW.cohort
     OR OLD.follow_up_months IS NOT NEW.follow_up_months OR OLD.id IS NOT NEW.id BEGIN
    INSERT INTO cohort_dirty (patient_id) SELECT id FROM (SELECT OLD.id AS id UNION SELECT NEW.id)
        WHERE id NOT IN (SELECT patient_id FROM cohort_dirty);
END;

-- A visit added, changed or deleted.
CREATE TRIGGER cohort_visit_added AFTER INSERT ON visits BEGIN
    INSERT INTO cohort_dirty (patient_id) SELECT NEW.patient_id WHERE NEW.patient_id NOT IN (SELECT patient_id FROM cohort_dirty);
END;
CREATE TRIGGER cohort_visit_changed AFTER UPDATE ON visits BEGIN
    INSERT INTO cohort_dirty (patient_id) SELECT id FROM (SELECT OLD.patient_id AS id UNION SELECT NEW.patient_id)
        WHERE id NOT IN (SELECT patient_id FROM cohort_dirty);
END;
CREATE TRIGGER cohort_visit_deleted AFTER DELETE ON visits BEGIN
    INSERT INTO cohort_dirty (patient_id) SELECT OLD.patient_id WHERE OLD.patient_id NOT IN (SELECT patient_id FROM cohort_dirty);
END;

-- A visit's conditions, markers or flags added, changed or deleted. (When
-- the visit itself is being deleted its row is gone already and the SELECT
-- finds nothing; the visit's own trigger has listed the patient.)
CREATE TRIGGER cohort_conditions_added AFTER INSERT ON conditions BEGIN
    INSERT INTO cohort_dirty (patient_id) SELECT patient_id FROM visits
        WHERE id = NEW.visit_id AND patient_id NOT IN (SELECT patient_id FROM cohort_dirty);
END;
CREATE TRIGGER cohort_conditions_changed AFTER UPDATE ON conditions BEGIN
    INSERT INTO cohort_dirty (patient_id) SELECT patient_id FROM visits
        WHERE id IN (OLD.visit_id, NEW.visit_id) AND patient_id NOT IN (SELECT patient_id FROM cohort_dirty);
END;
CREATE TRIGGER cohort_conditions_deleted AFTER DELETE ON conditions BEGIN
    INSERT INTO cohort_dirty (patient_id) SELECT patient_id FROM visits
        WHERE id = OLD.visit_id AND patient_id NOT IN (SELECT patient_id FROM cohort_dirty);
END;
CREATE TRIGGER cohort_marker_added AFTER INSERT ON markers BEGIN
    INSERT INTO cohort_dirty (patient_id) SELECT patient_id FROM visits
        WHERE id = NEW.visit_id AND patient_id NOT IN (SELECT patient_id FROM cohort_dirty);
END;
CREATE TRIGGER cohort_marker_changed AFTER UPDATE ON markers BEGIN
    INSERT INTO cohort_dirty (patient_id) SELECT patient_id FROM visits
        WHERE id IN (OLD.visit_id, NEW.visit_id) AND patient_id NOT IN (SELECT patient_id FROM cohort_dirty);
END;
CREATE TRIGGER cohort_marker_deleted AFTER DELETE ON markers BEGIN
    INSERT INTO cohort_dirty (patient_id) SELECT patient_id FROM visits
        WHERE id = OLD.visit_id AND patient_id NOT IN (SELECT patient_id FROM cohort_dirty);
END;
CREATE TRIGGER cohort_flag_added AFTER INSERT ON flags BEGIN
    INSERT INTO cohort_dirty (patient_id) SELECT patient_id FROM visits
        WHERE id = NEW.visit_id AND patient_id NOT IN (SELECT patient_id FROM cohort_dirty);
END;
CREATE TRIGGER cohort_flag_changed AFTER UPDATE ON flags BEGIN
    INSERT INTO cohort_dirty (patient_id) SELECT patient_id FROM visits
        WHERE id IN (OLD.visit_id, NEW.visit_id) AND patient_id NOT IN (SELECT patient_id FROM cohort_dirty);
END;
CREATE TRIGGER cohort_flag_deleted AFTER DELETE ON flags BEGIN
    INSERT INTO cohort_dirty (patient_id) SELECT patient_id FROM visits
        WHERE id = OLD.visit_id AND patient_id NOT IN (SELECT patient_id FROM cohort_dirty);
END;

-- The course screen's other cold cost: it overlays the posterior eyes-closed
-- spectrum of every visit, and reading one spectrum out of display_json
-- means parsing the whole document, the other regions' and states' spectra
-- and the trace excerpts with it (40 visits: about 150 ms in Go, 30 ms in
-- SQLite's json_extract). So each visit's posterior eyes-closed spectra
-- (normally one) are also kept here, written with the display products, in
-- the store's small binary form (format 1: server/store/spectra.go), which
-- reads without a decimal parse of every number. An empty list says the
-- visit has none. display_json keeps them too, for the visit screen; this
-- copy is about a twentieth of a visit's display products. Visits stored
-- before this migration get their row the first time the course reads it.
CREATE TABLE overlay_spectra (
    visit_id INTEGER PRIMARY KEY REFERENCES visits (id) ON DELETE CASCADE,
    format   INTEGER NOT NULL CHECK (format > 0),
    spectra  BLOB NOT NULL
) STRICT;
