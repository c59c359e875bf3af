"""What a run shows people: progress, summaries, plots and the HTML report."""
