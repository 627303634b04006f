"""The console's screens: cautions, start, run, operator prompt, history and a run's record."""
