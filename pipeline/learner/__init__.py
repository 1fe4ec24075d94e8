"""The learner: PC on the graph augmented with intervention nodes."""
