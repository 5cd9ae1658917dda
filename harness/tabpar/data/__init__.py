"""Stage 1, data: suite files → tasks → source rows (+ fingerprint) → target and holdout split; exported splits."""
