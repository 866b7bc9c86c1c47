"""What a run writes: summaries, histories, fields, plots and reports."""
