-- 0004: every marker's own interval from the visit's data (settings v2
-- onward, metrics.Uncertainty): standard error, the interval [low, high] at
-- a level (0.95), how it was made (method, in words with its source) and,
-- for a bootstrap, the number of resamples (0 for an analytic formula).
--
-- A marker made by settings without intervals (v1), or not computable, has
-- none: all six columns are NULL. An absent interval is never written as a
-- zero-width one, since that would claim a value known exactly. The last
-- column's CHECK holds the six together: all NULL, or all set with
-- low ≤ high on a computable marker. (SQLite tests a column CHECK against
-- the rows already there when the column is added; they are all NULL.)
ALTER TABLE markers ADD COLUMN interval_se REAL CHECK (interval_se IS NULL OR interval_se >= 0);
ALTER TABLE markers ADD COLUMN interval_low REAL;
ALTER TABLE markers ADD COLUMN interval_high REAL;
ALTER TABLE markers ADD COLUMN interval_level REAL
    CHECK (interval_level IS NULL OR (interval_level > 0 AND interval_level < 1));
ALTER TABLE markers ADD COLUMN interval_method TEXT CHECK (interval_method IS NULL OR interval_method <> '');
ALTER TABLE markers ADD COLUMN interval_resamples INTEGER CHECK (
    (interval_resamples IS NULL AND interval_se IS NULL AND interval_low IS NULL AND interval_high IS NULL
     AND interval_level IS NULL AND interval_method IS NULL)
    OR (interval_resamples >= 0 AND interval_se IS NOT NULL AND interval_low IS NOT NULL
        AND interval_high IS NOT NULL AND interval_level IS NOT NULL AND interval_method IS NOT NULL
        AND interval_low <= interval_high AND computable = 1));
