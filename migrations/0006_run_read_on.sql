-- Schema version 6: how far a search run read on into the recording that continues
-- its observation (consecutive files are joined, so a sweep crossing from one into
-- the next is searched). NULL for runs recorded before it was kept: not known.
-- A run that did not read on is searched again, and completed, when the file that
-- continues it comes; its exposure ends where its sweeps were searched.

ALTER TABLE search_run ADD COLUMN run_on_s REAL;  -- seconds read on; 0 when none
