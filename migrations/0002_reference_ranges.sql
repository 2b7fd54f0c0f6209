-- 0002: reference ranges (owned by package trends).
--
-- One row per marker, region, eye state and age band [age_min, age_max) of
-- one source. Values and citations come only from ../shared/REFERENCES.md
-- section 1; nothing here is a diagnostic threshold, and every screen that
-- shows a row says "advisory, literature reference, not a diagnosis".
--
-- Sets: one source per set, so that a 70-year-old can be shown both the adult
-- limits and the older-adult reports without age bands overlapping within a
-- set. trends.LiteratureSets lists them; a clinic's own file gets a set name
-- of its own (trends.ParseRangesTSV, store.ReplaceReferenceRanges).
--
-- Status: 'checked' when REFERENCES.md read the number in the source's
-- abstract or in a text quoting it (the note says which), 'from memory' when
-- it was recalled and waits for checking.
--
-- Markers with no trustworthy published range get no row (trends.NoRangeReason
-- says why): alpha reactivity, theta/alpha ratio, slowing ratio, aperiodic
-- exponent. No row gives an expected yearly change for age: REFERENCES.md
-- says not to show a per-decade rate, the sources disagreeing.
--
-- age_max 120 stands for "no upper age given by the source".

CREATE TABLE reference_ranges (
    id INTEGER PRIMARY KEY,
    set_name TEXT NOT NULL,
    marker TEXT NOT NULL,
    region TEXT NOT NULL,
    state TEXT NOT NULL,
    -- an age band is [age_min, age_max) in years
    age_min REAL NOT NULL,
    age_max REAL NOT NULL,
    -- limits, or mean and SD; NULL where the source gives none
    lower REAL,
    upper REAL,
    mean REAL,
    sd REAL,
    expected_change_per_year REAL,
    population TEXT NOT NULL,
    method TEXT NOT NULL,
    bands TEXT NOT NULL,
    citation TEXT NOT NULL,
    status TEXT NOT NULL CHECK (status IN ('checked','from memory')),
    note TEXT NOT NULL DEFAULT '',
    -- rules the loader (trends.NewRanges) also checks, kept in the schema so
    -- that no writer can store a row that cannot be read back
    CHECK (age_min >= 0 AND age_min < age_max),
    CHECK (lower IS NULL OR upper IS NULL OR lower <= upper),
    CHECK (sd IS NULL OR sd > 0),
    CHECK (citation <> ''),
    UNIQUE (set_name, marker, region, state, age_min)
) STRICT;

INSERT INTO reference_ranges
    (set_name, marker, region, state, age_min, age_max, lower, upper, mean, sd, expected_change_per_year,
     population, method, bands, citation, status, note)
VALUES
    ('literature', 'pdr_frequency', 'posterior', 'closed', 15, 120, 8.5, 11.5, NULL, NULL, NULL,
     'healthy adolescents; the limits are stated for adolescents and adults',
     'quantitative analysis of the EEG posterior-dominant rhythm (method details not read)',
     'posterior dominant rhythm frequency in Hz (the source''s band definitions not read)',
     'Marcuse LV, Schneider M, Mortati KA, Donnelly KM, Arnedo V, Grant AC (2008). Quantitative analysis of the EEG posterior-dominant rhythm in healthy adolescents. Clin Neurophysiol 119(8):1778–1781. doi:10.1016/j.clinph.2008.02.023',
     'checked',
     'abstract: below 8.5 Hz or above 11.5 Hz "should be considered abnormal in adolescents and adults"'),

    ('literature', 'pdr_asymmetry', 'posterior', 'closed', 18, 120, -0.5, 0.5, NULL, NULL, NULL,
     'terminology for adult critical care EEG, not a normative sample',
     'standardised EEG terminology: a left/right PDR difference of 0.5–1 Hz is "mild", more than 1 Hz "marked" asymmetry',
     'posterior dominant rhythm frequency, left against right, in Hz',
     'Hirsch LJ et al. (2013). ACNS Standardized Critical Care EEG Terminology: 2012 version. J Clin Neurophysiol 30(1):1–27',
     'checked',
     'secondary (read in a text quoting the source): within ±0.5 Hz no asymmetry is named; background terminology, not a normal limit; age 18 is longwave''s reading of "adult"'),

    ('literature-common-practice', 'pdr_frequency', 'posterior', 'closed', 18, 120, 8, NULL, NULL, NULL, NULL,
     'adults',
     'visual reading of the posterior dominant rhythm (common practice)',
     'posterior dominant rhythm frequency in Hz',
     'clinical references on normal EEG waveforms (common practice)',
     'checked',
     'secondary: 8 Hz as the generally accepted lower limit of normal in adults; no upper limit given; age 18 is longwave''s reading of "adults"'),

    ('literature-elderly-1989', 'pdr_frequency', 'posterior', 'closed', 60, 120, 8.34, 10.62, 9.48, 0.57, NULL,
     '50 healthy elderly controls',
     'dominant occipital (alpha) rhythm frequency, reported as mean ± SD; the limits shown are mean ± 2 SD',
     'dominant occipital (alpha) rhythm frequency in Hz',
     'Dominant occipital (alpha) rhythm frequency in early stage Alzheimer''s disease and depression. Electroencephalogr Clin Neurophysiol 1989;73(5):427–432. doi:10.1016/0013-4694(89)90092-8 (authors from memory: Prinz PN, Vitiello MV)',
     'checked',
     'abstract: reported in 50 healthy elderly controls, 9.48 ± 0.57 Hz; shown as "reported in", not a normal limit; the authors'' names are from memory; age 60 and over is longwave''s reading of "elderly" (the source''s age range not read)'),

    ('literature-elderly-1986', 'pdr_frequency', 'posterior', 'closed', 60, 120, NULL, NULL, 9.46, NULL, NULL,
     '47 normal elderly',
     'EEG in the normal elderly; reported mean, no difference from 40–60-year-olds',
     'posterior dominant (alpha) rhythm frequency in Hz',
     'The EEG in the normal elderly: a contribution to the interpretation of aging and dementia. Electroencephalogr Clin Neurophysiol 1986;63(6):540–546. doi:10.1016/0013-4694(86)90141-0',
     'checked',
     'abstract: reported mean 9.46 Hz in 47 normal elderly, no SD in the abstract; age 60 and over is longwave''s reading of "elderly" (the source''s age range not read)');
