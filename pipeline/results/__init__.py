"""The output layer: result objects, their files, summaries, terminal tables and the HTML report.

Every command prints and writes its results through this package; nothing here computes a
test or learns a graph (that is `pipeline.analyses`, `pipeline.learner` and below).
"""
