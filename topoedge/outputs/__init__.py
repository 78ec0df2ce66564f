"""Results (stage 6): the files of every command, written atomically, and the text report of a run."""
