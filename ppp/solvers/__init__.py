"""Stage 3: closed-shell SCF and CIS on plain arrays."""
