-- Schema version 3: what a search run saw of its observation. Masking and
-- clipping depend on the configuration, so they belong to the run, not the file.

ALTER TABLE search_run ADD COLUMN fraction_masked REAL;      -- channel-samples masked or clipped
ALTER TABLE search_run ADD COLUMN samples_searched INTEGER;  -- time samples whose boxcars were searched
