# Sourced by the reference-survey scripts: the invented survey's set-up as the
# start of a `burstbook simulate` scenario (fictional telescope, site and source):
# 1024 channels over 1200–1600 MHz, 64 µs samples, 8-bit noise (mean 96, σ 12).
# Bursts ([[burst]] tables) follow it.
survey_setup() { # $1 = seed, $2 = source name, $3 = length (s), $4 = SEFD (Jy, optional)
  cat <<END
# Invented reference survey (fictional telescope, site and source).
seed = $1
[observation]
source = "$2"
telescope = "Saltmarsh 64 m"
ra_deg = 210.5
dec_deg = -20.25
start_mjd = 61020.5
length_s = $3
tsamp_s = 64.0e-6
[site]
name = "Saltmarsh Flats"
lon_deg = 12.5
lat_deg = -31.0
height_m = 300.0
[band]
first_chan_mhz = 1599.8046875
chan_step_mhz = -0.390625
n_chan = 1024
[noise]
nbits = 8
mean = 96.0
sigma = 12.0
END
  if [[ -n "${4:-}" ]]; then
    echo "sefd_jy = $4"
  fi
}
