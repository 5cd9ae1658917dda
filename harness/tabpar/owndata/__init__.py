"""Stage 7, own data: a user's table as a task, the zoo within a budget, diagnostics, the answer."""
