"""Stage 3, models: the model zoo built by name, and predictions in the metric's terms."""
