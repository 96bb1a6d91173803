"""Pure domain code: campaign model, IP code, units, procedures, statistics. No I/O."""
