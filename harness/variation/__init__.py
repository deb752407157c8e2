"""Sign-off over tolerances: spec limits judged over every part's spread.

``declare`` reads the file's declarations (the reader calls it); ``quantities`` lists what varies
and builds the varied circuits; ``batch`` evaluates a first-order circuit for a whole array of
samples at once; ``fieldvalue`` evaluates any circuit with the exact engine, one sample at a
time; ``extremes`` finds the min and max over the box; ``stats`` holds the statistics;
``analyse`` puts them together per spec'd field and ``verify`` runs the numerical engine at each
extreme corner; ``shard`` splits one file's Monte Carlo into pieces of samples for a cluster.
Nothing here is imported by either engine.
"""
