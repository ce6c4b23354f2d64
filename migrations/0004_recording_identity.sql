-- Schema version 4: an observation is a recording, whatever its header file is
-- called or how it is written. data_sha256 is the SHA-256 of the samples alone (the
-- .npy file of a native observation, the SUBINT rows of a FITS file); NULL for an
-- observation recorded before, until its file is recorded again.
ALTER TABLE observation ADD COLUMN data_sha256 TEXT;
CREATE UNIQUE INDEX observation_by_data ON observation (data_sha256);
