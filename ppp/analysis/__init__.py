"""Stage 4: observables from SCF and CIS solutions."""
